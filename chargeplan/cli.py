"""The command line: parse, make one library call, print, map errors to exit codes.

Exit codes (DEVELOPERS.md, "Errors and exit codes"): 0 ok; 1 the plan is refused for
safety; 2 bad input; 3 internal error. No domain logic lives here; heavy imports wait for
the command that needs them.

No ``from __future__ import annotations`` here: typer reads every command's signature at
start-up, and string annotations would each be evaluated (DEVELOPERS.md, start-up).
"""

from collections.abc import Iterator
from contextlib import contextmanager
from enum import StrEnum
from pathlib import Path
from typing import Annotated

import typer

app = typer.Typer(
    name="chargeplan",
    help="Plan battery charging (lead-acid and lithium) and write charger setpoint files.",
    add_completion=False,
    no_args_is_help=True,
    pretty_exceptions_enable=False,
    rich_markup_mode=None,
)


class Format(StrEnum):
    text = "text"
    markdown = "markdown"
    html = "html"
    json = "json"
    c_header = "c-header"
    image = "image"


def _choices(values) -> str:
    """The metavar that shows a fixed-choice option's values in --help."""
    return "[" + "|".join(str(getattr(v, "value", v)) for v in values) + "]"


ProfilePaths = Annotated[
    list[Path] | None,
    typer.Option("--profiles", help="a profile file or folder of your own (repeatable)"),
]


@contextmanager
def _errors() -> Iterator[None]:
    """Map chargeplan's errors to one line on stderr and the contract's exit code."""
    from chargeplan.errors import ChargeplanError, InputError, PlanRefused

    try:
        yield
    except typer.Exit:
        raise
    except BrokenPipeError:
        # the reader (``| head``) closed the pipe: stop quietly, as other tools do
        import os
        import sys

        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        raise typer.Exit(0) from None
    except PlanRefused as error:
        typer.echo(f"refused: {error.reason} [{error.rule_id}]", err=True)
        raise typer.Exit(error.exit_code) from None
    except InputError as error:
        for line in getattr(error, "lines", None) or [str(error)]:
            typer.echo(f"error: {line}", err=True)
        raise typer.Exit(error.exit_code) from None
    except ChargeplanError as error:
        typer.echo(f"internal error: {error}", err=True)
        raise typer.Exit(error.exit_code) from None
    except Exception as error:
        typer.echo(f"internal error: {type(error).__name__}: {error} (please report this with "
                   "the input that caused it)", err=True)
        raise typer.Exit(3) from None


def _profile_set(paths: list[Path] | None):  # -> ProfileSet
    from chargeplan.profiles import ProfileSet

    return ProfileSet(list(paths or []))


def _fitted(render, file: Path):  # render: () -> str | bytes
    """A firmware output; a value too large for its field names the battery file too."""
    from chargeplan.errors import InputError

    try:
        return render()
    except InputError as error:
        raise error.in_file(str(file)) from None


def _emit(text: str | bytes, output: Path | None, force: bool) -> None:
    if output is None:
        if isinstance(text, bytes):
            from chargeplan.errors import InputError

            raise InputError("an image is binary", field="--output",
                             fix="give -o FILE to write it")
        typer.echo(text, nl=False)
        return
    from chargeplan.render.write import write_atomic

    write_atomic(output, text, force=force)
    typer.echo(f"wrote {output}", err=True)


