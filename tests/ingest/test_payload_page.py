"""The examples on ingest/PAYLOAD.md are what the service and the agent accept."""

from __future__ import annotations

import re
import tomllib
from pathlib import Path

from tecfleet.ingest.agent.config import load_config
from tecfleet.ingest.payload import parse_message
from tests.services import REPO

PAGE = (REPO / "ingest" / "PAYLOAD.md").read_text()


def blocks(language: str) -> list[str]:
    return re.findall(rf"```{language}\n(.*?)```", PAGE, flags=re.S)


def test_every_json_example_is_stored_without_a_reject() -> None:
    examples = blocks("json")
    assert len(examples) == 4  # one reading, a batch, a SenML pack, interval summaries
    for text in examples:
        parsed = parse_message(
            "tecfleet/cab-17/telemetry", text.encode(), prefix="tecfleet", now_s=1_800_000_000.0
        )
        assert parsed.rejects == [], parsed.rejects
        assert parsed.readings


def test_the_agent_config_example_loads(tmp_path: Path) -> None:
    (example,) = blocks("toml")
    tomllib.loads(example)
    path = tmp_path / "agent.toml"
    path.write_text(example)
    config = load_config(path)
    assert [s.kind for s in config.sources] == ["csv", "command", "sysfs"]
    assert config.calibration["voltage"].scale == 11.0
