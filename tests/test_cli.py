"""The command line end to end with typer's runner: exit codes, one-line messages, files."""

from __future__ import annotations

import json
import re

import pytest
from jsonschema import Draft202012Validator
from typer.testing import CliRunner

from chargeplan.cli import app

from .conftest import REPO, battery

runner = CliRunner()
SCHEMA = json.loads((REPO / "schemas" / "setpoints.schema.json").read_text())


def run(*args: str):
    return runner.invoke(app, list(args))


def _one_line_error(result, *fragments: str) -> None:
    lines = [line for line in result.stderr.splitlines() if line.strip()]
    assert len(lines) == 1, result.stderr
    assert "Traceback" not in result.output + result.stderr
    for fragment in fragments:
        assert fragment in lines[0], lines[0]


def test_plan_text(write_yaml):
    path = write_yaml(battery(conditions={"battery_temperature": "5 degC"}))
    result = run("plan", str(path))
    assert result.exit_code == 0, result.output
    assert "14.94 V" in result.stdout and "Cautions" in result.stdout
    # the stages as the project's own table: the HTML page's columns, plain-case names
    html = run("plan", str(path), "--format", "html")
    headings = re.findall(r"<th>([^<]*)</th>", html.stdout.split("<tbody>")[0])
    lines = result.stdout.splitlines()
    head = next(line for line in lines if line.split()[:2] == ["#", "stage"])
    assert re.split(r"\s{2,}", head.strip()) == headings
    assert "ABSORPTION" not in result.stdout and not re.search(r"^\s*\d+\. ", result.stdout,
                                                              re.M)
    body = lines[lines.index(head) + 2:]
    assert [line.split()[1] for line in body if re.match(r"^\s+\d+\s", line)] == [
        "bulk", "absorption", "float"]


def test_plan_json_validates_against_committed_schema(write_yaml):
    path = write_yaml(battery(state={"rest_voltage": "12.4 V"}))
    result = run("plan", str(path), "--format", "json")
    assert result.exit_code == 0, result.output
    Draft202012Validator(SCHEMA).validate(json.loads(result.stdout))


def test_plan_explain_shows_the_arithmetic(write_yaml):
    path = write_yaml(battery(conditions={"battery_temperature": "5 degC"}))
    result = run("plan", str(path), "--explain")
    assert result.exit_code == 0
    assert ("absorption 14.94 V = 2.43 V/cell x 6 + (-3 mV/K/cell x 6 x (5 - 25) K)"
            in result.stdout)
    assert "CP301" in result.stdout


def test_json_battery_file(tmp_path):
    path = tmp_path / "b.json"
    path.write_text(json.dumps(battery()))
    assert run("plan", str(path), "-f", "json").exit_code == 0


def test_refusal_exits_1(write_yaml):
    # BU-410 Table 1: no lithium charging below 0 degC
    path = write_yaml(battery(battery={"chemistry": "lifepo4"},
                              conditions={"battery_temperature": "-5 degC"}))
    result = run("plan", str(path), "--format", "json")
    assert result.exit_code == 1
    assert result.stdout == ""
    _one_line_error(result, "refused", "below 0 °C", "[CP104]")


@pytest.mark.parametrize(
    ("change", "fragments"),
    [
        ({"battery": {"capacity": "24 V"}}, ["battery.capacity", "is not a capacity", "24 Ah"]),
        ({"battery": {"capacity": "9"}}, ["battery.capacity", "has no unit"]),
        ({"battery": {"chemistry": "nicad"}}, ["battery.chemistry", "unknown chemistry",
                                              "flooded, agm"]),
        ({"battery": {"capacity": "nan Ah"}}, ["battery.capacity", "finite"]),
        ({"battery": {"capacity": "-5 Ah"}}, ["battery.capacity", "below"]),
        ({"battery": {"cells_in_series": 4}}, ["battery.cells_in_series", "8 V nominal"]),
        ({"battery": {"capacty": "24 Ah"}}, ["battery.capacty", "did you mean 'capacity'"]),
        ({"battery": {"overrides": {"max_charge_current": "0.2 C"}}},
         ["max_charge_current", "0.1 It"]),
        ({"conditions": {"battery_temperature": "20 C"}}, ["battery_temperature", "degC"]),
        ({"battery": {"cells_in_series": 6.0}}, ["cells_in_series", "whole number"]),
        ({"battery": {"capacity_hours": float("nan")}}, ["capacity_hours", "finite"]),
        ({"battery": {"capacity_hours": True}}, ["capacity_hours"]),
        ({"battery": {"name": "x" * 300}}, ["battery.name", "200 or fewer"]),
        ({"charger": {"max_voltage": "16 V", "max_current": "4 A", "min_current": "6 A"}},
         ["charger", "min_current must be below max_current"]),
    ],
)
def test_bad_input_exits_2_with_file_field_and_fix(write_yaml, change, fragments):
    path = write_yaml(battery(**change))
    result = run("plan", str(path))
    assert result.exit_code == 2
    _one_line_error(result, str(path), *fragments)