@app.command()
def plan(
    file: Annotated[Path, typer.Argument(help="the battery file (YAML or JSON)")],
    format_name: Annotated[str, typer.Option(
        "--format", "-f", metavar=_choices(Format), help="the output format")] = "text",
    explain: Annotated[bool, typer.Option(help="add the rule and arithmetic behind each "
                                               "setpoint")] = False,
    output: Annotated[
        Path | None, typer.Option("--output", "-o", help="write to this file")
    ] = None,
    force: Annotated[bool, typer.Option(help="replace the output file if it exists")] = False,
    table_step: Annotated[str, typer.Option("--table-step", help="the temperature table's "
                                                                   "step")] = "5 degC",
    quantisation_report: Annotated[bool, typer.Option(
        "--quantisation-report", help="list each setpoint moved onto the channel's steps "
                                      "(on stderr)")] = False,
    profiles: ProfilePaths = None,
) -> None:
    """Plan the charge of one battery."""
    with _errors():
        try:
            format = Format(format_name)
        except ValueError:
            from chargeplan.errors import InputError

            raise InputError(f"unknown format '{format_name}'", field="--format",
                             fix=f"use one of {', '.join(f.value for f in Format)}") from None
        from chargeplan.api import plan_file
        from chargeplan.units import option_quantity

        step = option_quantity(table_step, "temperature_difference", "--table-step")
        if step is None or not 0.5 <= step <= 25:
            from chargeplan.errors import InputError

            raise InputError(f"{table_step} is not a usable table step", field="--table-step",
                             fix="use 0.5 to 25 K, e.g. '5 K'")
        if format is Format.image and output is None:
            from chargeplan.errors import InputError

            raise InputError("an image is binary", field="--output", fix="give -o FILE")
        # the firmware formats carry the charge program (the battery file without its
        # state); the HTML page simulates with its time series below; the others estimate
        if format in (Format.json, Format.c_header, Format.image):
            from chargeplan.api import program_file

            result = program_file(file, profiles=_profile_set(profiles), table_step_c=step)
        else:
            result = plan_file(file, profiles=_profile_set(profiles), table_step_c=step,
                               estimate=format is not Format.html)
        if quantisation_report:
            _report_quantisation(result)
        if format is Format.json:
            from chargeplan.firmware.setpoints import to_json

            _emit(to_json(result), output, force)
        elif format is Format.c_header:
            from chargeplan.firmware.c_header import render_c_header
            from chargeplan.firmware.setpoints import encode

            _emit(_fitted(lambda: render_c_header(result, encode(result)), file), output, force)
        elif format is Format.markdown:
            from chargeplan.render.document import render_markdown

            _emit(render_markdown(result, explain=explain), output, force)
        elif format is Format.html:
            from chargeplan.render.document import render_html
            from chargeplan.simulation import simulate_plan

            run = simulate_plan(result, profiles=_profile_set(profiles))
            _emit(render_html(run.plan, explain=explain, series=run.series), output, force)
        elif format is Format.image:
            from chargeplan.firmware import image
            from chargeplan.firmware.setpoints import encode

            _emit(_fitted(lambda: image.encode(encode(result)), file), output, force)
        else:
            from chargeplan.render.text import render_text

            _emit(render_text(result, explain=explain), output, force)


def _report_quantisation(plan) -> None:  # plan: ChargePlan
    if not plan.quantisation:
        typer.echo("quantisation: nothing moved (no channel steps given, or every value "
                   "already on a step)", err=True)
        return
    typer.echo(f"{'setpoint':<28} {'requested':>12} {'encoded':>12} {'error':>10}", err=True)
    for q in plan.quantisation:
        typer.echo(f"{q.what:<28} {q.requested:>10.4f} {q.unit} {q.encoded:>10.4f} {q.unit} "
                   f"{q.encoded - q.requested:>+8.4f} {q.unit}", err=True)


@app.command()
def demo(
    explain: Annotated[bool, typer.Option(help="add the trace behind each setpoint")] = False,
) -> None:
    """Plan the bundled example batteries and print each plan."""
    with _errors():
        from chargeplan.api import plan_file
        from chargeplan.demo import example_paths
        from chargeplan.render.text import render_text

        paths = example_paths()
        for index, path in enumerate(paths):
            typer.echo(f"# example {index + 1} of {len(paths)}: {path.name}\n")
            typer.echo(render_text(plan_file(path), explain=explain))


