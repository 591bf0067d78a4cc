"""The typed device state: every state the runner stored loads, and is written back as the
very text it was stored as."""

from __future__ import annotations

import dataclasses
from pathlib import Path

import pytest

from tecfleet.analytics.runner.state import Baseline, DeviceState, ModuleParams, UaLead
from tecfleet.ingest.db import analysis as analysis_db

#: States stored by the runner before its state was typed (one JSON text a line; values the
#: code produced itself): the final and intermediate states of simulated coolers analysed at
#: once and in pieces, with and without registered ratings, a unit whose module never rests
#: (rated S and K, kept windows), a fan failure (hot side flagged) and twelve days (a growing
#: UA baseline); stored since, two and a half days of a unit with the hourly ambient behind its
#: design ambient, and the final state of a unit with a rest (power cut) kept and the offsets
#: it gave, from the estimator on a simulated unit; a day of a simulated unit with its
#: windows' electrical sums kept for the pooled S (the older layout, one entry a window);
#: 1.6 days of one with those sums folded into day blocks; and a unit without a cold-face
#: probe whose R25 read from the module's voltage is followed (the track's source kept): the
#: runner's final state of a simulated worn unit, its served R25 windows then followed by the
#: tracker; and three days of a unit without a cold-face probe whose module rests (the time
#: of its newest rest and whether its faces are trusted kept); and the final state of a
#: simulated unit without a cold-face probe whose cabinet probe drifted 3 K (the cabinet
#: probe's balance against the open-circuit face and its newest shift kept); and the final
#: state of a simulated unit whose module was swapped in a recorded maintenance window (the
#: window's end kept, see ``tests.analytics.replaced_fleet``); three days of a simulated
#: unit with the window fits its served UA is the median of; and four days of a simulated
#: unit without a cold-face probe (the source its hot side's track rests on kept); three
#: days of a simulated floating unit without a cold-face probe (the window that last judged
#: its cabinet probe kept) and eight days of a simulated unit at 5-minute instants whose UA
#: was pinned (served as reliable).
STORED = Path(__file__).parent / "data" / "stored_states.jsonl"


def _stored_texts() -> list[str]:
    return STORED.read_text().splitlines()


@pytest.mark.parametrize("text", _stored_texts(), ids=lambda t: f"{len(t)}-chars")
def test_stored_state_loads_typed_and_is_written_back_as_the_same_text(text: str) -> None:
    state = DeviceState.from_json(analysis_db.state_from_text(text))
    assert analysis_db.state_text(state.to_json()) == text
    assert isinstance(state.params, ModuleParams)
    assert all(isinstance(b, Baseline) for b in (state.baseline or {}).values())
    assert state.ua_lead is None or isinstance(state.ua_lead, UaLead)


def test_the_stored_states_cover_every_key_of_the_state() -> None:
    seen: set[str] = set()
    for text in _stored_texts():
        seen |= set(analysis_db.state_from_text(text))
    assert seen == {f.name for f in dataclasses.fields(DeviceState)}


def test_keys_keep_the_order_they_were_first_set_in_as_a_dict_would() -> None:
    # The stored text lists keys in the order they were first set; a key removed and set
    # again goes to the end, and one set again in place stays where it is.
    state = DeviceState()
    state.k_hist = [0.5]
    state.k_trend = 0.5
    state.params = ModuleParams(k=0.5, s25=0.05, r25=2.0)
    state.k_trend = 0.6
    assert list(state.to_json()) == ["k_hist", "k_trend", "params"]
    state.k_hist = None
    state.k_hist = [0.7]
    assert list(state.to_json()) == ["k_trend", "params", "k_hist"]
    assert list(state.to_json()["params"]) == ["k", "s25", "r25"]
    state.params.c_hot = 0.0
    state.params.k = 0.4
    assert state.to_json()["params"] == {"k": 0.4, "s25": 0.05, "r25": 2.0, "c_hot": 0.0}


def test_keys_this_code_does_not_know_are_kept_in_their_place() -> None:
    text = '{"k_trend":0.5,"older_key":[1,2],"params":{"k":0.5,"s25":0.05,"r25":2.0,"x":1}}'
    state = DeviceState.from_json(analysis_db.state_from_text(text))
    assert analysis_db.state_text(state.to_json()) == text
    state.k_trend = None
    assert list(state.to_json()) == ["older_key", "params"]
    # A null, which the runner never stores, comes back as it came too.
    obj = {"k_trend": None, "k_hist": [0.5]}
    assert DeviceState.from_json(obj).to_json() == obj