@pytest.mark.parametrize(
    ("content", "fragment"),
    [
        ("", "is empty"),
        ("battery: [unclosed", "line 2, column 1"),
        ("- a list\n- not a mapping\n", "not a mapping"),
        ("battery: !!python/object:os.system {}\n", "refused"),
        ("\x00\x01\x02", "binary"),
    ],
)
def test_malformed_files_exit_2(tmp_path, content, fragment):
    path = tmp_path / "bad.yaml"
    path.write_text(content)
    result = run("plan", str(path))
    assert result.exit_code == 2
    _one_line_error(result, str(path), fragment)


def test_duplicate_json_keys_exit_2(tmp_path):
    path = tmp_path / "dup.json"
    path.write_text('{"battery": {"name": "a", "name": "b"}}')
    result = run("plan", str(path))
    assert result.exit_code == 2
    _one_line_error(result, "appears twice")


def test_profiles_from_the_environment(tmp_path, write_yaml, monkeypatch):
    from ruamel.yaml import YAML

    yaml = YAML(typ="safe")
    data = yaml.load((REPO / "profiles" / "gel.yaml").read_text())
    data["id"] = "gel-shed"
    (tmp_path / "p").mkdir()
    with (tmp_path / "p" / "gel-shed.yaml").open("w") as stream:
        yaml.dump(data, stream)
    monkeypatch.setenv("CHARGEPLAN_PROFILES", str(tmp_path / "p"))
    path = write_yaml(battery(battery={"chemistry": "gel-shed"}))
    assert run("plan", str(path)).exit_code == 0


def test_missing_field_exits_2(write_yaml):
    data = battery()
    del data["conditions"]["battery_temperature"]
    path = write_yaml(data)
    result = run("plan", str(path))
    assert result.exit_code == 2
    _one_line_error(result, "conditions.battery_temperature", "is missing", "20 degC")


def test_missing_file_exits_2(tmp_path):
    result = run("plan", str(tmp_path / "nope.yaml"))
    assert result.exit_code == 2
    _one_line_error(result, "no such file")


def test_output_file_written_and_not_replaced_without_force(write_yaml, tmp_path):
    path = write_yaml(battery())
    out = tmp_path / "plan.json"
    assert run("plan", str(path), "-f", "json", "-o", str(out)).exit_code == 0
    first = out.read_text()
    assert json.loads(first)["format"] == "chargeplan-setpoints"
    result = run("plan", str(path), "-o", str(out))
    assert result.exit_code == 2 and "--force" in result.stderr
    assert out.read_text() == first
    assert run("plan", str(path), "-o", str(out), "--force").exit_code == 0
    assert out.read_text() != first
    assert [p.name for p in tmp_path.iterdir() if p.name.startswith(".")] == []


def test_refused_plan_writes_nothing(write_yaml, tmp_path):
    path = write_yaml(battery(battery={"chemistry": "nmc"},
                              conditions={"battery_temperature": "-2 degC"}))
    out = tmp_path / "out.json"
    assert run("plan", str(path), "-f", "json", "-o", str(out)).exit_code != 0
    assert not out.exists()


def test_demo_plans_every_example():
    result = run("demo")
    assert result.exit_code == 0, result.output
    assert result.stdout.count("# example") == 5
    for name in ("Flooded", "AGM", "Gel", "LiFePO4", "NMC"):
        assert name in result.stdout


def test_profiles_list_and_detail():
    listing = run("profiles")
    assert listing.exit_code == 0
    for pid in ("flooded", "agm", "gel", "lifepo4", "nmc"):
        assert pid in listing.stdout
    detail = run("profiles", "agm")
    assert detail.exit_code == 0
    assert "charge.absorption_voltage" in detail.stdout and "2.43 V/cell" in detail.stdout
    assert "IEC 62485-2" in detail.stdout
    unknown = run("profiles", "nicad")
    assert unknown.exit_code == 2


