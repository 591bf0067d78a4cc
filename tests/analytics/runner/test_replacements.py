"""Parts replaced during maintenance: the runner forgets what it learned of them at the
window's end, and the new part gets a commissioning of its own.

The fleet is the project's own simulator (test data only, see ``tests.analytics.replaced_fleet``):
its truth is a module swapped for one 8 % higher in R25, and a cabinet probe swapped for one
reading 2 K higher, each recorded on one unit and not on its twin. R25's flag threshold is the
runner's ``r25_flag_pct`` (4 %); the cabinet probe's balance reference is the cold side's heat
balance at I = 0, Qc = −K·ΔT through r_cold (H. J. Goldsmid, *Introduction to
Thermoelectricity*, 2010, ch. 2), which a probe's offset moves one for one.
"""

from __future__ import annotations

from pathlib import Path

import pytest
from sqlalchemy.engine import Engine

from tecfleet.analytics import runner
from tecfleet.analytics.runner.replacements import apply_replacements, forgotten
from tecfleet.analytics.runner.state import DeviceState
from tecfleet.ingest.db import alert_records
from tecfleet.ingest.db import analysis as analysis_db
from tecfleet.ingest.db.analysis import read_states
from tests.analytics.replaced_fleet import END_MS, replaced_fleet

STORED = Path(__file__).parent / "data" / "stored_states.jsonl"
MODULE_R25_STEP = 1.08  # the simulator's truth: the new module's R25 over the old one's


@pytest.fixture(scope="module")
def analysed(tmp_path_factory: pytest.TempPathFactory) -> Engine:
    engine = replaced_fleet(tmp_path_factory.mktemp("replaced"))
    runner.analyze(engine)
    return engine


def _states(engine: Engine, *ids: str) -> list[DeviceState]:
    with engine.connect() as conn:
        states = read_states(conn, list(ids))
    return [DeviceState.from_json(states[d]) for d in ids]


def _last(engine: Engine, device: str, key: str) -> float:
    return float(runner.estimate_history(engine, device, key, start_ms=0)[-1]["value"])


def test_a_recorded_module_swap_starts_r25_afresh_and_flags_no_wear(analysed: Engine) -> None:
    recorded, unrecorded = _states(analysed, "rp-mod", "rp-mod-x")
    assert recorded.replaced_ms == END_MS and unrecorded.replaced_ms is None
    # R25's track of the recorded unit starts after the window's end, its twin's at the start
    assert recorded.first is not None and recorded.first["r25"] > END_MS
    assert unrecorded.first is not None and unrecorded.first["r25"] < END_MS
    # a new module brings its own K, at which UA's and the hot side's changes are judged:
    # their tracks start afresh too, the trend K from the new module's windows
    assert recorded.first["ua"] > END_MS and unrecorded.first["ua"] < END_MS
    assert recorded.k_trend is not None
    # Without the record the swap reads as wear: the change is the simulator's +8 %, within
    # 1 % (the windows' fitted R25 scatter by a few tenths of a per cent), and flagged.
    assert _last(analysed, "rp-mod-x", "module.resistance_25c.change_pct") == pytest.approx(
        100.0 * (MODULE_R25_STEP - 1.0), abs=1.0
    )
    assert _last(analysed, "rp-mod-x", "module.resistance_25c.flag") == 1.0
    # With it the new module's R25 is the baseline: its twin's baseline times the step
    # (both units share the simulator's R25), within 1 %, and nothing is flagged after.
    base_old = _last(analysed, "rp-mod-x", "module.resistance_25c.baseline")
    base_new = _last(analysed, "rp-mod", "module.resistance_25c.baseline")
    assert base_new == pytest.approx(MODULE_R25_STEP * base_old, rel=0.01)
    assert abs(_last(analysed, "rp-mod", "module.resistance_25c.change_pct")) < 1.0
    flags = runner.estimate_history(analysed, "rp-mod", "module.resistance_25c.flag", start_ms=0)
    assert flags and all(r["value"] == 0.0 for r in flags)


def test_a_recorded_cabinet_probe_swap_refits_the_cabinet_balance(analysed: Engine) -> None:
    recorded, unrecorded = _states(analysed, "rp-cab", "rp-cab-x")
    assert recorded.replaced_ms == END_MS
    # Without the record the new probe's 2 K reads as a shift of the old balance (within
    # 0.3 K: probe noise, and the face read at the rated S, as for a drift); with it the
    # balance is fitted again on the new probe and the shift stays within 0.3 K of nought.
    assert unrecorded.cabinet_shift == pytest.approx(2.0, abs=0.3)
    assert recorded.cabinet_shift is not None and abs(recorded.cabinet_shift) < 0.3
    # UA's track of the recorded unit starts after the window's end too
    assert recorded.first is not None and recorded.first["ua"] > END_MS


def _state_with_rests() -> DeviceState:
    # A state the runner stored (values the code produced itself): a unit with a rest kept.
    for text in STORED.read_text().splitlines():
        state = DeviceState.from_json(analysis_db.state_from_text(text))
        if state.probe_rests and state.probe_offsets and state.series:
            return state
    raise AssertionError("no stored state with rests and offsets")


def test_a_probe_swap_forgets_the_offsets_and_rests_and_none_keeps_them() -> None:
    state = _state_with_rests()
    rests, offsets = list(state.probe_rests or []), list(state.probe_offsets or [])
    at = int(max(p[0] for s in (state.series or {}).values() for p in s))
    # a window ending at or after the fit window's end is not applied yet, nor one without
    # parts; the state is as it was
    assert apply_replacements(state, [(at, ["cabinet_probe"]), (at - 1, [])], at) is None
    assert state.probe_rests == rests and state.probe_offsets == offsets
    assert state.replaced_ms is None
    assert apply_replacements(state, [(at - 1, ["cabinet_probe"])], at) == at - 1
    assert state.replaced_ms == at - 1
    assert state.probe_rests is None and state.probe_offsets is None
    assert state.probe_offset_cov is None and state.cabinet_baseline is None
    assert "ua" not in (state.series or {}) and "r25" in (state.series or {})
    # applied once: the same window is not applied again
    assert apply_replacements(state, [(at - 1, ["module"])], at + 1) is None
    assert "r25" in (state.series or {})


def test_every_replaceable_part_names_fields_of_the_state() -> None:
    names = set(DeviceState.__dataclass_fields__)
    for part in alert_records.REPLACEABLE_PARTS:
        fields, tracks = forgotten(part)
        assert set(fields) <= names and fields
        assert set(tracks) <= {"r25", "ua", "rhot"}
