"""Tests of deviation.guidance.rules: schema, loading and layering, the default rule set, explanations."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

from deviation.errors import RulesError
from deviation.guidance import (
    BOOLEAN_METRICS,
    DISPOSITIONS,
    FLAG_CODES,
    NUMERIC_METRICS,
    STANDING_CAUTION,
    check_rule_file,
    default_rules_path,
    evaluate_guidance,
    explain,
    load_rule_set,
    severity,
)

BAD_RULES = Path(__file__).parents[1] / "data" / "bad_rules"
REPO_DEFAULT = Path(__file__).resolve().parents[2] / "rules" / "default.toml"
KNOWN_METRICS = ", ".join(NUMERIC_METRICS + BOOLEAN_METRICS)
KNOWN_FLAGS = ", ".join(FLAG_CODES)
D_BOT_MIN = 0.21  # C. botulinum D121.1 [min] (Stumbo 1973)


def make_facts(
    delivered_F_min: float | None = 8.0,
    target_F_min: float = 6.0,
    D_bot_min: float = D_BOT_MIN,
    **overrides,
) -> dict:
    """Facts of an undeviated cycle, with the derived facts computed from delivered F0."""
    if delivered_F_min is None:
        margin = log_reductions = spoilage = None
    else:
        margin = delivered_F_min - target_F_min
        log_reductions = delivered_F_min / D_bot_min
        # 1e-6 at the target, ten-fold per D_spoilage = 1 min below it (first-order survivors)
        spoilage = min(1.0, 1e-6 * 10.0 ** (target_F_min - delivered_F_min))
    facts = {
        "delivered_F_min": delivered_F_min,
        "target_F_min": target_F_min,
        "scheduled_F_min": 8.5,
        "F_margin_min": margin,
        "botulinum_log_reductions": log_reductions,
        "botulinum_log_reductions_required": 12.0,
        "spoilage_probability": spoilage,
        "target_spoilage_probability": 1e-6,
        "expected_nonsterile_containers": None if spoilage is None else spoilage * 10000,
        "lot_size_containers": 10000.0,
        "max_record_gap_min": 1.0,
        "record_gap_limit_min": 15.0,
        "lowest_retort_during_hold_C": 121.1,
        "process_temperature_C": 121.1,
        "temperature_drop_C": 0.0,
        "hold_deficit_min": 0.0,
        "come_up_excess_min": 0.0,
        "initial_temperature_deficit_C": 0.0,
        "scheduled_F_ratio": 8.5 / target_F_min,
        "degree_minutes_below_C_min": 0.0,
        "deviation_found": False,
        "covered_by_alternate": False,
        "lethality_established": True,
        "lethality_fully_established": True,
        "critical_factor_out": False,
        "cycle_running": False,
        "measured_cold_spot": False,
    }
    facts.update(overrides)
    return facts


@pytest.fixture(scope="module", autouse=True)
def _shipped_rules_only():
    """Read the repository's rules/default.toml whatever the caller's environment says."""
    with pytest.MonkeyPatch.context() as patch:
        patch.delenv("DEVIATION_RULES_DIR", raising=False)
        yield


@pytest.fixture(scope="module")
def defaults(_shipped_rules_only):
    return load_rule_set([])


def guidance(rule_set, flags=(), **facts):
    return evaluate_guidance(rule_set, make_facts(**facts), list(flags))


# ---------------------------------------------------------------------------------------------
# Every default rule: one case that fires it and one that does not
# ---------------------------------------------------------------------------------------------

DEV = {"deviation_found": True}

# rule id -> (flags, facts) that fire it, (flags, facts) close by that do not
DEFAULT_RULE_CASES = {
    "botulinum-12d-not-met": (
        ([], dict(delivered_F_min=2.0, **DEV)),  # 2.0 / 0.21 = 9.5 log reductions < 12
        ([], dict(delivered_F_min=2.6, **DEV)),  # 2.6 / 0.21 = 12.4 >= 12
    ),
    "lethality-not-established": (
        (["record-gap"], dict(delivered_F_min=None, lethality_established=False, **DEV)),
        (["record-gap"], dict(delivered_F_min=None, lethality_established=True, **DEV)),
    ),
    "below-filed-target": (
        ([], dict(delivered_F_min=5.0, **DEV)),  # below 6.0, 23.8 log reductions
        ([], dict(delivered_F_min=6.0, **DEV)),  # equal to the target is not below it
    ),
    "deviation-hold-and-evaluate": (
        (["short-hold"], dict(**DEV)),
        (["short-hold"], dict(covered_by_alternate=True, **DEV)),
    ),
    "retort-temperature-drop": (
        (["temperature-low"], dict(lowest_retort_during_hold_C=118.0, temperature_drop_C=3.1,
                                   **DEV)),
        (["temperature-low"], dict(covered_by_alternate=True, **DEV)),
    ),
    "process-temperature-not-reached": (
        (["process-temperature-not-reached"], dict(**DEV)),
        (["process-temperature-not-reached"], dict(covered_by_alternate=True, **DEV)),
    ),
    "short-hold": (
        (["short-hold"], dict(hold_deficit_min=5.0, **DEV)),
        (["short-hold"], dict(covered_by_alternate=True, **DEV)),
    ),
    "low-initial-temperature": (
        (["low-initial-temperature"], dict(initial_temperature_deficit_C=10.0, **DEV)),
        (["short-hold"], dict(**DEV)),
    ),
    "long-come-up": (
        (["long-come-up"], dict(come_up_excess_min=4.0, **DEV)),
        (["short-hold"], dict(**DEV)),
    ),
    "record-gap": (
        ([], dict(max_record_gap_min=20.0, **DEV)),  # 20 > 15 even without the flag
        ([], dict(max_record_gap_min=15.0, **DEV)),  # at the limit is not over it
    ),
    "critical-factor-out": (
        ([], dict(critical_factor_out=True, **DEV)),
        ([], dict(critical_factor_out=False, **DEV)),
    ),
    "model-does-not-reproduce-target": (
        (["scheduled-F-below-target"], dict(scheduled_F_min=5.0, scheduled_F_ratio=5 / 6, **DEV)),
        (["implausible-input"], dict(**DEV)),
    ),
    "recorder-above-indicating": (
        (["recorder-above-indicating"], dict(**DEV)),
        (["temperature-low"], dict(**DEV)),
    ),
    "vent-schedule-not-met": (
        (["vent-schedule-not-met"], dict(vent_study_on_file=False, **DEV)),
        (["vent-schedule-not-met"], dict(vent_study_on_file=True, **DEV)),
    ),
    "vent-schedule-not-met-study-on-file": (
        (["vent-schedule-not-met"], dict(vent_study_on_file=True, **DEV)),
        (["vent-schedule-not-met"], dict(vent_study_on_file=False, **DEV)),
    ),
    "water-level-below-top-layer": (
        (["water-level-below-top-layer"], dict(**DEV)),
        (["water-level-low"], dict(**DEV)),
    ),
    "system-critical-factor": (
        (["rotation-stopped"], dict(**DEV)),
        (["temperature-low"], dict(**DEV)),
    ),
    "uncertainty-below-target": (
        ([], dict(uncertainty_probability_below_target=0.06, uncertainty_F_p05_min=5.2)),
        ([], dict(uncertainty_probability_below_target=0.05, uncertainty_F_p05_min=6.1)),
    ),
    "implausible-input": (
        (["implausible-input"], dict(**DEV)),
        (["scheduled-F-below-target"], dict(**DEV)),
    ),
    "lethality-not-fully-established": (
        ([], dict(lethality_fully_established=False, **DEV)),
        ([], dict(lethality_fully_established=True, **DEV)),
    ),
    "cycle-still-running": (
        ([], dict(cycle_running=True, **DEV)),
        ([], dict(cycle_running=False, **DEV)),
    ),
    "alternate-process-met": (
        (["temperature-low", "alternate-process-met"], dict(covered_by_alternate=True, **DEV)),
        (["temperature-low", "record-gap"], dict(covered_by_alternate=True, **DEV)),
    ),
}


def test_every_default_rule_has_a_firing_and_a_quiet_case(defaults):
    assert set(DEFAULT_RULE_CASES) == {rule.id for rule in defaults.rules}


@pytest.mark.parametrize("rule_id", sorted(DEFAULT_RULE_CASES))
def test_default_rule_fires(defaults, rule_id):
    flags, facts = DEFAULT_RULE_CASES[rule_id][0]
    result = evaluate_guidance(defaults, make_facts(**facts), flags)
    assert rule_id in result.fired
    rule = defaults.get(rule_id)
    assert severity(result.disposition) >= severity(rule.disposition)
    assert any(
        reason.rule_id == rule_id and reason.basis == rule.basis for reason in result.reasons
    )
    assert "{" not in " ".join(reason.text for reason in result.reasons)


@pytest.mark.parametrize("rule_id", sorted(DEFAULT_RULE_CASES))
def test_default_rule_stays_quiet(defaults, rule_id):
    flags, facts = DEFAULT_RULE_CASES[rule_id][1]
    result = evaluate_guidance(defaults, make_facts(**facts), flags)
    assert rule_id not in result.fired


def test_every_default_rule_cites_a_basis(defaults):
    for rule in defaults.rules:
        assert rule.basis
        assert "21 CFR" in rule.basis or "Stumbo" in rule.basis or "common practice" in rule.basis


# ---------------------------------------------------------------------------------------------
# Dispositions of the default set on whole situations
# ---------------------------------------------------------------------------------------------


def test_undeviated_cycle_is_no_deviation(defaults):
    result = guidance(defaults)
    assert result.disposition == "no-deviation"
    assert result.fired == [] and result.reasons == [] and result.actions == []
    assert result.caution == STANDING_CAUTION
    assert result.rule_set_sha256 == defaults.sha256


def test_temperature_drop_with_margin_is_evaluate_with_margin_shown(defaults):
    result = guidance(
        defaults, ["temperature-low"], delivered_F_min=7.25, deviation_found=True,
        lowest_retort_during_hold_C=119.5, temperature_drop_C=1.6,
    )
    assert result.disposition == "evaluate"
    assert result.fired == ["deviation-hold-and-evaluate", "retort-temperature-drop"]
    texts = [reason.text for reason in result.reasons]
    assert "Delivered F0 7.25 min against the filed target 6.00 min: margin +1.25 min." in texts
    assert (
        "The retort fell to 119.5 °C during the hold, 1.6 °C below the process temperature "
        "121.1 °C (0.0 °C·min below)." in texts
    )
    assert result.actions[:2] == [
        "Hold the lot: do not ship, label and segregate it.",
        "Notify the process authority now; record the deviation in the deviation file.",
    ]


def test_temperature_drop_covered_by_alternate(defaults):
    result = guidance(
        defaults, ["temperature-low", "alternate-process-met"], deviation_found=True,
        covered_by_alternate=True,
    )
    assert result.disposition == "covered-by-alternate"
    assert result.fired == ["alternate-process-met"]
    assert "Document the use of the alternate process in the deviation file." in result.actions


def test_alternate_does_not_cover_a_critical_factor(defaults):
    result = guidance(
        defaults, ["temperature-low", "critical-factor-out"], deviation_found=True,
        covered_by_alternate=True, critical_factor_out=True,
        critical_factors_out="fill weight 318 g (max 310 g)",
    )
    assert result.disposition == "evaluate"
    assert "alternate-process-met" not in result.fired
    assert any("(fill weight 318 g (max 310 g))" in reason.text for reason in result.reasons)


def test_below_target_with_12d_met_is_reprocess(defaults):
    result = guidance(defaults, ["short-hold"], delivered_F_min=4.0, deviation_found=True)
    assert result.disposition == "reprocess"
    assert result.fired[0] == "below-filed-target"
    assert result.reasons[0].text == (
        "Delivered F0 4.00 min is below the filed target 6.00 min (margin -2.00 min)."
    )
    # 1e-6 * 10**(6 - 4) = 1e-4 per container; 1e-4 * 10000 = 1 container
    assert "rises to 0.0001 per container against the filed 1e-06: about 1 non-sterile " \
        "containers in a lot of 10000." in result.reasons[1].text


def test_12d_not_met_is_reprocess_or_destroy_and_actions_lead_with_it(defaults):
    result = guidance(defaults, ["temperature-low"], delivered_F_min=1.5, deviation_found=True)
    assert result.disposition == "reprocess-or-destroy"
    assert result.fired[0] == "botulinum-12d-not-met"
    assert "below-filed-target" not in result.fired  # its condition requires 12D met
    assert result.reasons[0].text == (
        "The cold spot received 7.1 log reductions of C. botulinum spores; at least 12 are "
        "required (the 12D principle)."
    )
    assert result.actions[:4] == [
        "Hold the lot: do not ship, label and segregate it.",
        "Notify the process authority now; record the deviation in the deviation file.",
        "Do not release: reprocess as filed or destroy, as the process authority decides.",
        "If any container of this lot has been distributed, tell the regulator.",
    ]
    assert len(result.actions) == len(set(result.actions))


def test_lethality_not_established_is_reprocess_or_destroy_with_nothing_computed(defaults):
    facts = {name: None for name in NUMERIC_METRICS}
    facts.update(deviation_found=True, covered_by_alternate=False, lethality_established=False)
    result = evaluate_guidance(defaults, facts, ["record-gap"])
    assert result.disposition == "reprocess-or-destroy"
    assert result.fired[0] == "lethality-not-established"
    assert "delivered_F_min" in result.not_computed
    # placeholders of facts not computed read n/a, never an exception
    assert "Delivered F0 n/a min against the filed target n/a min: margin n/a min." in [
        reason.text for reason in result.reasons
    ]


def test_running_cycle_is_evaluated_again_not_condemned_on_lethality_so_far(defaults):
    # The record stops mid-hold: F0 so far is a lower bound, the rest of the cycle adds to it.
    result = guidance(
        defaults, ["record-ends-before-cooling"], delivered_F_min=0.5, deviation_found=True,
        cycle_running=True,
    )
    assert result.disposition == "evaluate"
    assert "botulinum-12d-not-met" not in result.fired
    assert "below-filed-target" not in result.fired
    assert "Evaluate again when the cycle has ended and the whole record is in." in result.actions
    assert (
        "So far the cold spot has received F0 0.50 min (2.4 log reductions of C. botulinum) "
        "against the filed target 6.00 min; the rest of the cycle adds to it."
        in [reason.text for reason in result.reasons]
    )
    # cycle_running without the flag (an inconsistent input) keeps the severe reading
    result = guidance(defaults, [], delivered_F_min=0.5, deviation_found=True, cycle_running=True)
    assert result.disposition == "reprocess-or-destroy"


def test_unknown_comparison_does_not_fire_but_is_reported(defaults):
    result = guidance(defaults, delivered_F_min=None, deviation_found=False)
    assert "below-filed-target" not in result.fired
    assert "botulinum-12d-not-met" not in result.fired
    assert {"delivered_F_min", "botulinum_log_reductions"} <= set(result.not_computed)


def test_unknown_whether_a_deviation_happened_is_never_no_deviation(defaults):
    result = guidance(defaults, deviation_found=None, covered_by_alternate=None)
    assert result.fired == []
    assert result.disposition == "evaluate"
    assert [reason.rule_id for reason in result.reasons] == ["no-rule-covered"]
    assert result.reasons[0].basis == "21 CFR 113.89"
    assert result.actions[0] == "Hold the lot: do not ship, label and segregate it."


def test_deviation_flag_without_deviation_found_is_never_no_deviation(tmp_path, monkeypatch):
    # A rule set that covers no flag, and facts that forgot to set deviation_found: a flagged
    # lot is still held, while an information-only flag changes nothing.
    write(
        tmp_path / "default.toml",
        '[[rule]]\nid = "low-f"\ntitle = "t"\ndisposition = "reprocess"\nreasons = ["r"]\n'
        'basis = "common practice"\nwhen = { metric = "delivered_F_min", op = "<", value = 3.0 }\n',
    )
    monkeypatch.setenv("DEVIATION_RULES_DIR", str(tmp_path))
    rule_set = load_rule_set([])
    flagged = evaluate_guidance(rule_set, make_facts(deviation_found=False), ["short-hold"])
    assert flagged.disposition == "evaluate"
    assert [reason.rule_id for reason in flagged.reasons] == ["no-rule-covered"]
    info = evaluate_guidance(rule_set, make_facts(deviation_found=False), ["alternate-process-met"])
    assert info.disposition == "no-deviation"


def test_standing_caution_says_who_decides():
    for words in (
        "process authority decides, in writing",
        "local regulations govern",
        "never a release",
        "Incubating samples cannot by itself show",
        "distributed, the regulator must be told",
        "Incomplete records",
    ):
        assert words in STANDING_CAUTION


def test_dispositions_ordered_by_severity():
    assert DISPOSITIONS == (
        "no-deviation", "covered-by-alternate", "evaluate", "reprocess", "reprocess-or-destroy",
    )
    assert [severity(name) for name in DISPOSITIONS] == [0, 1, 2, 3, 4]


# ---------------------------------------------------------------------------------------------
# Explanations
# ---------------------------------------------------------------------------------------------


def test_explain_traces_each_sub_condition_with_the_facts(defaults):
    facts = make_facts(delivered_F_min=4.12, deviation_found=True)
    explanations = {item.id: item for item in explain(defaults, facts, ["short-hold"])}
    assert [item.id for item in explain(defaults, facts, [])] == [r.id for r in defaults.rules]

    below = explanations["below-filed-target"]
    assert below.fired and below.outcome == "true" and below.disposition == "reprocess"
    assert below.trace == [
        "all of → true",
        "  delivered_F_min = 4.12 < target_F_min = 6.0 → true",
        "  botulinum_log_reductions = 19.619 >= botulinum_log_reductions_required = 12.0 → true",
        "  not → true",
        "    flag record-ends-before-cooling absent → false",
    ]
    assert explanations["short-hold"].trace == [
        "all of → true",
        "  flag short-hold present → true",
        "  covered_by_alternate = false == false → true",
    ]
    alternate = explanations["alternate-process-met"]
    assert not alternate.fired
    assert alternate.trace[-1] == (
        "    any flag of low-initial-temperature, long-come-up, record-gap, critical-factor-out, "
        "scheduled-F-below-target, implausible-input, record-ends-before-cooling "
        "(none present) → false"
    )
    assert explanations["botulinum-12d-not-met"].source == str(default_rules_path())


def test_explain_marks_facts_not_computed(defaults):
    facts = make_facts(delivered_F_min=None, deviation_found=True)
    below = {item.id: item for item in explain(defaults, facts, [])}["below-filed-target"]
    assert below.outcome == "unknown" and not below.fired
    assert below.trace[1] == "  delivered_F_min = not computed < target_F_min = 6.0 → unknown"
    assert below.not_computed == ["botulinum_log_reductions", "delivered_F_min"]


def test_not_keeps_unknown_unknown(tmp_path, monkeypatch):
    rules = tmp_path / "rules"
    rules.mkdir()
    (rules / "default.toml").write_text(
        '[[rule]]\nid = "not-low"\ntitle = "t"\ndisposition = "evaluate"\nreasons = ["r"]\n'
        'basis = "common practice"\n'
        'when = { not = { metric = "delivered_F_min", op = ">=", value = 3.0 } }\n',
        encoding="utf-8",
    )
    monkeypatch.setenv("DEVIATION_RULES_DIR", str(rules))
    rule_set = load_rule_set([])
    (item,) = explain(rule_set, {"delivered_F_min": None}, [])
    assert item.outcome == "unknown" and not item.fired
    assert item.trace == ["not → unknown", "  delivered_F_min = not computed >= 3.0 → unknown"]
    (item,) = explain(rule_set, {"delivered_F_min": 2.0}, [])
    assert item.fired


def test_scaled_metric_ref_trace(tmp_path, monkeypatch):
    rules = tmp_path / "rules"
    rules.mkdir()
    (rules / "default.toml").write_text(
        '[[rule]]\nid = "thin-margin"\ntitle = "t"\ndisposition = "evaluate"\nreasons = ["r"]\n'
        'basis = "common practice"\n'
        'when = { metric = "delivered_F_min", op = "<", metric_ref = "target_F_min", '
        'scale = 1.2 }\n',
        encoding="utf-8",
    )
    monkeypatch.setenv("DEVIATION_RULES_DIR", str(rules))
    (item,) = explain(load_rule_set([]), {"delivered_F_min": 7.0, "target_F_min": 6.0}, [])
    assert item.fired  # 7.0 < 1.2 * 6.0 = 7.2
    assert item.trace == ["delivered_F_min = 7.0 < 1.2 × target_F_min (6.0) = 7.2 → true"]


# ---------------------------------------------------------------------------------------------
# Loading, layering, hashing
# ---------------------------------------------------------------------------------------------


def write(path: Path, text: str) -> Path:
    path.write_text(text, encoding="utf-8")
    return path


def test_default_rules_path_and_its_override(monkeypatch, tmp_path):
    monkeypatch.delenv("DEVIATION_RULES_DIR", raising=False)
    assert default_rules_path() == REPO_DEFAULT
    monkeypatch.setenv("DEVIATION_RULES_DIR", str(tmp_path))
    assert default_rules_path() == tmp_path / "default.toml"


def test_check_rule_file_without_a_file_checks_the_defaults(defaults):
    assert check_rule_file().sha256 == defaults.sha256
    assert check_rule_file(REPO_DEFAULT).sources == (str(REPO_DEFAULT),)  # not read twice


def test_override_by_id_keeps_position_and_unchanged_fields(defaults, tmp_path):
    plant = write(
        tmp_path / "plant.toml",
        '[[rule]]\nid = "short-hold"\ntitle = "Hold cut short"\ndisposition = "reprocess"\n',
    )
    rule_set = load_rule_set([plant])
    ids = [rule.id for rule in rule_set.rules]
    assert ids == [rule.id for rule in defaults.rules]
    rule = rule_set.get("short-hold")
    assert rule.title == "Hold cut short" and rule.disposition == "reprocess"
    assert rule.when == defaults.get("short-hold").when
    assert rule.basis == defaults.get("short-hold").basis
    assert rule_set.rule_sources["short-hold"] == str(plant)
    assert rule_set.sources == (str(REPO_DEFAULT), str(plant))
    result = evaluate_guidance(rule_set, make_facts(deviation_found=True), ["short-hold"])
    assert result.disposition == "reprocess"


def test_plant_adds_a_stricter_rule(tmp_path):
    plant = write(
        tmp_path / "plant.toml",
        '[[rule]]\nid = "plant-f0-floor"\ntitle = "Below the plant F0 floor"\n'
        'disposition = "reprocess"\n'
        'when = { metric = "delivered_F_min", op = "<", value = 7 }\n'
        'reasons = ["Delivered F0 {delivered_F_min:.1f} min is below the plant floor of 7 min."]\n'
        'actions = ["Reprocess the lot as filed."]\n'
        'basis = "plant policy (process authority letter)"\n',
    )
    rule_set = load_rule_set([plant])
    assert rule_set.rules[-1].id == "plant-f0-floor"
    result = evaluate_guidance(rule_set, make_facts(delivered_F_min=6.5), [])
    assert result.disposition == "reprocess"
    assert result.reasons[0].text == "Delivered F0 6.5 min is below the plant floor of 7 min."
    assert result.reasons[0].basis == "plant policy (process authority letter)"


def test_disable_a_rule(defaults, tmp_path):
    plant = write(tmp_path / "plant.toml", '[[rule]]\nid = "long-come-up"\nenabled = false\n')
    rule_set = load_rule_set([plant])
    facts = make_facts(deviation_found=True, come_up_excess_min=3.0)
    result = evaluate_guidance(rule_set, facts, ["long-come-up"])
    assert "long-come-up" not in result.fired
    assert result.disposition == "evaluate"  # the general deviation rule still holds the lot
    item = {e.id: e for e in explain(rule_set, facts, ["long-come-up"])}["long-come-up"]
    assert not item.enabled and item.outcome == "disabled"
    assert item.trace == [f"disabled by {plant}"]
    assert rule_set.sha256 != defaults.sha256


def test_folder_layers_in_name_order_and_skips_the_default(tmp_path, monkeypatch):
    monkeypatch.delenv("DEVIATION_RULES_DIR", raising=False)
    folder = tmp_path / "plant_rules"
    folder.mkdir()
    write(folder / "20-line-b.toml", '[[rule]]\nid = "short-hold"\ntitle = "from 20"\n')
    write(folder / "10-site.toml", '[[rule]]\nid = "short-hold"\ntitle = "from 10"\n')
    write(folder / "notes.txt", "not a rule file")
    rule_set = load_rule_set([folder])
    assert rule_set.get("short-hold").title == "from 20"
    assert rule_set.sources == (
        str(REPO_DEFAULT), str(folder / "10-site.toml"), str(folder / "20-line-b.toml"),
    )
    # the shipped rules folder itself holds the default file: it is not read twice
    assert load_rule_set([REPO_DEFAULT.parent]).sources == (str(REPO_DEFAULT),)


def test_files_layer_in_the_order_given(tmp_path):
    first = write(tmp_path / "b.toml", '[[rule]]\nid = "short-hold"\ntitle = "b"\n')
    second = write(tmp_path / "a.toml", '[[rule]]\nid = "short-hold"\ntitle = "a"\n')
    assert load_rule_set([first, second]).get("short-hold").title == "a"
    assert load_rule_set([second, first]).get("short-hold").title == "b"


def test_missing_rule_file_or_empty_folder(tmp_path):
    with pytest.raises(RulesError) as error:
        load_rule_set([tmp_path / "nope.toml"])
    assert str(error.value) == f"{tmp_path / 'nope.toml'}: no such rule file or folder"
    empty = tmp_path / "empty"
    empty.mkdir()
    with pytest.raises(RulesError) as error:
        load_rule_set([empty])
    assert str(error.value) == f"{empty}: the rules folder holds no *.toml rule files"


def test_missing_default_file(tmp_path, monkeypatch):
    monkeypatch.setenv("DEVIATION_RULES_DIR", str(tmp_path))
    with pytest.raises(RulesError) as error:
        load_rule_set([])
    assert str(error.value) == f"{tmp_path / 'default.toml'}: no such rule file"


def sha_of_default_text(text: str, tmp_path: Path, monkeypatch, name: str) -> str:
    folder = tmp_path / name
    folder.mkdir()
    write(folder / "default.toml", text)
    monkeypatch.setenv("DEVIATION_RULES_DIR", str(folder))
    return load_rule_set([]).sha256


def test_sha256_follows_meaning_not_layout(defaults, tmp_path, monkeypatch):
    text = REPO_DEFAULT.read_text(encoding="utf-8")
    same = sha_of_default_text(text, tmp_path, monkeypatch, "copy")
    assert same == defaults.sha256

    relaid = "# a comment added by the plant\n\n" + text.replace("\n[[rule]]", "\n\n\n[[rule]]")
    relaid = relaid.replace('disposition = "evaluate"', 'disposition   =   "evaluate"   # spaced')
    assert sha_of_default_text(relaid, tmp_path, monkeypatch, "relaid") == defaults.sha256

    needle = '{ metric = "max_record_gap_min", op = ">", metric_ref = "record_gap_limit_min" }'
    assert needle in text
    threshold = text.replace(needle, '{ metric = "max_record_gap_min", op = ">", value = 10.0 }')
    changed = sha_of_default_text(threshold, tmp_path, monkeypatch, "threshold")
    assert changed != defaults.sha256
    # 10 and 10.0 are the same threshold
    integer = text.replace(needle, '{ metric = "max_record_gap_min", op = ">", value = 10 }')
    assert sha_of_default_text(integer, tmp_path, monkeypatch, "integer") == changed


# ---------------------------------------------------------------------------------------------
# Malformed rule files: one per failure mode, each with its exact message
# ---------------------------------------------------------------------------------------------

NEW_RULE = "no earlier rule file defines 'low-f', so this is a new rule and needs every field"

BAD_RULE_MESSAGES = {
    "unknown_metric": (
        "{f}, rule 'low-f' (#1), field when.metric: unknown metric 'F0_delivered'; known: "
        + KNOWN_METRICS
    ),
    "metric_ref_unknown": (
        "{f}, rule 'low-f' (#1), field when.metric_ref: unknown metric 'filed_F_min'; known: "
        + KNOWN_METRICS
    ),
    "unknown_comparison": (
        "{f}, rule 'low-f' (#1), field when.op: unknown comparison '=<'; "
        "expected one of: <, <=, >, >=, ==, !="
    ),
    "missing_disposition": (
        "{f}, rule 'low-f' (#1), field disposition: required but missing; " + NEW_RULE
    ),
    "missing_basis": "{f}, rule 'low-f' (#1), field basis: required but missing; " + NEW_RULE,
    "missing_id": "{f}, rule #1, field id: required but missing",
    "unknown_disposition": (
        "{f}, rule 'low-f' (#1), field disposition: unknown disposition 'hold'; expected one of: "
        "no-deviation, covered-by-alternate, evaluate, reprocess, reprocess-or-destroy"
    ),
    "duplicate_id": "{f}, rule 'low-f' (#2): duplicate id; rule #1 of this file has the same id",
    "condition_all_and_any": (
        "{f}, rule 'low-f' (#1), field when: a condition holds exactly one of: "
        "metric, flag, any_flag, all, any, not; found all, any"
    ),
    "condition_no_kind": (
        "{f}, rule 'low-f' (#1), field when: a condition holds exactly one of: "
        "metric, flag, any_flag, all, any, not; found none of them (keys: threshold)"
    ),
    "condition_empty_all": (
        "{f}, rule 'low-f' (#1), field when.all: 'all' needs at least one condition"
    ),
    "condition_as_string": (
        "{f}, rule 'low-f' (#1), field when: a condition must be a table such as "
        '{{ metric = "delivered_F_min", op = "<", value = 3.0 }}, '
        "found string 'delivered_F_min < 3.0'"
    ),
    "value_wrong_type": (
        "{f}, rule 'low-f' (#1), field when.value: value for the number metric "
        "'delivered_F_min' must be a number, found string '3.0'"
    ),
    "value_number_for_boolean": (
        "{f}, rule 'deviation' (#1), field when.value: value for the true/false metric "
        "'deviation_found' must be true or false, found number 1"
    ),
    "ordering_on_boolean": (
        "{f}, rule 'deviation' (#1), field when.op: comparison '>' does not apply to the "
        "true/false metric 'deviation_found'; use == or !="
    ),
    "value_and_metric_ref": (
        "{f}, rule 'low-f' (#1), field when: give value or metric_ref, not both"
    ),
    "unknown_flag": (
        "{f}, rule 'drop' (#1), field when.flag: unknown flag code 'temperature-drop'; known: "
        + KNOWN_FLAGS
    ),
    "syntax_error": "{f}, line 4, column 16: TOML syntax error: Illegal character '\\n'",
    "unknown_key": (
        "{f}, rule 'low-f' (#1), field severity: unknown key; expected one of: "
        "id, title, disposition, when, reasons, actions, basis, enabled"
    ),
    "unknown_key_in_condition": (
        "{f}, rule 'low-f' (#1), field when.any[1].units: unknown key; expected one of: "
        "metric, op, value, metric_ref, scale"
    ),
    "unknown_placeholder": (
        "{f}, rule 'low-f' (#1), field reasons[1]: placeholder {{F0}} names no known fact; "
        "known: " + KNOWN_METRICS + ", critical_factors_out, deviation_flags"
    ),
    "bad_format_spec": (
        "{f}, rule 'low-f' (#1), field reasons[0]: placeholder {{delivered_F_min}}: "
        "format '.2q' does not apply to a number"
    ),
    "unbalanced_brace": (
        "{f}, rule 'low-f' (#1), field reasons[0]: bad placeholder braces "
        "(expected '}}' before end of string); write {{{{ and }}}} for literal braces"
    ),
    "bad_id": (
        "{f}, rule 'Low_F' (#1), field id: id 'Low_F' must be kebab-case: lower-case letters "
        "and digits joined by single hyphens, such as 'short-hold'"
    ),
    "empty_reasons": "{f}, rule 'low-f' (#1), field reasons: a rule needs at least one reason",
    "empty_basis": "{f}, rule 'low-f' (#1), field basis: must not be empty",
    "enabled_not_boolean": (
        "{f}, rule 'short-hold' (#1), field enabled: must be true or false, found string 'no'"
    ),
    "disable_unknown_rule": (
        "{f}, rule 'short-hold-time' (#1), fields title, disposition, when, reasons, basis: "
        "required but missing; no earlier rule file defines 'short-hold-time', so this is a new "
        "rule and needs every field (did you mean 'short-hold'?)"
    ),
    "rule_not_array": "{f}, field rule: must be an array of tables written [[rule]], found a table",
    "no_rules": "{f}: no [[rule]] tables found",
    "unknown_top_level_key": (
        "{f}, field version: unknown key; a rule file holds [[rule]] tables and a [settings] table"
    ),
    "not_utf8": "{f}: not UTF-8 text (byte 32); save the rule file as UTF-8",
    "two_problems": (
        "{f}, rule 'low-f' (#1), field basis: required but missing; " + NEW_RULE + "\n"
        "{f}, rule 'very-low-f' (#2), field when.not.metric: unknown metric "
        "'delivered_F_minutes'; known: " + KNOWN_METRICS
    ),
}


def test_every_bad_rule_file_has_its_message():
    assert {path.stem for path in BAD_RULES.glob("*.toml")} == set(BAD_RULE_MESSAGES)


@pytest.mark.parametrize("name", sorted(BAD_RULE_MESSAGES))
def test_bad_rule_file_message(name):
    path = BAD_RULES / f"{name}.toml"
    with pytest.raises(RulesError) as error:
        check_rule_file(path)
    assert str(error.value) == BAD_RULE_MESSAGES[name].format(f=path)


def test_bad_default_file_reports_missing_fields_plainly(tmp_path, monkeypatch):
    # In the default file every rule is new, so no layering hint is given.
    shutil.copy(BAD_RULES / "missing_basis.toml", tmp_path / "default.toml")
    monkeypatch.setenv("DEVIATION_RULES_DIR", str(tmp_path))
    with pytest.raises(RulesError) as error:
        load_rule_set([])
    assert str(error.value) == (
        f"{tmp_path / 'default.toml'}, rule 'low-f' (#1), field basis: required but missing"
    )


def test_bad_override_names_the_plant_file(tmp_path):
    plant = write(
        tmp_path / "plant.toml",
        '[[rule]]\nid = "short-hold"\n'
        'when = { metric = "hold_deficit_min", op = ">", value = "5" }\n',
    )
    with pytest.raises(RulesError) as error:
        load_rule_set([plant])
    assert str(error.value) == (
        f"{plant}, rule 'short-hold' (#1), field when.value: value for the number metric "
        "'hold_deficit_min' must be a number, found string '5'"
    )
