"""The fleet overview, a unit's view and the time buckets behind the page's plots."""

from __future__ import annotations

from typing import Any

from pydantic import BaseModel, Field


class FigureOut(BaseModel):
    """One estimate as people read it: the number, its text with unit and precision, and
    whether the engine calls it reliable (an unreliable one is shown as such, not hidden)."""

    value: float | None
    text: str
    reliable: bool
    at: str | None = None
    stderr: float | None = None


class BandOut(BaseModel):
    """The cabinet's limits [°C], where they come from, and the alert profile they belong to."""

    low_c: float
    high_c: float
    source: str
    profile: str


class UnitOut(BaseModel):
    """A unit in the overview: state, the newest cabinet temperature and its health figures."""

    device_id: str
    label: str | None
    site: str | None
    online: bool
    in_range: bool | None = Field(description="newest cabinet reading inside the band")
    t_cabinet_c: float | None
    last_reading_at: str | None
    days_in_service: float | None
    open_alerts: dict[str, int] = Field(description="open alerts by severity")
    figures: dict[str, FigureOut]
    band: BandOut


class RankedOut(BaseModel):
    """A unit on a worst-first list, with the figure it is ranked by."""

    device_id: str
    label: str | None
    value: float
    text: str
    reliable: bool


class SpreadOut(BaseModel):
    """COP across the fleet: the least, median and greatest, and the same for COP as a
    fraction of the best possible at each unit's temperatures [-]."""

    units: int
    cop: list[float | None] = Field(description="least, median, greatest")
    cop_of_best: list[float | None] = Field(description="least, median, greatest")


class FleetCountsOut(BaseModel):
    """The whole fleet summed up: counts by state, the worst units, the COP spread."""

    generated_at: str
    counts: dict[str, int] = Field(description="units by state: total, online, offline, ...")
    worst: dict[str, list[RankedOut]] = Field(description="wear, leak and sink, worst first")
    cop_spread: SpreadOut


class FleetOut(FleetCountsOut):
    """The whole fleet at a glance, with every unit."""

    units: list[UnitOut]


class UnitDetailOut(UnitOut):
    """One unit: the overview row, every estimate as a figure, its registration, the limits
    of its health trends and the capacity verdict at the design ambient."""

    module: dict[str, Any] | None
    cabinet: dict[str, Any] | None
    first_seen_at: str | None
    all_figures: dict[str, FigureOut]
    wear_limit_pct: float
    wear_limit_ohm: float | None
    wear_limit_at: str | None = Field(description="projected crossing of the wear limit")
    capacity: str


class ChannelOut(BaseModel):
    """The least, greatest and mean of a channel in one bucket (null where it had none)."""

    lo: float | None
    hi: float | None
    mean: float | None


class ReadingBucketOut(BaseModel):
    """One bucket of readings: its start, the readings in it and each channel."""

    t: str
    t_ms: int
    n: int
    channels: dict[str, ChannelOut]


class ReadingBucketsOut(BaseModel):
    """Readings in buckets of ``every_s`` seconds, computed in the database. Channels in °C,
    A, V, W (``power``) and % (``rh``)."""

    start: str
    end: str
    every_s: int
    items: list[ReadingBucketOut]


class EstimateBucketOut(BaseModel):
    """One bucket of an estimate key: least, greatest and mean value, valued rows, reliable rows."""

    t: str
    t_ms: int
    n: int
    reliable_n: int
    lo: float
    hi: float
    mean: float
    stderr: float | None


class EstimateBucketsOut(BaseModel):
    """Several estimate keys in buckets of ``every_s`` seconds, by key."""

    start: str
    end: str
    every_s: int
    series: dict[str, list[EstimateBucketOut]]


class EvidenceLineOut(BaseModel):
    name: str
    text: str


class AlertReadOut(BaseModel):
    """An alert for the page: the contract's object and its evidence as text."""

    alert: dict[str, Any]
    evidence_text: list[EvidenceLineOut]
