"""Bundled profiles against published values, and users' own profiles against the envelope."""

from __future__ import annotations

import re
from pathlib import Path

import pytest
from ruamel.yaml import YAML

from chargeplan.errors import InputError
from chargeplan.model.profile import Sourced
from chargeplan.profiles import BUILTIN_IDS, ProfileSet, load_builtin, load_profile_file

from .conftest import REPO

LEAD = ("flooded", "agm", "gel")
LITHIUM = ("lifepo4", "nmc")


def _sourced_nodes(node, path=""):
    if isinstance(node, Sourced):
        yield path, node
    elif hasattr(type(node), "model_fields"):
        for name in type(node).model_fields:
            yield from _sourced_nodes(getattr(node, name), f"{path}.{name}".strip("."))


#: The forms a source may take (RULES: standard and clause, handbook and table, "common
#: practice" or "from memory"), each as a pattern a real citation of that form matches.
CITATION_FORMS = {
    "common practice": re.compile(r"\bcommon practice\b"),
    "from memory": re.compile(r"\bfrom memory\b"),
    "standard and clause or table": re.compile(
        r"\b(IEC|EN|IEEE|ISO)\s?\d[\d-]*[^;]*?(\bcl\.|§|\bTable\b)\s*[\dIVX]"),
    "guideline and year": re.compile(r"\bguideline \(\d{4}\)"),
    "handbook article": re.compile(r"\bBU-\d{3}[a-z]?\b"),
    "handbook table": re.compile(r"\b(Table [IVX\d]+|[A-Z][\w-]*(?: [\w-]+)* table)\b"),
    "web page and title": re.compile(r"\b[\w-]+\.(com|org|net) '[^']{10,}'"),
}


def _citation_form(source: str) -> str | None:
    return next((name for name, form in CITATION_FORMS.items() if form.search(source)), None)


@pytest.mark.parametrize(("source", "form"), [
    ("IEC 62485-2 Table 1: VRLA float 2.27 V/cell", "standard and clause or table"),
    ("IEEE 450-1987 cl. 4.4: equalize at least every 18 months", "standard and clause or table"),
    ("BU-403 Charging Lead Acid", "handbook article"),
    ("US Army TM 5-1185 Table III", "handbook table"),
    ("common practice: safety timers at 1.5 times", "common practice"),
    ("from memory: about 5 mohm", "from memory"),
    ("lead-acid references", None),
    ("IEC 62485-2", None),
    ("a test value", None),
    ("Battery University", None),
    ("see the datasheet", None),
])
def test_citation_forms_tell_a_citation_from_a_label(source, form):
    assert _citation_form(source) == form


@pytest.mark.parametrize("pid", BUILTIN_IDS)
def test_every_number_has_a_source(pid):
    """Each source is a real citation form: a standard with its clause or table, a handbook
    article or table, a named page, "common practice" or "from memory" (RULES)."""
    profile = load_builtin(pid)
    rows = list(_sourced_nodes(profile))
    assert len(rows) >= 15
    sources = [(path, node.source) for path, node in rows]
    sources.append(("rest_voltage.table", profile.rest_voltage.table_source))
    for path, source in sources:
        assert _citation_form(source), f"{pid}: {path}: '{source}' is no citation form"


@pytest.mark.parametrize("pid", BUILTIN_IDS)
def test_bundled_profiles_pass_their_own_envelope(pid):
    load_profile_file(REPO / "profiles" / f"{pid}.yaml")  # raises on any crossing


def test_float_voltages_inside_published_ranges():
    # IEC 62485-2 Table 1: VRLA float 2.27 V/cell; BU-403: flooded float 2.25-2.27 V/cell;
    # mathscinotes fit: gel float 2.265 - 0.003 (25 - 20) = 2.25 V/cell at 25 degC.
    assert load_builtin("agm").charge.float_voltage.value == pytest.approx(2.27)
    assert 2.25 <= load_builtin("flooded").charge.float_voltage.value <= 2.27
    assert load_builtin("gel").charge.float_voltage.value == pytest.approx(2.265 - 0.003 * 5)


