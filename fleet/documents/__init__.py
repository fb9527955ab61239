"""Documents: prepared dataclasses (everything a page states) and their renderers (reportlab
PDFs, the iCalendar feed). No writes here; certificate writes live in ``fleet.services``.
Shared PDF look in ``base``."""
