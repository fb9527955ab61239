import pytest


@pytest.fixture(autouse=True)
def _staging_in_tmp(settings, tmp_path):
    settings.IMPORT_STAGING_ROOT = tmp_path / "import-staging"
