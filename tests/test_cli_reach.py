"""`sizer reach`: the single-run question, through the command line."""

import json
import math

import pytest

from sizer.cli import main

BASE = ["reach", "--conductor", "4 AWG Cu", "--insulation", "90 degC", "--voltage", "240 V",
        "--phases", "1", "--limit", "3 %"]


def run(capsys, *args):
    code = main([*BASE, *args])
    out = capsys.readouterr()
    return code, out.out, out.err


def test_happy_path_prints_both_unit_systems_and_the_caution(capsys):
    code, out, err = run(capsys, "--current", "50 A")
    assert code == 0 and err == ""
    assert " m (" in out and " ft)" in out
    assert "licensed professional" in out


def test_json_schema_and_values(capsys):
    code, out, _ = run(capsys, "--current", "50 A", "--json")
    assert code == 0
    doc = json.loads(out)
    assert set(doc) == {"reach_m", "design_current_a", "ampacity_a", "conductor_temperature_c",
                        "r_ohm_per_km", "x_ohm_per_km", "warnings", "current_basis",
                        "table_status"}
    assert doc["warnings"] == []
    # NEC 310.16: 4 AWG Cu, 60 degC column = 70 A; a 50 A circuit is <= 100 A, so the
    # 110.14(C)(1)(a) terminal rule limits it to the 60 degC column.
    assert doc["ampacity_a"] == 70
    # theta = 30 + (90 - 30)(50 / 95)^2 = 46.62 degC (95 A: NEC 310.16 90 degC column)
    assert doc["conductor_temperature_c"] == pytest.approx(30 + 60 * (50 / 95) ** 2, abs=1e-6)
    # Hand check of the reach: 1-phase drop = 2·I·L·(R cosφ + X sinφ), limit 3 % of 240 V.
    pf = 0.9
    per_m = 2 * 50 * (doc["r_ohm_per_km"] * pf + doc["x_ohm_per_km"] * math.sqrt(1 - pf**2)) / 1e3
    assert doc["reach_m"] == pytest.approx(0.03 * 240 / per_m, rel=1e-5)


def test_device_rating_uses_the_unknown_load_rule(capsys):
    # cec: unknown load = 80 % of the device rating (common practice, Canadian rule 8-102)
    code, out, _ = run(capsys, "--ocpd", "60 A", "--rules", "cec", "--json")
    assert code == 0
    assert json.loads(out)["design_current_a"] == pytest.approx(48.0)


def test_lightly_loaded_conductor_reaches_further_than_at_full_temperature(capsys):
    _, cool, _ = run(capsys, "--current", "30 A", "--json")
    _, hot, _ = run(capsys, "--current", "30 A", "--json", "--conductor-temperature", "90 degC")
    assert json.loads(cool)["reach_m"] > 1.1 * json.loads(hot)["reach_m"]


@pytest.mark.parametrize("flag,value,field", [
    ("--conductor", "4 AWX Cu", "--conductor"),
    ("--voltage", "240 A", "--voltage"),
    ("--limit", "3 V", "--limit"),
])
def test_bad_input_is_one_line_and_exit_2(capsys, flag, value, field):
    args = list(BASE)
    args[args.index(flag) + 1] = value
    code = main([*args, "--current", "50 A"])
    err = capsys.readouterr().err
    assert code == 2
    assert err.count("\n") == 1 and f"'{field}'" in err and "Traceback" not in err


def test_loads_writes_the_schedule_back_as_csv(tmp_path, capsys):
    from pathlib import Path

    from sizer.scenario import load_scenario

    demo = Path(__file__).parents[1] / "scenarios" / "kiln-hall.toml"
    out = tmp_path / "circuits.csv"
    assert main(["loads", str(demo), "--csv", str(out)]) == 0
    head = tmp_path / "site.toml"
    text = demo.read_text(encoding="utf-8")
    # The head keeps project, economics, prices, defaults and source; the nodes come from CSV.
    head_text = text[: text.index("[[node]]")].replace(
        "[project]\n", '[project]\nschedule = "circuits.csv"\n', 1)
    head.write_text(head_text.replace('catalogue = "costdata/', 'catalogue = "../costdata/'),
                    encoding="utf-8")
    assert load_scenario(head).nodes == load_scenario(demo).nodes


# --- warnings: a run over its ampacity or unprotected has no reach worth giving ---------


def test_over_ampacity_warns_on_stderr_and_in_json_exit_1(capsys):
    # 6 AWG Cu at 70 A: 55 A at the 60 degC terminal column (NEC Table 310.16; 110.14(C)(1):
    # a circuit of 100 A or less), less than 70 A.
    code = main(["reach", "--conductor", "6 AWG Cu", *BASE[3:], "--current", "70 A", "--json"])
    captured = capsys.readouterr()
    out, err = captured.out, captured.err
    assert code == 1
    doc = json.loads(out)
    assert doc["warnings"] and "over its ampacity" in doc["warnings"][0]
    assert "over its ampacity" in err


def test_unprotected_by_the_device_warns(capsys):
    # 4 AWG Cu, 70 A at 60 degC (NEC Table 310.16): a 100 A device is above the next
    # standard rating over 70 A (NEC 240.4(B), 240.6(A)): not protected.
    code, _, err = run(capsys, "--ocpd", "100 A")
    assert code == 1
    assert "a 100 A device does not protect 4 AWG Cu" in err


def test_ocpd_says_which_rule_set_the_current(capsys):
    # cec: CSA C22.1 Rule 8-102(2), 80 % of the 60 A device when the load is unknown: 48 A.
    code, out, _ = run(capsys, "--ocpd", "60 A", "--rules", "cec", "--json")
    doc = json.loads(out)
    assert code == 0
    assert doc["current_basis"].startswith("48 A: 80 % of the 60 A device, unknown load")


def test_console_and_json_name_stand_in_tables(capsys):
    code, out, _ = run(capsys, "--current", "30 A", "--rules", "cec")
    assert code == 0 and "stand-ins: " in out and "ampacity" in out
    code, out, _ = run(capsys, "--current", "30 A", "--rules", "cec", "--json")
    assert "ampacity" in json.loads(out)["table_status"]["stand_in"]


def test_parallel_below_the_minimum_names_the_rule(capsys):
    code = main(["reach", "--conductor", "2x 4 AWG Cu", *BASE[3:], "--current", "80 A"])
    err = capsys.readouterr().err
    assert code == 1
    assert "minimum size for parallel conductors (1/0 AWG, NEC 310.10(G)(1)" in err
