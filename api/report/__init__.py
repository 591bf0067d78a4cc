"""The printable cold-chain report: per unit, time in range, each excursion with its mean
kinetic temperature, the temperature plot with limits, acknowledgements with their notes, the
period's health figures, and the cautions. ``gather`` reads the record, ``write_pdf`` prints
it, ``write_report`` does both.
"""

from pathlib import Path
from typing import BinaryIO

from sqlalchemy.engine import Engine

from tecfleet.api.report.pdf import CAUTIONS, write_pdf
from tecfleet.api.report.record import (
    Excursion,
    UnitRecord,
    excursions,
    gather,
    period_ms,
    units_of,
)

__all__ = [
    "CAUTIONS",
    "Excursion",
    "UnitRecord",
    "excursions",
    "gather",
    "period_ms",
    "units_of",
    "write_pdf",
    "write_report",
]


def write_report(
    engine: Engine,
    out: Path | BinaryIO,
    start: str,
    end: str,
    *,
    device_id: str | None,
    site: str | None,
) -> int:
    """Write the report of one unit or every unit of a site over the period from ``start``
    to ``end`` (dates, the end day included, or RFC 3339) to ``out``; the units written."""
    start_ms, end_ms = period_ms(start, end)
    records = [gather(engine, d, start_ms, end_ms) for d in units_of(engine, device_id, site)]
    write_pdf(records, out)
    return len(records)
