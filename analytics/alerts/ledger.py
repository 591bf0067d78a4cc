"""The record of alert changes: alert rows, their audit trail and the outbox notices, written
on the caller's connection so that a change and its notice commit together. Each change is
brought into its incident and its notice routed as ``incidents`` says."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from sqlalchemy.engine import Connection

from tecfleet.analytics.alerts import incidents
from tecfleet.analytics.alerts.incidents import Windows
from tecfleet.analytics.alerts.kinds import SEVERITIES
from tecfleet.ingest.db import alert_records as records

__all__ = ["AlertChange", "Ledger"]


@dataclass(frozen=True)
class AlertChange:
    """One lifecycle change: ``change`` is opened, reopened, escalated or resolved."""

    alert_id: int
    device_id: str
    kind: str
    change: str
    severity: str
    at_ms: int
    summary: str
    evidence: dict[str, Any] = field(default_factory=dict)


class Ledger:
    """Writes lifecycle changes, audit rows and outbox entries on one connection.

    Notices of changes inside a maintenance window (``windows``, (start, end) [ms]) are held
    until the window ends."""

    def __init__(
        self,
        conn: Connection,
        device: Any,
        windows: list[tuple[int, int]],
    ) -> None:
        self.conn = conn
        self.device = device
        self.windows = windows
        self.changes: list[AlertChange] = []

    def _held_until(self, at_ms: int) -> int | None:
        ends = [end for start, end in self.windows if start <= at_ms < end]
        return max(ends) if ends else None

    def _audit(
        self, alert_id: int, at: int, old: str | None, new: str, sev: str, note: str
    ) -> None:
        records.insert_audit(self.conn, alert_id, at, old, new, sev, "system", note)

    def apply(
        self,
        kind: str,
        change: str,
        at: int,
        sev: int,
        st: dict[str, Any],
        summary: str,
        ev: dict[str, Any],
        windows: Windows | None = None,
    ) -> None:
        """Record ``change`` (opened, reopened, escalated, resolved, or ``updated``: the
        evidence only) of the alert of ``kind`` whose lifecycle state is ``st``; ``windows``
        are the times its notice is judged by (see ``incidents.notice_route``)."""
        severity = SEVERITIES[sev]
        ev = records.jsonable(ev)
        before = None
        if change == "opened" and incidents.continues(self.conn, st.get("alert_id"), at):
            change = "reopened"  # a symptom back while its cause is still open: the same one
        if change == "opened":
            alert_id = records.insert_alert(
                self.conn, self.device.device_id, kind, severity, at, summary, ev
            )
            st["alert_id"] = alert_id
            old, new, note = None, "open", "condition present"
        else:
            alert_id = int(st["alert_id"])
            before = records.alert_row(self.conn, alert_id)
            old, new, note = before.state, before.state, change
            values: dict[str, Any] = {"updated_ms": at, "summary": summary, "evidence": ev}
            if change == "reopened":
                values.update(state="open", resolved_ms=None, severity=severity)
                new = "open"
            elif change == "resolved":
                values.update(state="resolved", resolved_ms=at)
                new = "resolved"
            elif change == "escalated":
                values.update(severity=severity)
            records.update_alert(self.conn, alert_id, change, values)
            if change == "updated":
                return  # evidence only: no audit row, no notice
        w = windows or Windows()
        row = records.alert_row(self.conn, alert_id)
        cause = incidents.link(self.conn, row, change, at, w.link_ms)
        route, until, why = incidents.notice_route(self.conn, row, before, change, at, cause, w)
        self._audit(alert_id, at, old, new, severity, note if why is None else f"{note}; {why}")
        records.insert_notice(
            self.conn, alert_id, f"alert.{change}", at, self.device.site, self._held_until(at),
            route=route, defer_until_ms=until,
        )  # fmt: skip
        if route == "send":
            told = (
                None if change == "resolved" else incidents.told_after(row.told_severity, severity)
            )
            records.set_told(self.conn, alert_id, told)
        self.changes.append(
            AlertChange(alert_id, self.device.device_id, kind, change, severity, at, summary, ev)
        )
