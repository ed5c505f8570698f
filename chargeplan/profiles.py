"""The chemistry profiles: the bundled ones, users' own, and the hard envelopes.

Bundled profiles ship as package data and are loaded by package-relative path.
A user profile (a file, or a folder of them) names the built-in ``chemistry``
whose hard envelope bounds it; it is rejected if any value or its own envelope
would cross that envelope. A new chemistry needs a built-in profile.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from functools import cache
from importlib.resources import files
from pathlib import Path

from chargeplan.errors import InputError, InternalError
from chargeplan.loading import read_mapping, validate
from chargeplan.model.profile import Profile

__all__ = [
    "BUILTIN_IDS",
    "HardEnvelope",
    "ProfileSet",
    "data_dir",
    "hard_envelope",
    "load_builtin",
    "load_profile_file",
]

#: The chemistries chargeplan ships, each with its hard envelope.
BUILTIN_IDS = ("flooded", "agm", "gel", "lifepo4", "nmc")


def data_dir(name: str) -> Path:
    """A data folder shipped with the package ('profiles' or 'schemas').

    An installed wheel carries them under ``chargeplan/_data``; a source checkout
    (or editable install) has them at the top of the repository.
    """
    packaged = files("chargeplan") / "_data" / name
    if packaged.is_dir():
        return Path(str(packaged))
    source = Path(__file__).resolve().parent.parent / name
    if source.is_dir():
        return source
    raise InternalError(f"chargeplan's {name} folder is missing from the installation")


@cache
def load_builtin(profile_id: str) -> Profile:
    """A bundled profile by id; an unknown id lists the valid ones."""
    if profile_id not in BUILTIN_IDS:
        raise InputError(
            f"'{profile_id}' is not a bundled profile",
            field="chemistry",
            fix=f"use one of {', '.join(BUILTIN_IDS)}, or give your own profile",
        )
    path = data_dir("profiles") / f"{profile_id}.yaml"
    profile = validate(Profile, read_mapping(path, what="profile"), file=str(path))
    if profile.id != profile_id or profile.chemistry != profile_id:
        raise InternalError(f"bundled profile {path} names itself '{profile.id}'")
    return profile


@dataclass(frozen=True, slots=True)
class HardEnvelope:
    """The hard limits of a built-in chemistry, as plain floats, for safety.verify."""

    chemistry: str
    family: str
    cell_voltage_max_v: float
    max_current_it: float
    charge_temperature_min_c: float
    charge_temperature_max_c: float
    forbidden_stages: frozenset[str]
    cool_zone_below_c: float | None = None  # below it, current at most cool_zone_current_it
    cool_zone_current_it: float | None = None
    warm_zone_above_c: float | None = None  # above it, cell voltage at most warm_zone_cell_v
    warm_zone_cell_v: float | None = None


@cache
def hard_envelope(chemistry: str) -> HardEnvelope:
    """The built-in hard envelope of ``chemistry``, read from its bundled profile and held
    inside :data:`chargeplan.safety.CEILINGS`, the published ceilings."""
    from chargeplan.safety import envelope_problems

    env = load_builtin(chemistry)
    e = env.envelope
    cool, warm = env.temperature.cool_zone, env.temperature.warm_zone
    hard = HardEnvelope(
        chemistry=chemistry,
        family=env.family,
        cell_voltage_max_v=e.max_cell_voltage.value,
        max_current_it=e.max_current.value,
        charge_temperature_min_c=e.charge_temperature_min.value,
        charge_temperature_max_c=e.charge_temperature_max.value,
        forbidden_stages=frozenset(e.forbidden_stages),
        cool_zone_below_c=cool.boundary.value if cool and cool.current else None,
        cool_zone_current_it=cool.current.value if cool and cool.current else None,
        warm_zone_above_c=warm.boundary.value if warm and warm.voltage else None,
        warm_zone_cell_v=warm.voltage.value if warm and warm.voltage else None,
    )
    problems = envelope_problems(hard)
    if problems:  # the bundled profile crosses safety's published ceilings
        raise InternalError(f"bundled profile {chemistry}: {'; '.join(problems)}")
    return hard


def _within_builtin(profile: Profile, file: str) -> None:
    """Reject a user profile whose values or envelope cross its chemistry's hard envelope."""
    if profile.chemistry not in BUILTIN_IDS:
        raise InputError(
            f"'{profile.chemistry}' has no built-in hard envelope",
            file=file,
            field="chemistry",
            fix=f"use one of {', '.join(BUILTIN_IDS)} (a new chemistry needs a built-in "
            "profile; see DEVELOPERS.md)",
        )
    hard = hard_envelope(profile.chemistry)
    if profile.family != hard.family:
        raise InputError(
            f"family '{profile.family}' does not match chemistry '{profile.chemistry}'",
            file=file, field="family", fix=f"set family: {hard.family}",
        )

    def over(field: str, value: float, limit: float, unit: str) -> None:
        if value > limit + 1e-9:
            raise InputError(
                f"{value:g} {unit} is above the {profile.chemistry} hard envelope's "
                f"{limit:g} {unit}",
                file=file, field=field, fix=f"lower it to {limit:g} {unit} or less",
            )

    v_max = hard.cell_voltage_max_v
    c = profile.charge
    over("envelope.max_cell_voltage", profile.envelope.max_cell_voltage.value, v_max, "V/cell")
    over("charge.absorption_voltage", c.absorption_voltage.value, v_max, "V/cell")
    over("charge.storage_voltage", c.storage_voltage.value, v_max, "V/cell")
    if c.float_voltage is not None:
        over("charge.float_voltage", c.float_voltage.value, v_max, "V/cell")
    for stage in (profile.equalization, profile.desulfation):
        if stage.possible and stage.voltage is not None:
            name = "equalization" if stage is profile.equalization else "desulfation"
            over(f"{name}.voltage", stage.voltage.value, v_max, "V/cell")
    i_max = hard.max_current_it
    over("envelope.max_current", profile.envelope.max_current.value, i_max, "It")
    over("charge.bulk_current", c.bulk_current.value, i_max, "It")
    for stage in (profile.equalization, profile.desulfation):
        if stage.possible and stage.current is not None:
            name = "equalization" if stage is profile.equalization else "desulfation"
            over(f"{name}.current", stage.current.value, i_max, "It")
    builtin = load_builtin(profile.chemistry)
    _zones_within(profile, builtin, file)
    _termination_within(profile, builtin, file)
    rest, hard_rest = profile.rest_voltage, load_builtin(profile.chemistry).rest_voltage
    over("rest_voltage.highest_plausible", rest.highest_plausible.value,
         hard_rest.highest_plausible.value, "V/cell")
    if rest.dead_below.value < hard_rest.dead_below.value - 1e-9:
        raise InputError(
            f"{rest.dead_below.value:g} V/cell is below the {profile.chemistry} built-in "
            f"{hard_rest.dead_below.value:g} V/cell",
            file=file, field="rest_voltage.dead_below",
            fix=f"raise it to {hard_rest.dead_below.value:g} V/cell or more",
        )
    t = profile.temperature
    over("temperature.charge_max", t.charge_max.value, hard.charge_temperature_max_c, "degC")
    over("envelope.charge_temperature_max", profile.envelope.charge_temperature_max.value,
         hard.charge_temperature_max_c, "degC")
    for field, value in (
        ("temperature.charge_min", t.charge_min.value),
        ("envelope.charge_temperature_min", profile.envelope.charge_temperature_min.value),
    ):
        if value < hard.charge_temperature_min_c - 1e-9:
            raise InputError(
                f"{value:g} degC is below the {profile.chemistry} hard envelope's "
                f"{hard.charge_temperature_min_c:g} degC",
                file=file, field=field,
                fix=f"raise it to {hard.charge_temperature_min_c:g} degC or more",
            )
    missing = hard.forbidden_stages - set(profile.envelope.forbidden_stages)
    if missing:
        raise InputError(
            f"must forbid {', '.join(sorted(missing))} like the built-in {profile.chemistry}",
            file=file, field="envelope.forbidden_stages",
            fix=f"add {', '.join(sorted(missing))}",
        )
    for stage_name in ("equalization", "desulfation"):
        block, hard_block = getattr(profile, stage_name), getattr(builtin, stage_name)
        if block.possible and stage_name in hard.forbidden_stages:
            raise InputError(
                f"{stage_name} is forbidden for {profile.chemistry}",
                file=file, field=f"{stage_name}.allowed",
                fix="set allowed: false and maker_may_allow: false",
            )
        if block.possible and not hard_block.possible:
            raise InputError(
                f"{stage_name} is never planned for {profile.chemistry}",
                file=file, field=f"{stage_name}.allowed",
                fix="set allowed: false and maker_may_allow: false",
            )


