"""Device registration in, devices out."""

from __future__ import annotations

from typing import Any

from pydantic import BaseModel, ConfigDict, Field, model_validator

from tecfleet.api.schemas.readings import ReadingOut


class ModuleIn(BaseModel):
    """Module ratings as printed on a datasheet (all optional)."""

    model_config = ConfigDict(extra="forbid")

    couples: int | None = Field(None, ge=1, le=2000)
    i_max_a: float | None = Field(None, gt=0, le=50)
    v_max_v: float | None = Field(None, gt=0, le=200)
    dt_max_k: float | None = Field(None, gt=0, le=150)
    q_max_w: float | None = Field(None, gt=0, le=2000)
    t_hot_rated_c: float | None = Field(None, ge=-20, le=100)
    count: int | None = Field(None, ge=1, le=64)


class CabinetIn(BaseModel):
    """Cabinet size and the band it must hold; temperatures in °C."""

    model_config = ConfigDict(extra="forbid")

    volume_l: float | None = Field(None, gt=0, le=10_000)
    setpoint_c: float | None = Field(None, ge=-40, le=40)
    low_limit_c: float | None = Field(None, ge=-60, le=60)
    high_limit_c: float | None = Field(None, ge=-60, le=60)
    #: The warmest air the site expects around the unit, for its capacity figures [°C].
    design_ambient_c: float | None = Field(None, ge=-20, le=60)

    @model_validator(mode="after")
    def _limits_ordered(self) -> CabinetIn:
        low, high = self.low_limit_c, self.high_limit_c
        if low is not None and high is not None and low >= high:
            raise ValueError("low_limit_c must be below high_limit_c")
        if self.setpoint_c is not None:
            if low is not None and self.setpoint_c < low:
                raise ValueError("setpoint_c is below low_limit_c")
            if high is not None and self.setpoint_c > high:
                raise ValueError("setpoint_c is above high_limit_c")
        return self


class DeviceIn(BaseModel):
    model_config = ConfigDict(extra="forbid")

    label: str | None = Field(None, max_length=200)
    site: str | None = Field(None, max_length=200)
    module: ModuleIn | None = None
    cabinet: CabinetIn | None = None


class DeviceOut(BaseModel):
    device_id: str
    label: str | None
    site: str | None
    module: dict[str, Any] | None
    cabinet: dict[str, Any] | None
    registered_at: str | None
    first_seen_at: str | None
    last_reading_at: str | None
    readings: int
    online: bool
    status: str | None
    open_alerts: int


class CommissioningOut(BaseModel):
    """A unit's latest pull-down to its band: from its first reading, or from the end of a
    maintenance window that left it warm."""

    since: str | None
    reason: str
    #: Still pulling down: no excursion is raised until the cabinet is first in band.
    active: bool
    pulled_down_at: str | None
    pull_down_minutes: float | None


class LimitedCheckOut(BaseModel):
    """An alert check the unit's sensors leave limited: no alert from it is no all-clear."""

    check: str
    #: What the check judges on instead; None: it is not judged at all.
    basis: str | None
    note: str


class DeviceDetail(DeviceOut):
    latest_reading: ReadingOut | None
    commissioning: CommissioningOut | None = None
    limited_checks: list[LimitedCheckOut] = []
