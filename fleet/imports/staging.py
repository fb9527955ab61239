"""Uploaded import files waiting between the preview and the confirm (``fleet.staging``)."""

from __future__ import annotations

from fleet.staging import StagingArea

IMPORTS = StagingArea(folder="", suffix=".csv")

stage = IMPORTS.stage
staged = IMPORTS.staged
discard = IMPORTS.discard
