"""A test-only app holding one extra entry kind, written by following DEVELOPERS.md's recipe
"Adding an entry kind" (its model and its form; it has no due rule). Tests install it with
``override_settings(INSTALLED_APPS=...)`` and create its table themselves; it has no
migrations and is never installed outside those tests."""
