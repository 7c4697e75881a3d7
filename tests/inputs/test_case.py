"""Case files: every bad-input fixture gets its exact message; units convert at the edge."""

from pathlib import Path

import pytest

from deviation.errors import CaseError
from deviation.inputs.case import LoadedCase, case_json_schema, load_case, parse_case

DATA = Path(__file__).parents[1] / "data"

EXPECTED_MESSAGES = {
    'bad_shape.toml': "process.container.shape: expected 'cylinder' or 'brick' (found 'sphere')",
    'both_units.toml': 'process: give process_temperature_C or process_temperature_F, not both',
    'conduction_no_fh.toml': "process.heat_penetration: model 'conduction' needs fh_min or thermal_diffusivity_m2_s",
    'cylinder_missing_height.toml': 'process.container: a cylinder needs diameter_mm, height_mm; missing height_mm',
    'event_end_before_start.toml': "deviation.events[0]: event 'temperature-low': end_min 15.0 must be after start_min 20.0",
    'event_missing_fields.toml': "deviation.events[0]: event 'temperature-low' needs start_min, end_min, temperature_C; missing end_min, temperature_C",
    'factor_without_limits.toml': "process.critical_factors[0]: critical factor 'headspace' has neither min nor max",
    'fahrenheit_text.toml': "process: process_temperature_F must be a number, found 'hot'",
    'heating_curve_missing_jh.toml': "process.heat_penetration: model 'heating-curve' needs fh_min and jh; missing jh",
    'missing_deviation.toml': 'deviation: required key is missing',
    'missing_log_file.toml': 'deviation.retort_log file not found: tests/data/bad_cases/no_such_log.csv',
    'missing_target.toml': 'process.target_F_min: required key is missing',
    'negative_time.toml': 'process.process_time_min: expected a number above 0 (found -5)',
    'reading_unknown_factor.toml': "deviation.critical_factor_readings[0]: 'fill weight' matches no filed critical factor (filed: headspace)",
    'syntax_error.toml': "TOML syntax error: Expected ']' at the end of a table declaration (at line 27, column 11)",
    'text_for_number.toml': "deviation.lot_size_containers: expected a whole number (found 'many')",
    'unknown_event_kind.toml': "deviation.events[0].kind: expected 'temperature-low', 'hold-time', 'come-up-time', 'reading', 'venting', 'water-level', 'circulation-loss', 'rotation', 'reel-stop' or 'reel-speed' (found 'steam-gone')",
    'unknown_key.toml': 'process.comeup_minutes: unknown key (not part of the case contract)',
    'htc_without_conductivity.toml': "process.heat_penetration: surface_heat_transfer_W_m2K and thermal_conductivity_W_mK go together; give both or neither",
    'htc_with_heating_curve.toml': "process.heat_penetration: surface_heat_transfer_W_m2K needs model 'conduction' or 'finite-difference' (the heating-curve model's fh and jh already hold the surface's effect)",
    'botulinum_d_without_source.toml': "process.microbiology: botulinum_D_min 0.18 min differs from the reference 0.21 min (Stumbo 1973): give botulinum_D_source naming where the value comes from",
    'zero_lot.toml': 'deviation.lot_size_containers: expected at least 1 (found 0)',
    # Issue 13: strict types, no blank text, finite numbers within bounds (rules/limits.toml),
    # unit slips with the likely intended value, no record without a record, files and nesting.
    'bool_for_number.toml': "process.heat_penetration.fh_min: expected a number (found true)",
    'blank_lot.toml': "deviation.lot: must not be empty or blank",
    'infinite_time.toml': "process.process_time_min: expected a finite number (found inf)",
    'huge_come_up.toml': "process.come_up_time_min: 1e+308 min is outside 0 to 240 min",
    'tiny_height.toml': "process.container.height_mm: 1e-308 mm is outside 1 to 2000 mm",
    'tiny_target.toml': "process.target_F_min: 1e-308 min is outside 0.01 to 1000 min",
    'factor_max_nan.toml': "process.critical_factors[0].max: expected a finite number (found nan)",
    'fahrenheit_initial_temperature.toml': "deviation.initial_temperature_C: 104 °C is outside -50 to 100 °C; if it is °F (104 °F = 40.0 °C), write initial_temperature_F = 104",
    'initial_at_process_temperature.toml': "deviation.initial_temperature_C 99 °C is at or above the process temperature 98 °C; expected the product's temperature at steam on, below it",
    'fahrenheit_process_temperature.toml': "process.process_temperature_C: 250 °C is outside 90 to 150 °C; if it is °F (250 °F = 121.1 °C), write process_temperature_F = 250",
    'no_record.toml': "no record of the cycle: give deviation.retort_log (the recorder's CSV) or the readings seen ([[deviation.events]]); nothing can be evaluated without one",
    'empty_log_name.toml': "deviation.retort_log is empty; give the path of the CSV file, or leave the key out",
    'reading_without_time.toml': "deviation.events[0]: event 'reading' needs at_min, temperature_C; missing at_min",
    'log_is_a_folder.toml': "deviation.retort_log {folder} is a folder; expected a file",
    'nested_deep.toml': "TOML nested too deeply to be a case file",
}


