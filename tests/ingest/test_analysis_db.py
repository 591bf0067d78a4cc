"""The analysis runner's stored data: the device state's JSON text through the driver."""

from __future__ import annotations

import math

import numpy as np
import pytest

from tecfleet.ingest.db import analysis as analysis_db


def test_device_state_comes_back_exactly_as_stored() -> None:
    # Floats round-trip through their shortest repr; NaN, which JSON has no word for, is kept
    # as the standard library writes it (the fast encoder would turn it into null).
    state = {
        "series": [[1_700_000_000_000, 0.1], [1_700_000_003_600, 1.0 / 3.0]],
        "params": {"k": np.float64(0.512345678901234), "tiny": 1e-300, "sd": math.nan},
        "hist": [2.5, -0.0],
    }
    back = analysis_db.state_from_text(analysis_db.state_text(state))
    assert back["series"] == [[1_700_000_000_000, 0.1], [1_700_000_003_600, 1.0 / 3.0]]
    assert back["params"]["k"] == 0.512345678901234 and back["params"]["tiny"] == 1e-300
    assert math.isnan(back["params"]["sd"])
    assert back["hist"] == [2.5, -0.0]
    clean = {k: v for k, v in state.items() if k != "params"}
    assert analysis_db.state_from_text(analysis_db.state_text(clean)) == clean
    with pytest.raises(TypeError, match="not an object"):
        analysis_db.state_from_text("[1, 2]")