@app.command()
def simulate(
    file: Annotated[Path, typer.Argument(help="the battery file (YAML or JSON)")],
    csv: Annotated[Path | None, typer.Option("--csv", help="write the time series here")] = None,
    force: Annotated[bool, typer.Option(help="replace the CSV file if it exists")] = False,
    profiles: ProfilePaths = None,
) -> None:
    """Simulate the plan's charge: a summary, and the time series as CSV for plotting."""
    with _errors():
        from chargeplan.simulation import simulate_file

        run = simulate_file(file, profiles=_profile_set(profiles))
        if csv is not None:  # written first: a path it refuses gets its one line alone
            from chargeplan.render.write import write_atomic

            write_atomic(csv, run.csv(), force=force)
            typer.echo(f"wrote {csv} ({run.rows} rows)", err=True)
        typer.echo(run.summary())


@app.command()
def state(
    chemistry: Annotated[str, typer.Option("--chemistry", help="a profile id")],
    rest_voltage: Annotated[str | None, typer.Option("--rest-voltage",
                                                     help="e.g. 12.31V")] = None,
    specific_gravity: Annotated[str | None, typer.Option(
        "--specific-gravity", metavar="NUMBER", help="hydrometer, as read, e.g. 1.215")] = None,
    temperature: Annotated[str | None, typer.Option("--temperature",
                                                    help="battery temperature, e.g. 5degC")] = None,
    cells: Annotated[str | None, typer.Option("--cells", metavar="INTEGER",
                                              help="cells in series")] = None,
    nominal_voltage: Annotated[str | None, typer.Option("--nominal-voltage")] = None,
    rested_for: Annotated[str | None, typer.Option("--rested-for",
                                                   help="time since charging, e.g. 30min")] = None,
    profiles: ProfilePaths = None,
) -> None:
    """State of charge from a rest voltage or a hydrometer reading."""
    with _errors():
        from chargeplan.cautions import caution_text
        from chargeplan.planners.readings import state_of_charge
        from chargeplan.units import option_number, option_quantity

        reading = state_of_charge(
            chemistry,
            rest_voltage_v=option_quantity(rest_voltage, "voltage", "--rest-voltage"),
            specific_gravity=option_number(specific_gravity, "--specific-gravity"),
            temperature_c=option_quantity(temperature, "temperature", "--temperature"),
            cells=option_number(cells, "--cells", integer=True),
            nominal_voltage_v=option_quantity(nominal_voltage, "voltage", "--nominal-voltage"),
            rested_s=option_quantity(rested_for, "duration", "--rested-for"),
            profiles=_profile_set(profiles),
        )
        typer.echo(f"state of charge: about {reading.state_of_charge_pct:.0f} % "
                   f"({reading.chemistry})")
        typer.echo(f"from: {reading.basis}")
        for note in reading.notes:
            typer.echo(f"note: {note}")
        typer.echo("\n" + caution_text(reading.cautions), nl=False)


@app.command()
def runtime(
    file: Annotated[Path, typer.Argument(help="the battery file (YAML or JSON)")],
    load: Annotated[str, typer.Option("--load", help="a current (5A) or a power (60W)")],
    profiles: ProfilePaths = None,
) -> None:
    """How long a load takes to flatten the battery from its present state."""
    with _errors():
        from chargeplan.api import load_battery_file
        from chargeplan.cautions import caution_text
        from chargeplan.fmt import amps, duration
        from chargeplan.planners.readings import runtime as estimate_runtime

        result = estimate_runtime(load_battery_file(file), load,
                                  profiles=_profile_set(profiles), file=str(file))
        typer.echo(f"about {duration(result.runtime_h * 3600)} at {amps(result.current_a)} "
                   f"from {result.state_of_charge_pct:.0f} % (Peukert's law, k = "
                   f"{result.exponent:g}, rated over {result.rated_h:g} h)")
        for note in result.notes:
            typer.echo(f"note: {note}")
        typer.echo("\n" + caution_text(result.cautions), nl=False)


