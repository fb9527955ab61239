"""PDF documents: prepared dataclasses (everything a page states) and their reportlab renderers,
plus the certificate services. Shared look in ``base``."""