def test_rules_list_and_explain():
    listing = run("rules")
    assert listing.exit_code == 0
    assert "CP101" in listing.stdout and "source:" in listing.stdout
    one = run("rules", "CP301")
    assert one.exit_code == 0 and "compensation.lead_acid" in one.stdout
    assert run("rules", "CP999").exit_code == 2


def test_schema_check_passes_on_committed_schemas():
    assert run("schema").exit_code == 0


def test_user_profile_folder(tmp_path, write_yaml):
    from ruamel.yaml import YAML

    yaml = YAML(typ="safe")
    data = yaml.load((REPO / "profiles" / "agm.yaml").read_text())
    data["id"] = "agm-bench"
    data["charge"]["absorption_voltage"]["value"] = "2.40 V/cell"
    folder = tmp_path / "mine"
    folder.mkdir()
    with (folder / "agm-bench.yaml").open("w") as stream:
        yaml.dump(data, stream)
    path = write_yaml(battery(battery={"chemistry": "agm-bench"}))
    result = run("plan", str(path), "--profiles", str(folder), "-f", "json")
    assert result.exit_code == 0, result.output
    absorption = next(s for s in json.loads(result.stdout)["stages"] if s["kind"] == "absorption")
    assert absorption["voltage_mV"] == 14400


def test_plan_shows_estimates_and_json_carries_them(write_yaml):
    path = write_yaml(battery(state={"state_of_charge": "40 %"}))
    text = run("plan", str(path))
    assert text.exit_code == 0
    assert "Estimate: about" in text.stdout
    bulk_row = next(line for line in text.stdout.splitlines() if re.match(r"^\s+\d+\s+bulk ", line))
    assert "about " in bulk_row  # the "how long" column carries the stage's estimate
    doc = json.loads(run("plan", str(path), "-f", "json").stdout)
    Draft202012Validator(SCHEMA).validate(doc)
    bulk = next(s for s in doc["stages"] if s["kind"] == "bulk")
    assert bulk["estimated_duration_s"] > 0 and bulk["charge_mAh"] > 0
    assert bulk["timer_s"] >= bulk["estimated_duration_s"]


def test_simulate_writes_the_time_series(write_yaml, tmp_path):
    path = write_yaml(battery(battery={"chemistry": "lifepo4", "capacity": "20 Ah"},
                              state={"rest_voltage": "13.0 V"}))
    out = tmp_path / "run.csv"
    result = run("simulate", str(path), "--csv", str(out))
    assert result.exit_code == 0, result.output
    assert "total" in result.stdout
    lines = out.read_text().splitlines()
    assert lines[0] == "time_s,stage,voltage_V,current_A,state_of_charge_pct"
    assert len(lines) > 50 and lines[1].split(",")[1] == "bulk"


def test_state_from_rest_voltage_and_gravity():
    # Battery Council International table: 12.24 V rested is 50 %; 1.225 is 75 %
    result = run("state", "--rest-voltage", "12.24V", "--chemistry", "flooded")
    assert result.exit_code == 0 and "about 50 %" in result.stdout
    result = run("state", "--specific-gravity", "1.225", "--chemistry", "flooded",
                 "--temperature", "80degF", "--rested-for", "30min")
    assert result.exit_code == 0 and "about 75 %" in result.stdout
    assert "reads high" in result.stdout
    # US Army TM 5-4210-230-14&P-1: 1.245 read at 30 degF is 1.225 at 80 degF -> 75 %
    result = run("state", "--specific-gravity", "1.245", "--chemistry", "flooded",
                 "--temperature", "30degF")
    assert result.exit_code == 0 and "about 75 %" in result.stdout


@pytest.mark.parametrize(
    ("args", "fragment"),
    [
        (["--specific-gravity", "1.4", "--chemistry", "flooded"], "--specific-gravity"),
        (["--specific-gravity", "1.2", "--chemistry", "agm"], "sealed"),
        (["--rest-voltage", "31V", "--chemistry", "flooded", "--cells", "6"],
         "more than a rested 6-cell"),
        (["--rest-voltage", "12.3", "--chemistry", "flooded"], "has no unit"),
        (["--rest-voltage", "12.3V", "--chemistry", "nicad"], "unknown chemistry"),
    ],
)
def test_state_bad_input_exits_2(args, fragment):
    result = run("state", *args)
    assert result.exit_code == 2
    _one_line_error(result, fragment)


