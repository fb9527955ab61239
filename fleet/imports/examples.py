"""The example spreadsheets (invented data) offered on the import page, to import into the
demo: first the units, then their history."""

from __future__ import annotations

from pathlib import Path

EXAMPLES_DIR = Path(__file__).resolve().parent.parent / "demo" / "examples"

# (file name, import kind, what it holds), in the order to import them.
EXAMPLES: tuple[tuple[str, str, str], ...] = (
    ("units.csv", "units", "Three more units for the demo fleet"),
    ("history.csv", "visits", "Their bench visits, one row per entry"),
    ("deployments.csv", "deployments", "Their past deployments"),
)


def example_path(name: str) -> Path | None:
    for file_name, _, _ in EXAMPLES:
        if file_name == name:
            return EXAMPLES_DIR / file_name
    return None
