"""The one evaluation pipeline: case -> profile -> cold spot -> lethality -> spoilage -> guidance.

CLI, TUI, reports and replay call :func:`evaluate_case`; none of them computes physics.

- ``pipeline``: :func:`evaluate_case`, the retort profile, flags and facts for the rules.
- ``cold_spot``: the heat-penetration model of a filed process and its run over a record.
- ``whatif``: projection, extension to target, reprocess, gap worst case, Monte Carlo.
- ``output``: the :class:`Evaluation` JSON contract.
"""

from deviation.evaluate.cold_spot import cold_spot_model, scheduled_F_min
from deviation.evaluate.output import CAUTION, Evaluation
from deviation.evaluate.pipeline import (
    check_record,
    default_rule_set,
    evaluate_case,
    evaluate_snapshot,
)

__all__ = ["CAUTION", "Evaluation", "check_record", "cold_spot_model", "default_rule_set",
           "evaluate_case", "evaluate_snapshot", "scheduled_F_min"]
