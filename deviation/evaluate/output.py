"""What an evaluation returns: the JSON contract every face reads (see the README for the keys)."""

from __future__ import annotations

from typing import Any

from pydantic import BaseModel, Field

CAUTION = (
    "This is guidance, not a release. The process authority decides, in writing, what becomes "
    "of the lot; local regulations govern."
)


class FlagOut(BaseModel):
    code: str
    message: str
    start_min: float | None = None
    end_min: float | None = None
    value: float | None = None


class ColdSpot(BaseModel):
    time_min: list[float]
    retort_C: list[float]
    temperature_C: list[float]
    lethal_rate: list[float]
    cumulative_F_min: list[float]
    source: str = Field(description="'measured' or the model used")
    cumulative_scale: float = Field(
        1.0, description="Factor applied to the model's cumulative F so it ends at the headline F "
                         "(target / scheduled F when the relative evaluation is the headline)")


class LowIntervalOut(BaseModel):
    start_min: float
    end_min: float
    lowest_C: float
    degree_minutes_below: float


class CycleOut(BaseModel):
    hold_start_min: float | None
    hold_end_min: float | None
    hold_duration_min: float | None
    come_up_min: float | None
    lowest_during_hold_C: float | None
    max_gap_min: float
    running: bool
    low_intervals: list[LowIntervalOut]
    retort_source: str
    retort_sha256: str | None


class Evaluation(BaseModel):
    """Everything one evaluation found; JSON keys are a contract (see README)."""

    engine_version: str
    process_id: str
    product: str
    lot: str
    retort_id: str
    model: str
    conservative: bool
    delivered_F_min: float = Field(description="The headline F the guidance stands on [min]")
    F_basis: str | None = Field(None, description="What the headline F is, in words")
    broken_curve: dict[str, Any] | None = Field(
        None, description="A broken heating curve: fh_min, fh2_min, break_min, break_temperature_C, "
                          "and earliest_break_min / latest_break_min, when the "
                          "product can have and surely has thickened on this record (None: not on it) [min]")
    model_F_min: float | None = Field(
        None, description="The model's F on the record: lower reading between samples (unless "
                          "--interpolate), no heat across gaps over the limit [min]")
    relative_F_min: float | None = Field(
        None, description="model F x target / scheduled F: the model's own error cancelled [min]")
    interpolated_F_min: float | None = Field(
        None, description="Straight lines between readings, heat credited across gaps: a friendlier "
                          "figure, not the one the guidance uses [min]")
    F0_min: float | None = Field(
        None, description="F at Tref 121.1 °C, z 10 °C of the same cold spot (the botulinum figure) [min]")
    ball_formula_F_min: float | None = Field(
        None, description="Ball's formula F for the filed cycle (fh, jh, IT, RT, process time) [min]")
    scheduled_F_min: float
    target_F_min: float
    F_margin_min: float
    projected_F_min: float | None
    extension_to_target_min: float | None
    extension_reason: str | None
    reprocess_F_min: float | None
    total_F_with_reprocess_min: float | None
    reprocess: dict[str, Any] | None
    uncertainty: dict[str, Any] | None
    spoilage_probability: float
    target_spoilage_probability: float
    scheduled_spoilage_probability: float
    expected_nonsterile_containers: float
    log10_spoilage_probability: float | None = None
    log10_target_spoilage_probability: float | None = None
    log10_scheduled_spoilage_probability: float | None = None
    log10_expected_nonsterile_containers: float | None = None
    lot_nonsterile_probability: float | None = Field(
        None, description="Probability that at least one container of the lot is nonsterile [-]")
    log10_lot_nonsterile_probability: float | None = None
    botulinum_log_reductions: float
    botulinum_log_reductions_required: float
    lethality_established: bool
    lethality_fully_established: bool
    covered_by_alternate: bool
    alternate_met: list[dict[str, float]]
    critical_factors: list[dict[str, Any]]
    flags: list[FlagOut]
    cycle: CycleOut
    facts: dict[str, float | bool | str | None]
    guidance: dict[str, Any] | None
    caution: str = CAUTION
    cold_spot: ColdSpot
    system: str | None = Field(None, description="The retort system's kind, when filed")
    affected_containers: list[dict[str, Any]] | None = Field(
        None, description="Continuous systems: entry-time intervals {entry_start_min, entry_end_min, "
                          "entry_start, entry_end, containers, min_F_min, disposition}, every container "
                          "inside the shell at any moment of a deviation, and the unaffected ranges")
    case_sha256: str
