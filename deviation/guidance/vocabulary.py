"""The words rules are written in: the facts an evaluation provides (numbers, true/false, text),
the flag codes it may raise, the dispositions from least to most severe, and the comparisons a
condition may use. ``deviation.evaluate`` provides exactly these facts."""

from __future__ import annotations

import operator
from typing import Any

NUMERIC_METRICS: tuple[str, ...] = (
    "delivered_F_min",
    "target_F_min",
    "scheduled_F_min",
    "F_margin_min",
    "botulinum_log_reductions",
    "botulinum_log_reductions_required",
    "spoilage_probability",
    "target_spoilage_probability",
    "expected_nonsterile_containers",
    "lot_size_containers",
    "max_record_gap_min",
    "record_gap_limit_min",
    "lowest_retort_during_hold_C",
    "process_temperature_C",
    "temperature_drop_C",
    "hold_deficit_min",
    "come_up_excess_min",
    "initial_temperature_deficit_C",
    "scheduled_F_ratio",
    "degree_minutes_below_C_min",
    "model_F_min",
    "relative_F_min",
    "interpolated_F_min",
    "F0_min",
    "ball_formula_F_min",
    "lot_nonsterile_probability",
    "uncertainty_probability_below_target",
    "uncertainty_F_p05_min",
    "log10_spoilage_probability",
    "log10_target_spoilage_probability",
    "log10_lot_nonsterile_probability",
    "log10_expected_nonsterile_containers",
)
"""Numeric facts a condition may compare (units in the names)."""


BOOLEAN_METRICS: tuple[str, ...] = (
    "deviation_found",
    "covered_by_alternate",
    "lethality_established",
    "lethality_fully_established",
    "critical_factor_out",
    "cycle_running",
    "measured_cold_spot",
    "vent_study_on_file",
)
"""True/false facts a condition may test with ``==`` or ``!=``."""


TEXT_FACTS: tuple[str, ...] = ("critical_factors_out", "deviation_flags")
"""Facts usable only as ``{placeholders}`` in reasons, never in conditions.

``critical_factors_out``: the critical factors outside their filed limits, in words (given by the
evaluation when it has them); ``deviation_flags``: the deviation flag codes passed in (not the information flags), comma-separated
(always filled in by this module).
"""


FLAG_CODES: tuple[str, ...] = (
    "temperature-low",
    "short-hold",
    "long-come-up",
    "low-initial-temperature",
    "record-gap",
    "process-temperature-not-reached",
    "record-ends-before-cooling",
    "critical-factor-out",
    "scheduled-F-below-target",
    "implausible-input",
    "alternate-process-met",
    "recorder-above-indicating",
    "model-vs-filed",
    "ball-formula-differs",
    "jh-differs-from-theory",
    "parameter-not-used",
    "surface-heat-transfer-assumed",
    "vent-schedule-not-met",
    "water-level-low",
    "water-level-below-top-layer",
    "circulation-loss",
    "rotation-out",
    "rotation-stopped",
    "reel-stop",
    "reel-speed-low",
    "botulinum-not-shown",
)
"""Flag codes the evaluation may raise; a rule naming any other code is a load-time error."""

INFORMATION_FLAG_CODES: frozenset[str] = frozenset({
    "alternate-process-met",
    "scheduled-F-below-target",
    "model-vs-filed",
    "ball-formula-differs",
    "jh-differs-from-theory",
    "parameter-not-used",
    "surface-heat-transfer-assumed",
    "botulinum-not-shown",
})
"""Flag codes about the filed process and its model, not about this cycle: they do not make
``deviation_found`` (the model's own doubts leave the lethality not fully established instead)."""

DEVIATION_FLAG_CODES: frozenset[str] = frozenset(FLAG_CODES) - INFORMATION_FLAG_CODES
"""Flag codes that mean a deviation of this cycle."""


DISPOSITIONS: tuple[str, ...] = (
    "no-deviation",
    "covered-by-alternate",
    "evaluate",
    "reprocess",
    "reprocess-or-destroy",
)
"""Dispositions ordered from least to most severe."""


DISPOSITION_SUMMARY: dict[str, str] = {
    "no-deviation": "The record shows every critical factor of the scheduled process met.",
    "covered-by-alternate": (
        "The cycle as recorded meets an alternate process filed with the scheduled process; "
        "document it in the deviation file."
    ),
    "evaluate": (
        "A deviation happened: hold the lot; the process authority evaluates it before any "
        "release."
    ),
    "reprocess": (
        "Delivered lethality is below the filed target: hold the lot; reprocess it as filed or "
        "have the process authority evaluate it."
    ),
    "reprocess-or-destroy": (
        "Public-health risk: the lot may not leave the plant under any reading of this tool; "
        "reprocess it as filed or destroy it."
    ),
}
"""One plain sentence per disposition, for an operator."""


STANDING_CAUTION: str = (
    "This is guidance, never a release: the process authority decides, in writing, and local "
    "regulations govern. "
    "Incubating samples cannot by itself show that a lot is safe: C. botulinum can grow without "
    "swelling the container. "
    "If any container of a deviant lot has been distributed, the regulator must be told. "
    "Incomplete records may make a lot impossible to evaluate; such a lot is reprocessed or "
    "destroyed."
)
"""Shown with every guidance, whatever the rules say."""


OPERATORS: dict[str, Any] = {
    "<": operator.lt,
    "<=": operator.le,
    ">": operator.gt,
    ">=": operator.ge,
    "==": operator.eq,
    "!=": operator.ne,
}
"""Comparisons a metric condition may use."""


_KNOWN_METRICS = NUMERIC_METRICS + BOOLEAN_METRICS


_PLACEHOLDER_FACTS = _KNOWN_METRICS + TEXT_FACTS


_SEVERITY = {name: rank for rank, name in enumerate(DISPOSITIONS)}


def severity(disposition: str) -> int:
    """Rank of a disposition: 0 for ``no-deviation`` up to 4 for ``reprocess-or-destroy``."""
    return _SEVERITY[disposition]