def test_runtime_with_the_launch_cabin_lights(write_yaml):
    # the ride-on mower's 24 Ah flooded battery (the workshop demo) under 60 W of cabin
    # lights: P = U I, 60 W / 12 V nominal = 5.00 A
    path = write_yaml(battery(battery={"chemistry": "flooded", "capacity": "24 Ah",
                                       "capacity_hours": 20},
                              state={"state_of_charge": "100 %"}))
    result = run("runtime", str(path), "--load", "60W")
    assert result.exit_code == 0
    assert "at 5 A from" in result.stdout and "Peukert" in result.stdout
    bad = run("runtime", str(path), "--load", "12 V")
    assert bad.exit_code == 2
    _one_line_error(bad, "--load", "60 W")


@pytest.mark.parametrize(
    ("args", "fragment"),
    [
        (["--rest-voltage", "11.0V", "--chemistry", "flooded"], "shorted cell"),
        (["--rest-voltage", "12.3V", "--chemistry", "flooded", "--cells", "0"], "--cells"),
        (["--rest-voltage", "12.3V", "--chemistry", "flooded", "--nominal-voltage", "1V"],
         "--nominal-voltage"),
        (["--rest-voltage", "12.3V", "--chemistry", "flooded", "--temperature", "-300degC"],
         "--temperature"),
        (["--rest-voltage", "12.3V", "--chemistry", "flooded", "--rested-for", "-1h"],
         "--rested-for"),
    ],
)
def test_state_odd_input_exits_2(args, fragment):
    result = run("state", *args)
    assert result.exit_code == 2
    _one_line_error(result, fragment)


@pytest.mark.parametrize("load", ["1e-300A", "1e300A", "0A", "-5A"])
def test_runtime_load_out_of_range_exits_2(write_yaml, load):
    path = write_yaml(battery())
    result = run("runtime", str(path), "--load", load)
    assert result.exit_code == 2
    _one_line_error(result, "--load")


def _entry_env() -> dict[str, str]:
    """The environment for running this checkout's code in a child process (not whatever
    chargeplan is installed), without the variables the entry point sets itself."""
    import os

    env = {k: v for k, v in os.environ.items()
           if k not in ("PYDANTIC_DISABLE_PLUGINS", "OPENBLAS_NUM_THREADS",
                         "NUMPY_MADVISE_HUGEPAGE")}
    env["PYTHONPATH"] = os.pathsep.join(filter(None, [str(REPO), env.get("PYTHONPATH")]))
    return env


def test_console_entry_point_runs_the_command_and_keeps_its_exit_code(tmp_path):
    # `python -m chargeplan` goes through chargeplan.__main__.run (the console script's
    # entry), which leaves without the interpreter's teardown: the same document as the
    # library call, and the contract's exit code 2 with one line for a missing file, also
    # through `python -m chargeplan.cli`.
    import subprocess
    import sys

    from chargeplan.api import program_file
    from chargeplan.demo import example_paths
    from chargeplan.firmware.setpoints import to_json

    example = example_paths()[1]
    done = subprocess.run([sys.executable, "-m", "chargeplan", "plan", str(example),
                           "--format", "json"], capture_output=True, text=True,
                          env=_entry_env(), cwd=tmp_path, check=False)
    assert done.returncode == 0, done.stderr
    assert done.stdout == to_json(program_file(example))
    for module in ("chargeplan", "chargeplan.cli"):
        missing = subprocess.run([sys.executable, "-m", module, "plan", "absent.yaml"],
                                 capture_output=True, text=True, env=_entry_env(),
                                 cwd=tmp_path, check=False)
        assert missing.returncode == 2, module
        assert missing.stderr.strip() == "error: absent.yaml: no such file; check the path"
        assert missing.stdout == ""


def test_console_entry_point_lets_a_profiler_write_its_results(tmp_path):
    # a profiler (here the standard library's cProfile) writes its file at the
    # interpreter's exit, so the entry point must not skip that exit while one runs
    import pstats
    import subprocess
    import sys

    out = tmp_path / "run.prof"
    done = subprocess.run([sys.executable, "-m", "cProfile", "-o", str(out), "-m",
                           "chargeplan", "plan", "absent.yaml"], capture_output=True,
                          text=True, env=_entry_env(), cwd=tmp_path, check=False)
    # (cProfile's runner swallows the command's exit code: it exits 0 itself)
    assert done.stderr.strip() == "error: absent.yaml: no such file; check the path"
    assert pstats.Stats(str(out)).total_calls > 0