@app.command()
def check(
    file: Annotated[Path, typer.Argument(help="a setpoint JSON document or image")],
    battery: Annotated[Path | None, typer.Option("--battery", help="the battery file it "
                                                                    "is for")] = None,
    charger: Annotated[Path | None, typer.Option("--charger", help="the channel file it "
                                                                    "will run on")] = None,
    profiles: ProfilePaths = None,
) -> None:
    """Check a setpoint file before flashing: exit 1 and every violation if it fails."""
    with _errors():
        from chargeplan.firmware.check import check_file, load_channel_file

        battery_file = None
        if battery is not None:
            from chargeplan.api import load_battery_file

            battery_file = load_battery_file(battery)
        channel = load_channel_file(charger) if charger is not None else None
        report = check_file(file, battery_file=battery_file, channel=channel,
                            profiles=profiles or [])
        if report.ok:
            what = "schema, digest" if report.kind == "json" else "CRC-32"
            typer.echo(f"{file}: ok: {what} and {report.checks_run} checks passed")
            return
        for violation in report.violations:
            typer.echo(f"{file}: {violation}", err=True)
        typer.echo(f"{file}: refused: {len(report.violations)} violation"
                   f"{'s' if len(report.violations) != 1 else ''}; do not flash it", err=True)
        raise typer.Exit(1)


@app.command()
def firmware(
    output: Annotated[Path, typer.Option("--output", "-o", help="the folder to write the C "
                                                                "sources into")],
    battery: Annotated[Path | None, typer.Option(
        "--battery", help="also write setpoints.bin, this battery file's charge program")] = None,
    force: Annotated[bool, typer.Option(help="replace files that exist")] = False,
    profiles: ProfilePaths = None,
) -> None:
    """Write the reference implementation in portable C99 (make test runs its host test)."""
    with _errors():
        from chargeplan.firmware.reference import write_reference

        data = None
        if battery is not None:
            from chargeplan.api import program_file
            from chargeplan.firmware import image
            from chargeplan.firmware.setpoints import encode

            data = image.encode(encode(program_file(battery, profiles=_profile_set(profiles))))
        names = write_reference(output, image=data, force=force)
        typer.echo(f"wrote {output}/: {', '.join(names)}", err=True)


@app.command()
def thermistor(
    r25: Annotated[str, typer.Option("--r25", help="resistance at 25 degC, e.g. 10kohm")],
    beta: Annotated[str, typer.Option("--beta", metavar="NUMBER",
                                      help="B value in K, e.g. 3950")],
    bias: Annotated[str, typer.Option("--bias", help="divider bias resistor, e.g. 10kohm")],
    adc_bits: Annotated[str, typer.Option("--adc-bits", metavar="INTEGER",
                                          help="ADC resolution")] = "12",
    battery: Annotated[Path | None, typer.Option("--battery", help="codes for this "
                                                                    "battery's interlocks")] = None,
    a: Annotated[str | None, typer.Option("--a", metavar="NUMBER",
                                          help="Steinhart-Hart A, e.g. 1.009e-3")] = None,
    b: Annotated[str | None, typer.Option("--b", metavar="NUMBER",
                                          help="Steinhart-Hart B")] = None,
    c: Annotated[str | None, typer.Option("--c", metavar="NUMBER",
                                          help="Steinhart-Hart C")] = None,
    as_json: Annotated[bool, typer.Option("--json", help="print JSON")] = False,
    profiles: ProfilePaths = None,
) -> None:
    """ADC codes of an NTC thermistor divider: the interlock thresholds and a lookup table."""
    with _errors():
        from chargeplan.errors import InputError
        from chargeplan.firmware.thermistor import FULL_SCALE_NOTE, Divider, thermistor_table
        from chargeplan.units import option_number, option_quantity

        coefficients = tuple(option_number(text, name)
                             for text, name in ((a, "--a"), (b, "--b"), (c, "--c")))
        given = [v is not None for v in coefficients]
        if any(given) and not all(given):
            raise InputError("Steinhart-Hart needs all three", field="--a",
                             fix="give --a, --b and --c, or none of them")
        beta_k = option_number(beta, "--beta") or 0.0
        bits = int(option_number(adc_bits, "--adc-bits", integer=True) or 0)
        divider = Divider(
            r25_ohm=option_quantity(r25, "resistance", "--r25") or 0.0,
            beta_k=beta_k,
            bias_ohm=option_quantity(bias, "resistance", "--bias") or 0.0,
            adc_bits=bits,
            steinhart_hart=coefficients if all(given) else None,  # type: ignore[arg-type]
        )
        plan = None
        if battery is not None:
            from chargeplan.api import plan_file

            plan = plan_file(battery, profiles=_profile_set(profiles), estimate=False,
                             table_step_c=None)
        table = thermistor_table(divider, plan)
        if as_json:
            import json

            typer.echo(json.dumps(table.as_json(), indent=2))
            return
        for row in table.interlocks:
            typer.echo(f"{row['name']:<24} {row['temperature_dC'] / 10:7.1f} degC  code "
                       f"{row['code']:>6}  (exact {row['exact_code']:.2f})")
        for row in table.probe:
            limit = f"above {row['code_above']}" if "code_above" in row else \
                f"below {row['code_below']}"
            typer.echo(f"{row['name']:<24} code {limit:>10}  fault {row['fault_code']}: "
                       f"{row['meaning']}")
        typer.echo(f"full scale {table.full_scale_code}: {FULL_SCALE_NOTE}")
        typer.echo("temperature_degC  resistance_ohm  code   (sorted by code)")
        for row in table.rows:
            typer.echo(f"{row['temperature_dC'] / 10:16.1f}  {row['resistance_ohm']:14.1f}  "
                       f"{row['code']:>4}")
        from chargeplan.cautions import DEFERRAL, caution_text

        typer.echo("\n" + (caution_text(plan.cautions) if plan is not None else DEFERRAL + "\n"),
                   nl=False)


