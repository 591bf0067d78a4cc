"""Calibration offsets in and out."""

from __future__ import annotations

import math
from typing import Literal

from pydantic import BaseModel, ConfigDict, Field, field_validator

Sensor = Literal["t_cabinet", "t_cold", "t_hot", "t_ambient", "current", "voltage", "rh"]


class OffsetIn(BaseModel):
    """Add ``offset`` to one sensor's stored values from ``valid_from`` until ``valid_to``."""

    model_config = ConfigDict(
        extra="forbid",
        json_schema_extra={
            "examples": [
                {
                    "sensor": "t_cabinet",
                    "offset": -0.4,
                    "valid_from": "2026-09-01T00:00:00Z",
                    "note": "reference thermometer check, probe read 0.4 K high",
                }
            ]
        },
    )

    sensor: Sensor
    offset: float = Field(
        ge=-50, le=50, description="added to the stored value [°C, A, V or %RH as the sensor]"
    )
    valid_from: str = Field(description="RFC 3339, inclusive")
    valid_to: str | None = Field(None, description="RFC 3339, exclusive; absent: open-ended")
    note: str | None = Field(None, max_length=2000)

    @field_validator("offset")
    @classmethod
    def _finite(cls, value: float) -> float:
        if not math.isfinite(value):
            raise ValueError("must be a finite number")
        return value


class OffsetOut(BaseModel):
    id: int
    device_id: str
    sensor: str
    offset: float
    valid_from: str
    valid_to: str | None
    note: str | None
    created_at: str | None
    created_by: str | None
    withdrawn_at: str | None
