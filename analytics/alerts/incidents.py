"""Incidents: one cause and the symptoms its physics explains, told once.

A cause alert (a hot side cooled badly, a cabinet leaking heat, a worn module) explains symptom
alerts on the same unit (``LINKS``, one sentence of physics each). A symptom alert that opens
while a cause alert of its device is open, or resolved less than ``incident_link_s`` before,
joins the cause's incident (``alerts.incident_id`` holds the cause's id); symptoms that opened
first join when the cause opens. Each symptom keeps its own alert row and evidence.

Notices (``notice_route``): an incident is told when it opens (the cause, or the first symptom
if that comes first, and then the cause's opening as its worsening), again when its severity
rises, a symptom of a new kind joins it or a symptom rises to a severity not yet told of it
(``alerts.told_severity``: a cabinet out of band turning critical under a cause already
critical is told once, not on each afternoon it comes back critical), and once when the cause
resolves; every other change of its symptoms stays on record only (an audit row, and an
``absorbed`` outbox row). Alone, an alert's rise of severity is told the same way: once per
severity until its resolution has been told.

A condition that comes back within the reopen window is the same alert, reopened and counted;
a symptom that comes back while its cause is still open is the same alert however long it was
away.
Once an alert has come back, its next resolution notice waits for the reopen window
(``deferred``): if the condition returns in that time, neither the resolution nor the return is
sent (the people told still see it open) unless it returns worse. A condition of every
afternoon is so told when it opens, when it first comes back and when it has stayed away.

Silence (offline) and a faulty probe (sensor_fault) are linked to nothing: silence looks the
same whether the power or only the network failed, and a faulty probe explains a reading, not a
physical condition; both stay alerts of their own.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from sqlalchemy.engine import Connection, Row

from tecfleet.analytics.alerts.kinds import OPEN_STATES, SEVERITIES
from tecfleet.ingest.db import alert_records as records

__all__ = [
    "LINKS",
    "Link",
    "Windows",
    "causes_of",
    "continues",
    "link",
    "notice_route",
    "symptoms_of",
    "told_after",
]


@dataclass(frozen=True)
class Link:
    """A cause alert kind, a symptom kind it explains, and the physics why."""

    cause: str
    symptom: str
    physics: str


# Module equations: Qc = S·I·Tc − I²R/2 − K·ΔT, the heat rejected Qh = Qc + V·I (Rowe (ed.),
# CRC Handbook of Thermoelectrics, 1995, ch. 54; from memory).
LINKS: tuple[Link, ...] = (
    Link(
        "hot_side_cooling", "over_temperature",
        "The hot face sits above the air by Qh·R_hot, so a sink or fan whose resistance has "
        "risen lifts it by Qh times the rise, past its limit at the warmest hours.",
    ),
    Link(
        "hot_side_cooling", "capacity_shortfall",
        "A hotter hot face widens the ΔT the module pumps across, and its cooling falls with "
        "ΔT (Qc = S·I·Tc − I²R/2 − K·ΔT), leaving less to spare at the design ambient.",
    ),
    Link(
        "hot_side_cooling", "excursion",
        "With its cooling cut that way the unit cannot remove the cabinet's heat load at the "
        "warm hours, and the cabinet air leaves its band.",
    ),
    Link(
        "heat_leak", "excursion",
        "A larger cabinet UA lets in UA·(T_ambient − T_cabinet) more heat; where that exceeds "
        "the module's cooling the cabinet air warms out of its band.",
    ),
    Link(
        "heat_leak", "capacity_shortfall",
        "The same extra heat through UA is taken from the spare cooling at the design ambient.",
    ),
    Link(
        "module_wear", "capacity_shortfall",
        "A higher module resistance R turns more current into Joule heat, half of I²R on the "
        "cold face, which lowers the net cooling Qc.",
    ),
    Link(
        "module_wear", "excursion",
        "With the net cooling lowered, the cabinet air leaves its band when its heat load is "
        "highest.",
    ),
)  # fmt: skip


@dataclass(frozen=True)
class Windows:
    """Times that decide a change's notice [ms]: the kind's reopen window and the link
    window of incidents (``AlertPolicy.incident_link_s``)."""

    reopen_ms: int = 0
    link_ms: int = 0


def causes_of(kind: str) -> tuple[str, ...]:
    """The cause kinds that explain a symptom of ``kind`` (none for a cause or a lone kind)."""
    return tuple(k.cause for k in LINKS if k.symptom == kind)


def symptoms_of(kind: str) -> tuple[str, ...]:
    """The symptom kinds a cause of ``kind`` explains."""
    return tuple(k.symptom for k in LINKS if k.cause == kind)


def continues(conn: Connection, alert_id: int | None, at: int) -> bool:
    """Whether a condition back at ``at`` [ms], after the reopen window, still continues the
    resolved alert ``alert_id``: it does while that alert is a symptom whose cause is open."""
    if alert_id is None:
        return False
    row = records.alert_row(conn, alert_id)
    if row.incident_id is None or row.incident_id == row.id:
        return False
    return _open_at(records.alert_row(conn, int(row.incident_id)), at)


def _open_at(cause: Row[Any], at: int) -> bool:
    """Whether the cause alert was open at ``at`` [ms]: opened by then and still open, or
    resolved only later (a backfill judges a symptom after its cause's whole history)."""
    if int(cause.opened_ms) > at:
        return False
    return bool(cause.state in OPEN_STATES or (cause.resolved_ms or 0) > at)


def link(conn: Connection, row: Row[Any], change: str, at: int, link_ms: int) -> Row[Any] | None:
    """Bring the alert ``row`` (as stored after ``change`` at ``at`` [ms]) into its incident.

    A cause that opens or reopens takes in the symptoms of its device that opened before it;
    a symptom that opens or reopens joins a cause alert open or resolved within ``link_ms``
    [ms]. Returns the cause alert of the symptom's incident, None for a cause or a symptom
    alone."""
    symptoms = symptoms_of(row.kind)
    if symptoms and change in ("opened", "reopened"):
        found = records.attach_symptoms(conn, int(row.id), row.device_id, symptoms, at - link_ms)
        if found:
            _reroute_unsent(conn, row, found, at)
    causes = causes_of(row.kind)
    if not causes:
        return None
    if row.incident_id is not None and change not in ("opened", "reopened"):
        return records.alert_row(conn, int(row.incident_id))
    cause = records.find_cause(conn, row.device_id, causes, at - link_ms)
    if cause is None:
        return None
    records.set_incident(conn, int(row.id), int(cause.id))
    return cause


def _reroute_unsent(conn: Connection, cause: Row[Any], found: list[Any], at: int) -> None:
    """Symptoms that opened before their cause (a cause is judged on daily fits, which lag
    the readings a symptom is judged on): their notices not yet sent from after the cause opened at
    ``at`` [ms] are routed as the incident would have routed them. A symptom kind joining,
    a rise above the incident's severity and a symptom's first rise to a severity go out;
    the rest stays on record only."""
    rank = SEVERITIES.index
    before = [r for r in found if int(r.opened_ms) < at]
    joined = {r.kind for r in before}
    top = max([rank(cause.severity), *(rank(r.severity) for r in before)])
    # per symptom, the highest severity told: before the cause opened, then as kept here
    told = {int(r.id): _told_of(conn, int(r.id), at) for r in found}
    quiet = []
    for notice_id, alert_id, kind, event, severity in records.unsent_notices(conn, list(told), at):
        s = rank(severity)
        if event in ("alert.opened", "alert.reopened") and kind not in joined:
            joined.add(kind)
            top = max(top, s)
        elif event != "alert.resolved" and s > top:
            top = s
        elif event != "alert.escalated" or s <= _rank(told[alert_id]):
            quiet.append(notice_id)
            continue
        told[alert_id] = told_after(told[alert_id], severity)
    records.absorb_notices(conn, quiet)
    for alert_id, severity in told.items():
        records.set_told(conn, alert_id, severity)


def _rank(severity: str | None) -> int:
    """Rank of a severity, -1 for none."""
    return -1 if severity is None else SEVERITIES.index(severity)


def _told_of(conn: Connection, alert_id: int, before_ms: int) -> str | None:
    """The highest severity the notices of an alert told before ``before_ms`` [ms] since
    its last told resolution, from its outbox rows."""
    told = None
    for event, severity in records.told_notices(conn, alert_id, before_ms):
        told = None if event == "alert.resolved" else told_after(told, severity)
    return told


def told_after(told: str | None, severity: str) -> str:
    """The highest severity told once a notice at ``severity`` has gone out."""
    rank = SEVERITIES.index
    return severity if told is None or rank(severity) > rank(told) else told


def notice_route(
    conn: Connection,
    row: Row[Any],
    before: Row[Any] | None,
    change: str,
    at: int,
    cause: Row[Any] | None,
    windows: Windows,
) -> tuple[str, int | None, str | None]:
    """How the notice of ``change`` at ``at`` [ms] of the alert ``row`` (``before``: as stored
    before the change, None for an opening) goes out: the route (``send``, ``absorb`` or
    ``defer``, see ``alert_records.NOTICE_ROUTES``), the time a deferred notice waits for
    [ms], and a note for the audit trail."""
    rank = SEVERITIES.index
    # the alert's own severity rose in this change, to one not told of it yet
    new_high = before is not None and rank(before.severity) < rank(row.severity) > _rank(
        row.told_severity
    )
    if cause is not None and _open_at(cause, at):
        note = f"symptom of incident {int(cause.id)} ({cause.kind})"
        if change == "resolved":
            return "absorb", None, note
        others = records.incident_members(conn, int(cause.id), int(row.id))
        kinds = {m.kind for m in others}
        top = max((rank(m.severity) for m in others), default=0)
        if before is not None and before.incident_id == cause.id:
            kinds.add(before.kind)
            top = max(top, rank(before.severity))
        worse = row.kind not in kinds or rank(row.severity) > top or new_high
        return ("send" if worse else "absorb"), None, note
    if change == "resolved" and int(row.reopen_count or 0) >= 1:
        return "defer", at + windows.reopen_ms, "comes and goes: told once it has stayed away"
    if change == "reopened" and records.cancel_deferred(conn, int(row.id)):
        return ("send" if new_high else "absorb"), None, "back before its resolution was told"
    if change == "escalated" and not new_high:
        return "absorb", None, "already told at this severity"
    return "send", None, None