def test_absorption_voltages_inside_published_ranges():
    # IEC 62485-2 Table 1 boost 2.40 V/cell; EN 50342-1 cl. 8.2.2 test charge 14.80 V / 6 cells
    for pid in ("flooded", "agm"):
        assert 2.40 <= load_builtin(pid).charge.absorption_voltage.value <= 14.80 / 6 + 1e-9
    # common practice: gel 2.30-2.40 V/cell
    assert 2.30 <= load_builtin("gel").charge.absorption_voltage.value <= 2.40
    # cell handling guidelines: LFP constant voltage 3.45-3.65 V/cell
    assert 3.45 <= load_builtin("lifepo4").charge.absorption_voltage.value <= 3.65
    # BU-808: NMC 4.20 V/cell
    assert load_builtin("nmc").charge.absorption_voltage.value == pytest.approx(4.20)


def test_hard_envelopes_match_published_maxima():
    # cell handling guidelines: LFP absolute maximum 3.65 V/cell; BU-808: NMC 4.20 V/cell
    assert load_builtin("lifepo4").envelope.max_cell_voltage.value == pytest.approx(3.65)
    assert load_builtin("nmc").envelope.max_cell_voltage.value == pytest.approx(4.20)
    # REFERENCES: equalization at most 2.67 V/cell across sources; envelope just above
    assert 2.67 <= load_builtin("flooded").envelope.max_cell_voltage.value <= 2.75


@pytest.mark.parametrize("pid", LEAD)
def test_lead_acid_compensation_coefficient(pid):
    # BU-410: -3 to -5 mV/degC per cell about 25 degC
    comp = load_builtin(pid).temperature.compensation
    assert -5.0 <= comp.coefficient.value <= -3.0
    assert comp.reference.value == pytest.approx(25.0)


@pytest.mark.parametrize("pid", LEAD)
def test_lead_acid_charge_window(pid):
    # BU-410 Table 1: lead-acid -20 to 50 degC, at most 0.3 C below freezing
    t = load_builtin(pid).temperature
    assert (t.charge_min.value, t.charge_max.value) == (-20.0, 50.0)
    assert t.cool_zone.boundary.value == 0.0 and t.cool_zone.current.value <= 0.3


@pytest.mark.parametrize("pid", LITHIUM)
def test_lithium_charge_window(pid):
    # BU-410 Table 1: lithium-ion 0 to 45 degC, no charging below 0 degC
    p = load_builtin(pid)
    assert (p.temperature.charge_min.value, p.temperature.charge_max.value) == (0.0, 45.0)
    assert p.envelope.charge_temperature_min.value >= 0.0
    assert {"equalization", "desulfation"} <= set(p.envelope.forbidden_stages)
    assert not p.equalization.allowed and not p.desulfation.allowed
    assert p.temperature.compensation is None


def test_gel_never_equalized_or_desulfated():
    # common practice: no equalization of gel; overvoltage damages the gel
    gel = load_builtin("gel")
    assert not gel.equalization.allowed and not gel.desulfation.allowed
    assert {"equalization", "desulfation"} <= set(gel.envelope.forbidden_stages)


def test_bulk_currents_inside_published_ranges():
    # BU-403: lead-acid 0.10-0.30 C; BU-409: lithium-ion 0.5-1 C
    for pid in LEAD:
        assert 0.10 <= load_builtin(pid).charge.bulk_current.value <= 0.30
    for pid in LITHIUM:
        assert 0.5 <= load_builtin(pid).charge.bulk_current.value <= 1.0


def test_tail_currents_inside_published_ranges():
    # BU-403 / common practice: 0.5-5 % of C; BU-409: lithium 1-10 % (about 3 %)
    for pid in BUILTIN_IDS:
        assert 0.005 <= load_builtin(pid).charge.tail_current.value <= 0.10


def test_unknown_profile_lists_the_valid_ones():
    with pytest.raises(InputError) as caught:
        ProfileSet(use_environment=False).get("nicad")
    assert "flooded, agm, gel, lifepo4, nmc" in str(caught.value)