def _zones_within(profile: Profile, builtin: Profile, file: str) -> None:
    """A user profile keeps the built-in cool and warm zones, or narrower and stricter ones,
    and a lead-acid compensation close to the built-in one."""

    def bad(field: str, problem: str, fix: str) -> InputError:
        return InputError(problem, file=file, field=f"temperature.{field}", fix=fix)

    mine, hard = profile.temperature, builtin.temperature
    if hard.cool_zone is not None and hard.cool_zone.current is not None:
        cool = mine.cool_zone
        if cool is None or cool.current is None:
            raise bad("cool_zone", f"is missing; {profile.chemistry} needs one",
                      f"copy the built-in {profile.chemistry} cool_zone")
        if cool.boundary.value < hard.cool_zone.boundary.value - 1e-9:
            raise bad("cool_zone.boundary", "is colder than the built-in boundary",
                      f"use {hard.cool_zone.boundary.value:g} degC or warmer")
        if cool.current.value > hard.cool_zone.current.value + 1e-9:
            raise bad("cool_zone.current", "is above the built-in cool-zone current",
                      f"use {hard.cool_zone.current.value:g} It or less")
    if hard.warm_zone is not None and hard.warm_zone.voltage is not None:
        warm = mine.warm_zone
        if warm is None or warm.voltage is None:
            raise bad("warm_zone", f"is missing; {profile.chemistry} needs one",
                      f"copy the built-in {profile.chemistry} warm_zone")
        if warm.boundary.value > hard.warm_zone.boundary.value + 1e-9:
            raise bad("warm_zone.boundary", "is warmer than the built-in boundary",
                      f"use {hard.warm_zone.boundary.value:g} degC or cooler")
        if warm.voltage.value > hard.warm_zone.voltage.value + 1e-9:
            raise bad("warm_zone.voltage", "is above the built-in warm-zone voltage",
                      f"use {hard.warm_zone.voltage.value:g} V/cell or less")
    if hard.compensation is not None and mine.compensation is not None:
        k, k_hard = mine.compensation.coefficient.value, hard.compensation.coefficient.value
        if not 2 * k_hard <= k <= 0.5 * k_hard:
            raise bad("compensation.coefficient",
                      f"{k:g} mV/K/cell is far from the built-in {k_hard:g} mV/K/cell",
                      f"use a value between {2 * k_hard:g} and {0.5 * k_hard:g}")
        ref, ref_hard = mine.compensation.reference.value, hard.compensation.reference.value
        if abs(ref - ref_hard) > 5:
            raise bad("compensation.reference", f"{ref:g} degC is far from the built-in "
                      f"{ref_hard:g} degC", "use the datasheet's reference, 20-30 degC")