@app.command()
def storage(
    site: Annotated[Path, typer.Argument(help="the storage site file (YAML or JSON)")],
    inventory: Annotated[Path | None, typer.Option("--inventory", help="batteries CSV")] = None,
    readings: Annotated[Path | None, typer.Option("--readings", help="measured rest voltages "
                                                  "CSV (date, battery, rest_voltage)")] = None,
    output: Annotated[Path | None, typer.Option("--output", "-o", help="write the procedure, "
                                                "schedule and calendar into this folder")] = None,
    force: Annotated[bool, typer.Option(help="replace files that exist")] = False,
    profiles: ProfilePaths = None,
) -> None:
    """Plan winter storage: decay, top-up dates, freeze checks, procedure and calendar."""
    with _errors():
        from chargeplan.planners.storage import (
            load_site,
            plan_storage,
            read_inventory,
            read_readings,
        )

        site_file = load_site(site)
        rows = read_inventory(inventory) if inventory is not None else None
        measured = read_readings(readings) if readings is not None else None
        found = _profile_set(profiles)
        plan = plan_storage(site_file, rows, profiles=found, readings=measured,
                            inventory_file=str(inventory or site), site_path=str(site))
        if output is not None:
            from chargeplan.render.storage_docs import storage_makers
            from chargeplan.render.write import write_all

            files = storage_makers(plan, found, previous_folder=output)
            write_all(output, files, force=force)  # a file written while the next is made
            typer.echo(f"wrote {output}/: {', '.join(files)}", err=True)
        typer.echo(plan.summary(), nl=False)


