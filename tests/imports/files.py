"""Small CSV files for the import tests."""

import csv
import datetime as dt
import io

VISIT_HEADER = ["unit", "visit_opened_at", "place", "entry", "position", "mass_g"]


def csv_bytes(rows, *, delimiter=",", bom=False) -> bytes:
    buffer = io.StringIO()
    csv.writer(buffer, delimiter=delimiter, lineterminator="\r\n").writerows(rows)
    return (("\ufeff" if bom else "") + buffer.getvalue()).encode("utf-8")


def anode_history(serials, *, rows: int, place: str, first=dt.date(2023, 1, 2)) -> list[list[str]]:
    """``rows`` anode readings (two per visit, positions "Anode 1" and "Anode 2"), a unit's
    visits a day apart and in date order, header first."""
    table = [list(VISIT_HEADER)]  # a copy: tests add columns to it
    visits = rows // 2
    per_unit = -(-visits // len(serials))
    for n in range(visits):
        serial = serials[n // per_unit]
        day = first + dt.timedelta(days=n % per_unit)
        mass = 400.0 - 0.1 * (n % per_unit)
        for position in ("Anode 1", "Anode 2"):
            table.append([serial, day.isoformat(), place, "anode_reading", position, f"{mass:g}"])
    return table