def _user_profile(tmp_path: Path, change) -> Path:
    yaml = YAML(typ="safe")
    data = yaml.load((REPO / "profiles" / "agm.yaml").read_text())
    data["id"] = "agm-deep"
    change(data)
    path = tmp_path / "agm-deep.yaml"
    with path.open("w") as stream:
        yaml.dump(data, stream)
    return path


def test_user_profile_inside_envelope_is_used(tmp_path):
    def lower(data):
        data["charge"]["absorption_voltage"]["value"] = "2.40 V/cell"

    path = _user_profile(tmp_path, lower)
    profiles = ProfileSet([path], use_environment=False)
    assert "agm-deep" in profiles.ids
    assert profiles.get("agm-deep").charge.absorption_voltage.value == pytest.approx(2.40)


@pytest.mark.parametrize(
    ("change", "field"),
    [
        (lambda d: d["charge"].__setitem__("absorption_voltage",
                                           {"value": "2.60 V/cell", "source": "a test value"}),
         "charge.absorption_voltage"),
        (lambda d: d["envelope"].__setitem__("max_cell_voltage",
                                             {"value": "2.80 V/cell", "source": "a test value"}),
         "envelope.max_cell_voltage"),
        (lambda d: d["envelope"].__setitem__("charge_temperature_max",
                                             {"value": "60 degC", "source": "a test value"}),
         "envelope.charge_temperature_max"),
        (lambda d: d.__setitem__("chemistry", "lto"), "chemistry"),
    ],
)
def test_user_profile_beyond_envelope_is_refused(tmp_path, change, field):
    path = _user_profile(tmp_path, change)
    with pytest.raises(InputError) as caught:
        ProfileSet([path], use_environment=False)
    assert caught.value.field == field
    assert str(path) in str(caught.value)


def test_user_lithium_profile_must_keep_forbidden_stages(tmp_path):
    yaml = YAML(typ="safe")
    data = yaml.load((REPO / "profiles" / "lifepo4.yaml").read_text())
    data["id"] = "lfp-loose"
    data["envelope"]["forbidden_stages"] = []
    path = tmp_path / "lfp.yaml"
    with path.open("w") as stream:
        yaml.dump(data, stream)
    with pytest.raises(InputError) as caught:
        ProfileSet([path], use_environment=False)
    assert caught.value.field == "envelope.forbidden_stages"


def test_value_without_source_is_refused(tmp_path):
    def drop(data):
        data["charge"]["bulk_current"] = {"value": "0.2 It", "source": ""}

    with pytest.raises(InputError) as caught:
        ProfileSet([_user_profile(tmp_path, drop)], use_environment=False)
    assert "source" in str(caught.value)


@pytest.mark.parametrize(
    ("base", "change", "field"),
    [
        ("lifepo4", lambda d: d["temperature"].pop("cool_zone"), "temperature.cool_zone"),
        ("nmc", lambda d: d["temperature"]["warm_zone"].__setitem__(
            "voltage", {"value": "4.5 V/cell", "source": "a test value"}),
         "temperature.warm_zone.voltage"),
        ("agm", lambda d: d["desulfation"].__setitem__(
            "current", {"value": "5 It", "source": "a test value"}), "desulfation.current"),
        ("agm", lambda d: d["temperature"]["compensation"].__setitem__(
            "reference", {"value": "60 degC", "source": "a test value"}),
         "temperature.compensation"),
        ("nmc", lambda d: d["rest_voltage"].__setitem__(
            "highest_plausible", {"value": "4.8 V/cell", "source": "a test value"}),
         "rest_voltage.highest_plausible"),
    ],
)
def test_user_profile_cannot_loosen_zones_currents_or_compensation(tmp_path, base, change, field):
    yaml = YAML(typ="safe")
    data = yaml.load((REPO / "profiles" / f"{base}.yaml").read_text())
    data["id"] = f"{base}-mine"
    change(data)
    path = tmp_path / "mine.yaml"
    with path.open("w") as stream:
        yaml.dump(data, stream)
    with pytest.raises(InputError) as caught:
        ProfileSet([path], use_environment=False)
    assert (caught.value.field or "").startswith(field)
