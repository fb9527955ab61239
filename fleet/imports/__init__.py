"""Importing history from spreadsheets: reading the file and its cells (``parsing``, pure),
the columns of each kind (``columns``) and the export in the same columns (``export``).
The writes are ``fleet.services.imports``."""
