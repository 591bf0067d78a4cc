"""A cabinet probe replaced during recorded maintenance: the alert rules' commissioning fit of
the probe against the cold side's heat balance is made again from the window's end, and an
open probe-offset alert resolves saying the probe was replaced.

Readings from the project's own simulator (test data only, see
``tests.analytics.replaced_fleet``); its truth: new cabinet probes reading 2 K higher than the
old ones, and on ``rp-fix`` a probe 2 K off that is replaced by one reading true. The
reference the alerts judge by is the cold side's heat balance at I = 0, Qc = −K·ΔT through
r_cold (H. J. Goldsmid, *Introduction to Thermoelectricity*, 2010, ch. 2), which a probe's
offset moves one for one; the warning is the policy's ``drift_warning_k`` (1 K).
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import pytest
import sqlalchemy as sa
from sqlalchemy.engine import Engine

from tecfleet.analytics import alerts
from tecfleet.analytics.alerts.rules.probe_drift import PROBE_DRIFT_ISSUE
from tecfleet.ingest import db
from tests.analytics.replaced_fleet import END_MS, FAULT_S, START_S, replaced_fleet


@pytest.fixture(scope="module")
def judged(tmp_path_factory: pytest.TempPathFactory) -> tuple[Engine, list[alerts.AlertChange]]:
    engine = replaced_fleet(tmp_path_factory.mktemp("replaced"))
    return engine, alerts.evaluate(engine)


def _progress(engine: Engine, device: str) -> dict[str, Any]:
    p = db.alert_progress
    with engine.connect() as conn:
        state = conn.execute(sa.select(p.c.state).where(p.c.device_id == device)).scalar_one()
    return dict(state)


def _drift(changes: list[alerts.AlertChange], device: str) -> list[alerts.AlertChange]:
    return [
        c for c in changes
        if c.device_id == device and c.kind == "sensor_fault"
        and PROBE_DRIFT_ISSUE in c.evidence.get("issues", [])
    ]  # fmt: skip


def test_the_probe_fit_is_made_again_from_the_replacements_end(
    judged: tuple[Engine, list[alerts.AlertChange]],
) -> None:
    engine, changes = judged
    recorded, unrecorded = _progress(engine, "rp-cab"), _progress(engine, "rp-cab-x")
    assert recorded["probe_baseline"]["from_ms"] == END_MS
    assert recorded["probe_replaced_ms"] == END_MS
    assert unrecorded["probe_baseline"]["from_ms"] <= START_S * 1000 + 60_000
    # The two fits' offsets differ by about the new probe's 2 K (each unit's probes carry a
    # bias of their own from the simulator, hence 0.5 K). Without the record the new probe
    # is taken for a drift; with it, no drift is flagged.
    gap = recorded["probe_baseline"]["offset_k"] - unrecorded["probe_baseline"]["offset_k"]
    assert gap == pytest.approx(2.0, abs=0.5)
    assert _drift(changes, "rp-cab-x")
    assert _drift(changes, "rp-cab") == []


def test_an_open_probe_offset_alert_resolves_saying_the_probe_was_replaced(
    judged: tuple[Engine, list[alerts.AlertChange]],
) -> None:
    _engine, changes = judged
    found = _drift(changes, "rp-fix")
    assert found and found[0].change == "opened"
    assert FAULT_S * 1000 <= found[0].at_ms < END_MS
    resolved = [c for c in changes if c.device_id == "rp-fix" and c.change == "resolved"]
    assert [c.kind for c in resolved] == ["sensor_fault"]
    (done,) = resolved
    assert done.at_ms > END_MS
    assert done.evidence["cabinet_probe_replaced_ms"] == END_MS
    assert "probe was replaced" in done.summary
    # nothing about a replacement on the alert while it was open before the window's end
    assert "cabinet_probe_replaced_ms" not in found[0].evidence


def _alert_rows(engine: Engine, device: str) -> list[tuple[Any, ...]]:
    a = db.alerts
    with engine.connect() as conn:
        rows = conn.execute(
            sa.select(a.c.kind, a.c.state, a.c.opened_ms, a.c.resolved_ms, a.c.summary)
            .where(a.c.device_id == device)
            .order_by(a.c.id)
        ).fetchall()
    return [tuple(r) for r in rows]


def test_judged_live_in_two_parts_the_same_as_at_once(
    judged: tuple[Engine, list[alerts.AlertChange]], tmp_path: Path
) -> None:
    # The readings up to two hours after the replacement evaluated first (the first fit
    # made and kept), the rest then: the same fits and the same alerts.
    engine, _changes = judged
    live = replaced_fleet(tmp_path, split_ms=END_MS + 7_200_000)
    alerts.evaluate(live)
    for device in ("rp-cab", "rp-cab-x", "rp-fix"):
        fit = _progress(live, device)["probe_baseline"]
        assert fit == _progress(engine, device)["probe_baseline"]
        assert _alert_rows(live, device) == _alert_rows(engine, device)
    assert any(r[0] == "sensor_fault" for r in _alert_rows(live, "rp-fix"))