def _termination_within(profile: Profile, builtin: Profile, file: str) -> None:
    """A user profile may tighten the lead-acid guards, never loosen them: its Ah cap,
    current rise, temperature rise and cold absorption ceiling are at most the built-in's."""
    mine, hard = profile.termination, builtin.termination
    if mine is None or hard is None:
        return
    for name, unit in (("charge_cap", "x"), ("current_rise", "It"),
                       ("temperature_rise", "K"), ("absorption_time_cold_max", "s")):
        value, limit = getattr(mine, name).value, getattr(hard, name).value
        if value > limit + 1e-9:
            raise InputError(
                f"{value:g} {unit} is above the built-in {profile.chemistry} "
                f"{limit:g} {unit}: a user profile may only tighten the guards",
                file=file, field=f"termination.{name}",
                fix=f"use {limit:g} {unit} or less",
            )


def load_profile_file(path: str | Path) -> Profile:
    """Read and check one user profile file."""
    shown = str(path)
    profile = validate(Profile, read_mapping(path, what="profile"), file=shown)
    _within_builtin(profile, shown)
    return profile


class ProfileSet:
    """The profiles a run can use: the bundled ones plus any the user points at.

    ``paths`` are files or folders of ``*.yaml``/``*.yml``/``*.json`` profiles; the
    environment variable ``CHARGEPLAN_PROFILES`` adds more (``os.pathsep``-separated).
    A user profile may not reuse a bundled id.
    """

    def __init__(self, paths: list[str | Path] | None = None, *, use_environment: bool = True):
        self._user: dict[str, Profile] = {}
        self._user_files: dict[str, str] = {}
        search = [Path(p) for p in paths or []]
        env = os.environ.get("CHARGEPLAN_PROFILES", "") if use_environment else ""
        search += [Path(p) for p in env.split(os.pathsep) if p.strip()]
        for entry in search:
            for file in self._files(entry):
                profile = load_profile_file(file)
                if profile.id in BUILTIN_IDS:
                    raise InputError(
                        f"'{profile.id}' is a bundled profile id", file=str(file), field="id",
                        fix="give your profile its own id, e.g. "
                        f"'{profile.id}-{file.stem.replace('_', '-')}'",
                    )
                if profile.id in self._user:
                    raise InputError(
                        f"profile id '{profile.id}' is also used by {self._user_files[profile.id]}",
                        file=str(file), field="id", fix="give each profile its own id",
                    )
                self._user[profile.id] = profile
                self._user_files[profile.id] = str(file)

    @staticmethod
    def _files(entry: Path) -> list[Path]:
        if entry.is_dir():
            return sorted(
                p for p in entry.iterdir() if p.suffix.lower() in {".yaml", ".yml", ".json"}
            )
        if not entry.exists():
            raise InputError("no such profile file or folder", file=str(entry),
                             fix="check the path given with --profiles or CHARGEPLAN_PROFILES")
        return [entry]

    @property
    def ids(self) -> list[str]:
        return [*BUILTIN_IDS, *sorted(self._user)]

    def get(self, profile_id: str, *, field: str = "battery.chemistry") -> Profile:
        """A profile by id; an unknown id is an InputError that lists the valid ones."""
        if profile_id in self._user:
            return self._user[profile_id]
        if profile_id in BUILTIN_IDS:
            return load_builtin(profile_id)
        raise InputError(
            f"unknown chemistry '{profile_id}'",
            field=field,
            fix=f"use one of {', '.join(self.ids)}",
        )

    def source_of(self, profile_id: str) -> str:
        return self._user_files.get(profile_id, "bundled")
