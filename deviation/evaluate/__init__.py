"""The one evaluation pipeline: case -> profile -> cold spot -> lethality -> spoilage -> guidance.

CLI, TUI, reports and replay call :func:`evaluate_case`; none of them computes physics.
"""

from deviation.evaluate.pipeline import (
    CAUTION,
    Evaluation,
    check_record,
    cold_spot_model,
    default_rule_set,
    evaluate_case,
    evaluate_snapshot,
    scheduled_F_min,
)

__all__ = ["CAUTION", "Evaluation", "check_record", "cold_spot_model", "default_rule_set",
           "evaluate_case", "evaluate_snapshot", "scheduled_F_min"]