@app.command()
def bench(
    file: Annotated[Path, typer.Argument(help="the bench file (YAML or JSON)")],
    batteries: Annotated[Path | None, typer.Option("--batteries", help="batteries CSV")] = None,
    output: Annotated[Path | None, typer.Option("--output", "-o", help="write bench.md, "
                                                "bench.html, the sheets, schedule.csv, "
                                                "schedule.ics and setpoint files here")] = None,
    now: Annotated[str | None, typer.Option("--now", help="re-plan at this local time, "
                                            "e.g. 2026-12-07T13:00")] = None,
    progress: Annotated[Path | None, typer.Option(
        "--progress", help="progress.csv: battery, channel, started, finished")] = None,
    force: Annotated[bool, typer.Option(help="replace files that exist")] = False,
    profiles: ProfilePaths = None,
) -> None:
    """Plan a charging bench: compatibility, schedule, ventilation, cards, tags, log sheets."""
    with _errors():
        from chargeplan.planners.bench import (
            load_bench,
            plan_bench,
            read_bench_batteries,
            replan_at,
        )

        found = _profile_set(profiles)
        rows = read_bench_batteries(batteries) if batteries is not None else None
        moment, done = replan_at(now, progress)
        plan = plan_bench(load_bench(file), rows, profiles=found, now=moment, progress=done,
                          file=str(file))
        if output is not None:
            from chargeplan.render.bench_files import bench_outputs
            from chargeplan.render.write import write_all

            files, changes = bench_outputs(plan, output)
            write_all(output, files, force=force)
            for line in changes:
                typer.echo(line, err=True)
            typer.echo(f"wrote {len(files)} files to {output}", err=True)
        typer.echo(plan.summary(), nl=False)


@app.command()
def ventilation(
    cells: Annotated[str, typer.Option("--cells", metavar="INTEGER",
                                       help="cells in series per battery")],
    capacity: Annotated[str, typer.Option("--capacity", help="rated capacity, e.g. 100Ah")],
    battery_type: Annotated[str, typer.Option("--type", metavar=_choices(("vented", "vrla")),
                                              help="vented or vrla")] = "vented",
    mode: Annotated[str, typer.Option("--mode", metavar=_choices(("float", "boost")),
                                      help="float or boost")] = "boost",
    batteries: Annotated[str, typer.Option("--batteries", metavar="INTEGER",
                                           help="how many")] = "1",
    room_airflow: Annotated[str | None, typer.Option("--room-airflow",
                                                     help="room airflow, e.g. 50m3/h")] = None,
    room_opening: Annotated[str | None, typer.Option("--room-opening",
                                                     help="free opening area, e.g. 200cm2")] = None,
    as_json: Annotated[bool, typer.Option("--json", help="print JSON")] = False,
) -> None:
    """Airflow and opening area a charging room needs (IEC 62485-2 cl. 7), and a room check."""
    with _errors():
        from chargeplan.planners.ventilation import available_airflow, requirement
        from chargeplan.units import option_number, option_quantity

        need = requirement(int(option_number(cells, "--cells", integer=True) or 0),
                           option_quantity(capacity, "capacity", "--capacity") or 0.0,
                           battery_type, mode,
                           int(option_number(batteries, "--batteries", integer=True) or 0))
        room = None
        if room_airflow is not None or room_opening is not None:
            room = available_airflow(option_quantity(room_airflow, "airflow", "--room-airflow"),
                                     option_quantity(room_opening, "area", "--room-opening"))
        if as_json:
            import json

            out = {"airflow_m3_per_h": round(need.airflow_m3_per_h, 6),
                   "opening_area_cm2": round(need.opening_area_cm2, 6),
                   "gas_current_mA_per_Ah": need.gas_current_ma_per_ah,
                   "formula": need.explain()}
            if room is not None:
                out |= {"room_airflow_m3_per_h": room, "room_enough": room >= need.airflow_m3_per_h}
            typer.echo(json.dumps(out, indent=2))
            return
        typer.echo(f"airflow needed: {need.airflow_m3_per_h:.4g} m3/h; free opening: "
                   f"{need.opening_area_cm2:.4g} cm2 (inlet and outlet each)")
        typer.echo(need.explain())
        if room is not None:
            verdict = "enough" if room >= need.airflow_m3_per_h else "NOT enough"
            typer.echo(f"the room gives {room:.4g} m3/h: {verdict}")
        from chargeplan.cautions import caution_text, cautions_for

        typer.echo("\n" + caution_text(cautions_for("lead_acid",
                                                    vented=battery_type == "vented")), nl=False)


