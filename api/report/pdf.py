"""The cold-chain report printed with matplotlib: two A4 pages per unit, the record and its
plots. Fonts are embedded as TrueType so that the text can be searched and copied."""

from __future__ import annotations

import textwrap
from collections.abc import Sequence
from datetime import UTC, datetime
from pathlib import Path
from typing import BinaryIO

import matplotlib

matplotlib.use("Agg")  # no display: the report is written on servers and in the command line

import matplotlib.dates as mdates
import matplotlib.pyplot as plt
import numpy as np
from matplotlib.axes import Axes
from matplotlib.backends.backend_pdf import PdfPages
from matplotlib.figure import Figure

from tecfleet.api import readout
from tecfleet.api.report.record import HEALTH_KEYS, UnitRecord

__all__ = ["CAUTIONS", "write_pdf"]

A4_IN = (8.27, 11.69)
#: Excursions listed in full per unit; the rest are counted.
MAX_LISTED = 25

CAUTIONS = (
    "This record reports what the unit's sensors and tecfleet's models say. It supports, and "
    "does not replace, the monitoring that medicines, vaccines and samples require.",
    "Whether stock exposed to an excursion may still be used is decided by following the "
    "medicine maker's instructions and local practice, by the responsible pharmacist or the maker; "
    "the mean kinetic temperature is an aid to that judgement, not a verdict.",
    "Mean kinetic temperature: USP <1079>, activation energy 83.144 kJ/mol, over equally spaced "
    "readings.",
)


def _ms(ms: float) -> datetime:
    return datetime.fromtimestamp(ms / 1000.0, tz=UTC)


def _lines(rec: UnitRecord) -> list[str]:
    band = rec.band
    lines = [
        f"Unit {rec.device_id}" + (f" — {rec.label}" if rec.label else ""),
        f"Site: {rec.site or 'not registered'}",
        f"Period: {readout.timestamp(rec.start_ms)} to {readout.timestamp(rec.end_ms)}",
        f"Limits: {readout.temperature(band.low_c)} to {readout.temperature(band.high_c)} "
        f"({band.source})",
        f"Readings: {rec.t_cabinet.size}",
        "Time in range: "
        + (readout.NO_DATA if rec.time_in_range_pct is None else f"{rec.time_in_range_pct:.1f} %"),
        "Mean kinetic temperature of the period: " + readout.temperature(rec.mkt_c),
        "",
        f"Excursions: {len(rec.excursions)}",
    ]
    for k, e in enumerate(rec.excursions[:MAX_LISTED], 1):
        lines.append(
            f"  {k}. {readout.timestamp(e.start_ms)}, {readout.duration(e.duration_s)} {e.side} "
            f"the band, peak {readout.temperature(e.peak_c)}, "
            f"mean kinetic temperature {readout.temperature(e.mkt_c)}"
        )
    if len(rec.excursions) > MAX_LISTED:
        lines.append(f"  ... and {len(rec.excursions) - MAX_LISTED} more")
    lines += ["", f"Alerts in the period: {len(rec.alerts)}"]
    for a in rec.alerts:
        lines.append(f"  #{a['id']} {a['kind']} ({a['severity']}, {a['state']}), opened "
                     f"{readout.timestamp(a['opened_ms'])}: {a['summary']}")  # fmt: skip
        for h in a["trail"]:
            if h["to_state"] == "acknowledged":
                note = f': "{h["note"]}"' if h["note"] else " (no note)"
                lines.append(
                    f"     acknowledged {readout.timestamp(h['at_ms'])} by {h['actor']}{note}"
                )
    lines += ["", "Health figures of the period (newest in the period):"]
    for key, name in HEALTH_KEYS.items():
        points = rec.health.get(key) or []
        text = readout.estimate_text(key, points[-1][1]) if points else readout.NO_DATA
        if points and not points[-1][2]:
            text += " (not yet reliable)"
        lines.append(f"  {name}: {text}")
    lines += ["", "Cautions:"] + [f"  - {c}" for c in CAUTIONS]
    return lines


def _text_page(rec: UnitRecord) -> Figure:
    fig = plt.figure(figsize=A4_IN)
    fig.text(0.06, 0.965, "Cold-chain record", fontsize=16, weight="bold", va="top")
    wrapped: list[str] = []
    for line in _lines(rec):
        indent = " " * (len(line) - len(line.lstrip()) + 3)
        wrapped += textwrap.wrap(line, 100, subsequent_indent=indent) or [""]
    size = 8.5 if len(wrapped) < 75 else 7.0
    fig.text(0.06, 0.93, "\n".join(wrapped), fontsize=size, va="top", family="DejaVu Sans")
    return fig


def _plot_page(rec: UnitRecord) -> Figure:
    fig, axes = plt.subplots(4, 1, figsize=A4_IN, sharex=True)
    t = [_ms(float(x)) for x in rec.t_ms]
    ax = axes[0]
    ax.plot(t, rec.t_cabinet, lw=0.7, color="#0f5c63", label="cabinet")
    for limit in (rec.band.low_c, rec.band.high_c):
        ax.axhline(limit, color="#a12f24", ls="--", lw=1)
    for e in rec.excursions:
        start = _ms(e.start_ms)
        ax.axvspan(start, _ms(e.start_ms + e.duration_s * 1000), color="#a12f24", alpha=0.15)
    ax.set_ylabel("cabinet [°C]")
    ax.set_title(f"{rec.device_id}: cabinet temperature with its limits; excursions shaded")
    for ax, (key, unit) in zip(
        axes[1:],
        (
            ("module.resistance_25c_ohm", "R25 [Ω]"),
            ("cabinet.ua_w_per_k", "UA [W/K]"),
            ("hot_side.resistance_k_per_w", "hot side [K/W]"),
        ),
        strict=True,
    ):
        _health_axis(ax, rec.health.get(key) or [], unit)
    # matplotlib leaves DateFormatter's constructor unannotated
    days = mdates.DateFormatter("%Y-%m-%d", tz=UTC)  # type: ignore[no-untyped-call]
    axes[-1].xaxis.set_major_formatter(days)
    fig.autofmt_xdate()
    fig.tight_layout()
    return fig


def _health_axis(ax: Axes, points: Sequence[tuple[int, float, bool]], unit: str) -> None:
    ax.set_ylabel(unit)
    if not points:
        ax.text(0.5, 0.5, readout.NO_DATA, transform=ax.transAxes, ha="center", va="center")
        return
    t = np.array([_ms(p[0]) for p in points])
    v = np.array([p[1] for p in points])
    sure = np.array([p[2] for p in points])
    ax.plot(t, v, color="#56626a", lw=0.8)
    ax.plot(t[sure], v[sure], "o", ms=3, color="#b4532a", label="reliable")
    ax.plot(t[~sure], v[~sure], "o", ms=3, mfc="none", color="#b4532a", label="not yet reliable")
    ax.legend(loc="best", fontsize=7)


def write_pdf(records: Sequence[UnitRecord], out: Path | BinaryIO) -> None:
    """Write the report of ``records`` to ``out``, a path or a binary file (two pages per
    unit)."""
    with (
        plt.rc_context({"pdf.fonttype": 42, "font.family": "DejaVu Sans"}),
        PdfPages(out, metadata={"Title": "Cold-chain record", "Creator": "tecfleet"}) as pdf,
    ):
        for rec in records:
            for fig in (_text_page(rec), _plot_page(rec)):
                pdf.savefig(fig)
                plt.close(fig)