def test_console_entry_point_is_quiet_when_the_reader_stops_early(tmp_path):
    # `chargeplan demo | head -0` through the real entry point: the reader has closed the
    # pipe before the first write (start-up takes far longer than the close); no traceback
    # and a quiet exit 0, as other tools do
    import subprocess
    import sys

    with subprocess.Popen([sys.executable, "-m", "chargeplan", "demo"],
                          stdout=subprocess.PIPE, stderr=subprocess.PIPE, cwd=tmp_path,
                          env=_entry_env()) as reader:
        assert reader.stdout is not None and reader.stderr is not None
        reader.stdout.close()
        stderr = reader.stderr.read().decode()
        reader.wait(timeout=60)
    assert "Traceback" not in stderr and "Exception ignored" not in stderr, stderr
    assert reader.returncode == 0


def test_console_entry_point_sets_the_process_up_and_keeps_the_users_values(tmp_path):
    # chargeplan.__main__.run sets its three variables before the command line (and numpy)
    # is imported, each only where the user has not set it; numpy reads
    # NUMPY_MADVISE_HUGEPAGE at import (numpy's "Global state" page)
    import subprocess
    import sys

    names = ("PYDANTIC_DISABLE_PLUGINS", "OPENBLAS_NUM_THREADS", "NUMPY_MADVISE_HUGEPAGE")
    probe = ("import os, sys, types; sys.modules['chargeplan.cli'] = types.SimpleNamespace("
             f"main=lambda: print(*(os.environ[n] for n in {names!r}), 'numpy' in sys.modules));"
             " from chargeplan.__main__ import run; run()")
    ours = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True,
                          env=_entry_env(), cwd=tmp_path, check=True)
    assert ours.stdout.split() == ["__all__", "1", "0", "False"]
    theirs = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True,
                            env={**_entry_env(), **dict.fromkeys(names, "7")}, cwd=tmp_path,
                            check=True)
    assert theirs.stdout.split() == ["7", "7", "7", "False"]


def test_check_with_a_user_profile_battery_needs_profiles(tmp_path):
    """README: with --battery the limits follow the battery file's chemistry; a user
    profile's is read from --profiles (exit 0), and without it check refuses (exit 1, CK706)."""
    from chargeplan.profiles import data_dir

    folder = tmp_path / "profiles"
    folder.mkdir()
    text = (data_dir("profiles") / "lifepo4.yaml").read_text()
    (folder / "shed-lfp.yaml").write_text(text.replace("id: lifepo4", "id: shed-lfp", 1))
    battery_path = tmp_path / "pack.yaml"
    battery_path.write_text("battery: {name: Launch house pack, chemistry: shed-lfp, "
                            "cells_in_series: 4, capacity: 100 Ah}\n"
                            "conditions: {battery_temperature: 20 degC}\n")
    out = tmp_path / "pack.json"
    made = runner.invoke(app, ["plan", str(battery_path), "--profiles", str(folder), "-f", "json",
                               "-o", str(out)])
    assert made.exit_code == 0, made.output
    ok = runner.invoke(app, ["check", str(out), "--battery", str(battery_path), "--profiles",
                             str(folder)])
    assert ok.exit_code == 0, ok.output
    refused = runner.invoke(app, ["check", str(out), "--battery", str(battery_path)])
    assert refused.exit_code == 1
    assert "give --profiles" in refused.output and "[CK706]" in refused.output


def test_state_says_a_lead_acid_cell_count_was_guessed():
    # 6.31 V flooded: 3 cells at 2.103 V/cell (Battery Council International table: about
    # 96 %) or 6 cells at 1.05 V/cell, far gone; a reading needs the battery's nominal
    # voltage (common practice)
    result = run("state", "--rest-voltage", "6.31V", "--chemistry", "flooded")
    assert result.exit_code == 0
    assert "guess from the voltage alone" in result.stdout
    assert "6-cell (12 V) battery far discharged" in result.stdout
    assert "--cells or --nominal-voltage" in result.stdout
    given = run("state", "--rest-voltage", "6.31V", "--chemistry", "flooded", "--cells", "3")
    assert given.exit_code == 0 and "guess" not in given.stdout
    named = run("state", "--rest-voltage", "12.6V", "--chemistry", "flooded",
                "--nominal-voltage", "12V")
    assert named.exit_code == 0 and "guess" not in named.stdout


