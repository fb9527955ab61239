"""Uploaded kit return files waiting between the merge preview and its confirmation, beside
the import files (``fleet.staging``)."""

from __future__ import annotations

from fleet.staging import StagingArea

RETURN_FILES = StagingArea(folder="kits", suffix=".zip")

path_of = RETURN_FILES.path_of
stage = RETURN_FILES.stage
staged = RETURN_FILES.staged_path
discard = RETURN_FILES.discard