@app.command("profiles")
def profiles_command(
    profile_id: Annotated[str | None, typer.Argument(help="show one profile in full")] = None,
    profiles: ProfilePaths = None,
) -> None:
    """List the chemistry profiles, or show one with every value and its source."""
    with _errors():
        found = _profile_set(profiles)
        if profile_id is None:
            for pid in found.ids:
                p = found.get(pid)
                typer.echo(f"{p.id:<10} {p.family:<10} {p.name}  [{found.source_of(pid)}]")
            return
        p = found.get(profile_id, field="profile")
        typer.echo(f"{p.id}: {p.name} ({p.family}; envelope of {p.chemistry}; "
                   f"{found.source_of(profile_id)})")
        if p.summary:
            typer.echo(p.summary)
        for key, value, source in p.sourced_values():
            typer.echo(f"  {key:<42} {value:<14} {source}")
        stages = ", ".join(p.envelope.forbidden_stages) or "none"
        typer.echo(f"  {'envelope.forbidden_stages':<42} {stages}")
        for name in ("equalization", "desulfation"):
            block = getattr(p, name)
            typer.echo(f"  {name + '.allowed':<42} {str(block.allowed).lower()}"
                       + (" (with the maker's permission)" if block.maker_may_allow else ""))


@app.command("rules")
def rules_command(
    rule_id: Annotated[str | None, typer.Argument(help="a rule id or name to explain")] = None,
) -> None:
    """List the rules in the order they run, or explain one."""
    with _errors():
        from chargeplan.engine import rules as _registered  # noqa: F401
        from chargeplan.engine.registry import RULES

        if rule_id is not None:
            entry = RULES.entry(RULES.get(rule_id))
            for key in ("id", "name", "phase", "statement", "detail", "source"):
                if entry[key]:
                    typer.echo(f"{key:<10} {entry[key]}")
            return
        for entry in RULES.manifest():
            typer.echo(f"{entry['id']}  {entry['name']:<30} {entry['phase']}")
            typer.echo(f"       {entry['statement']}")
            typer.echo(f"       source: {entry['source']}")


@app.command()
def schema(
    out: Annotated[Path | None, typer.Option("--out", help="write the schemas into this "
                                                           "folder")] = None,
    force: Annotated[bool, typer.Option(help="replace schema files that exist")] = False,
    write: Annotated[bool, typer.Option("--write", help="regenerate the shipped schemas in "
                                                        "place")] = False,
) -> None:
    """Write the JSON Schemas, or check that the shipped ones match the code."""
    with _errors():
        from chargeplan.schema import compare_shipped, write_schemas

        if write:
            from chargeplan.profiles import data_dir

            out, force = data_dir("schemas"), True
        if out is not None:
            for path in write_schemas(out, force=force):
                typer.echo(f"wrote {path}")
            return
        results = compare_shipped()
        for name, same in results.items():
            typer.echo(f"{name:<24} {'matches the code' if same else 'differs from the code'}")
        if not all(results.values()):
            typer.echo("regenerate with: chargeplan schema --out schemas --force", err=True)
            raise typer.Exit(1)


def _version(value: bool) -> None:
    if value:
        from importlib.metadata import PackageNotFoundError, version

        try:
            typer.echo(f"chargeplan {version('chargeplan')}")
        except PackageNotFoundError:  # a source tree that was never installed
            typer.echo("chargeplan (not installed: no package metadata)")
        raise typer.Exit(0)


@app.callback()
def _main(
    show_version: Annotated[bool, typer.Option(
        "--version", callback=_version, is_eager=True,
        help="print chargeplan's version and exit")] = False,
) -> None:
    """Plan battery charging (lead-acid and lithium) and write charger setpoint files."""


def main() -> None:
    """Run the command line (the console entry point, chargeplan.__main__.run, wraps it)."""
    app(prog_name="chargeplan")


if __name__ == "__main__":  # python -m chargeplan.cli: the console entry's own way in
    from chargeplan.__main__ import run

    run()