@pytest.mark.parametrize(("command", "family_text"), [
    (["state", "--rest-voltage", "13.31V", "--chemistry", "lifepo4", "--cells", "4"],
     "thermal runaway"),
    (["state", "--rest-voltage", "12.4V", "--chemistry", "flooded", "--cells", "6"],
     "hydrogen"),
])
def test_state_prints_the_chemistry_cautions_and_the_deferral(command, family_text):
    # project rule: every human-readable output shows its chemistry's cautions and defers
    # to the maker's datasheet, local codes and licensed practice (chargeplan.cautions)
    result = run(*command)
    assert result.exit_code == 0
    assert family_text in result.stdout
    assert "maker's datasheet, local codes or licensed practice" in result.stdout


def test_small_loads_keep_their_digits_and_a_refused_csv_path_prints_only_its_error(tmp_path):
    # a 5 mA load is 0.005 A (not '0.01 A'); lithium gets no lead-acid C100 note; a CSV path
    # whose folder is missing is refused in one line, before any summary is printed
    from chargeplan.demo import example_paths

    lfp = next(p for p in example_paths() if "lifepo4" in p.name)
    small = run("runtime", str(lfp), "--load", "5 mA")
    assert small.exit_code == 0 and "at 0.005 A from" in small.stdout
    assert "lead-acid" not in small.stdout.split("Cautions")[0]
    missing = run("simulate", str(lfp), "--csv", str(tmp_path / "absent" / "x.csv"))
    assert missing.exit_code == 2 and missing.stdout == ""
    _one_line_error(missing, "absent")


def test_simulate_and_runtime_print_findings_cautions_and_the_deferral():
    from chargeplan.demo import example_paths

    lfp = next(p for p in example_paths() if "lifepo4" in p.name)
    sim = run("simulate", str(lfp))
    assert sim.exit_code == 0
    for text in ("do not leave the charge unattended", "no float or trickle on NMC",
                 "Bring a cold battery indoors", "flat voltage curve", "[CP302]",
                 "not on these times", "maker's datasheet, local codes or licensed practice"):
        assert text in sim.stdout, text
    flooded = next(p for p in example_paths() if "flooded" in p.name)
    rt = run("runtime", str(flooded), "--load", "5A")
    assert rt.exit_code == 0
    assert "hydrogen" in rt.stdout and "licensed practice" in rt.stdout


def test_ventilation_and_thermistor_text_carry_cautions_and_the_deferral():
    # project rule: every human-readable output shows its chemistry's cautions and defers
    # to the maker's datasheet, local codes and licensed practice (chargeplan.cautions)
    from chargeplan.demo import example_paths

    room = run("ventilation", "--cells", "6", "--capacity", "100Ah", "--type", "vented")
    assert room.exit_code == 0
    assert "explodes at 4 % in air" in room.stdout and "Flooded cells vent" in room.stdout
    assert "maker's datasheet, local codes or licensed practice" in room.stdout
    vrla = run("ventilation", "--cells", "6", "--capacity", "100Ah", "--type", "vrla")
    assert "Flooded cells vent" not in vrla.stdout and "explodes" in vrla.stdout
    lfp = next(p for p in example_paths() if "lifepo4" in p.name)
    codes = run("thermistor", "--r25", "10kohm", "--beta", "3950", "--bias", "10kohm",
                "--battery", str(lfp))
    assert codes.exit_code == 0
    assert "Never charge lithium below 0 °C" in codes.stdout
    assert "licensed practice" in codes.stdout


def test_storage_and_bench_consoles_carry_each_chemistrys_cautions_and_the_deferral(tmp_path):
    # project rule, as above: the console summaries of the two planners too, each profile's
    # list whole (chargeplan.cautions.profile_cautions), grouped by family
    from chargeplan.cautions import profile_cautions
    from chargeplan.demo import example_paths
    from chargeplan.profiles import load_builtin

    examples = {p.name: p for p in example_paths(include_storage=True)}
    store = run("storage", str(examples["storage-lakeside.yaml"]))
    assert store.exit_code == 0, store.stderr
    for pid in ("agm", "flooded", "lifepo4"):  # the lakeside shed's chemistries
        for line in profile_cautions(load_builtin(pid))[:-1]:
            assert line in store.stdout, (pid, line)
    assert "Gel:" not in store.stdout and "maker's datasheet, local codes" in store.stdout
    bench = run("bench", str(examples["bench-workshop.yaml"]))
    assert bench.exit_code == 0, bench.stderr
    assert "Lead-acid:" in bench.stdout and "Lithium:" in bench.stdout
    assert "below 0 °C" in bench.stdout and "licensed practice" in bench.stdout