@pytest.mark.parametrize("name", sorted(EXPECTED_MESSAGES))
def test_bad_case_gives_its_message(name):
    path = DATA / "bad_cases" / name
    with pytest.raises(CaseError) as info:
        load_case(path)
    expected = EXPECTED_MESSAGES[name]
    expected = expected.replace("{folder}", str(DATA / "bad_cases"))
    if name == "missing_log_file.toml":
        # The path in the message is resolved against the case file's folder.
        assert info.value.message.startswith("deviation.retort_log file not found: ")
        assert info.value.message.endswith("no_such_log.csv")
    else:
        assert info.value.message == expected
    assert info.value.source == str(path)
    assert str(info.value).startswith(str(path) + ": ")


def test_every_fixture_is_listed():
    on_disk = {p.name for p in (DATA / "bad_cases").glob("*.toml")}
    assert on_disk == set(EXPECTED_MESSAGES)


def test_good_case_loads_with_defaults():
    loaded = load_case(DATA / "good_case.toml")
    p = loaded.case.process
    assert p.reference_temperature_C == 121.1 and p.z_C == 10.0
    assert p.microbiology.botulinum_log_reductions_required == 12.0
    assert loaded.case.deviation.record_gap_limit_min == 2.0
    assert loaded.retort_log_text is None
    assert len(loaded.sha256) == 64


def test_fahrenheit_keys_convert_once():
    base = load_case(DATA / "good_case.toml").case.model_dump()
    data = load_case(DATA / "good_case.toml").case.model_dump()
    proc = data["process"]
    for key, value_F in (("process_temperature", 250.0), ("minimum_initial_temperature", 104.0),
                         ("reference_temperature", 250.0)):
        proc.pop(f"{key}_C")
        proc[f"{key}_F"] = value_F
    proc.pop("z_C")
    proc["z_F"] = 18.0
    data["deviation"].pop("initial_temperature_C")
    data["deviation"]["initial_temperature_F"] = 113.0
    case = parse_case(data)
    # 250 °F = 121.11 °C; 18 °F difference = 10 °C exactly; 104 °F = 40 °C; 113 °F = 45 °C.
    assert case.process.process_temperature_C == pytest.approx(121.111111, abs=1e-5)
    assert case.process.z_C == pytest.approx(10.0)
    assert case.process.minimum_initial_temperature_C == pytest.approx(40.0)
    assert case.deviation.initial_temperature_C == pytest.approx(45.0)
    assert base["process"]["target_F_min"] == case.process.target_F_min


def test_snapshot_round_trip_keeps_everything():
    loaded = load_case(Path(__file__).parents[2] / "demo_cases" / "chili_temperature_drop.toml")
    snap = loaded.snapshot()
    assert snap["retort_log_text"].startswith("# Invented demo record")
    again = LoadedCase.from_snapshot(snap)
    assert again.case == loaded.case
    assert again.retort_log_text == loaded.retort_log_text
    assert again.sha256 == loaded.sha256


def test_schema_names_the_contract_keys():
    schema = case_json_schema()
    text = str(schema)
    for key in ("process_temperature_C", "target_F_min", "spoilage_D_min", "fh_min", "jh",
                "retort_log", "cold_spot_log", "lot_size_containers", "critical_factor_readings"):
        assert key in text


def test_the_schema_documents_every_key_and_the_unit_of_every_measured_one():
    """Issue 15: `deviation schema` names every key's meaning; a key with a unit suffix says it."""
    from deviation.inputs.case import case_json_schema

    schema = case_json_schema()
    for model, definition in schema["$defs"].items():
        for key, prop in definition.get("properties", {}).items():
            text = prop.get("description", "")
            assert text, (model, key)
            if key.endswith(("_C", "_min", "_mm", "_m2_s", "_W_m2K", "_W_mK")):
                assert "[" in text and "]" in text, (model, key, text)
