"""Documents for people: Markdown and HTML carry the plan, the cautions and the deferral,
and escape what came from user files."""

from __future__ import annotations

import pytest

from chargeplan.api import plan_file
from chargeplan.render.document import render_html, render_markdown
from chargeplan.simulation import simulate_plan

from .conftest import battery

DEFERRAL = "maker's datasheet, local codes or licensed practice"


@pytest.mark.parametrize("chemistry", ["flooded", "agm", "gel", "lifepo4", "nmc"])
def test_documents_carry_stages_cautions_and_deferral(write_yaml, chemistry):
    data = battery(battery={"chemistry": chemistry, "nominal_voltage": None,
                            "cells_in_series": 4})
    del data["battery"]["nominal_voltage"]
    plan = plan_file(write_yaml(data))
    md = render_markdown(plan)
    run = simulate_plan(plan)
    html = render_html(run.plan, series=run.series)
    for text in (md, html):
        assert DEFERRAL in text.replace("&#39;", "'")
        for stage in plan.stages:
            assert stage.kind.label in text
    if chemistry in ("lifepo4", "nmc"):
        assert "thermal runaway" in html and "below 0 °C" in html
    else:
        assert "hydrogen" in html and "eye protection" in html and "frozen" in html
    assert "<svg" in html and "Time (h)" in html and "Voltage (V)" in html


def test_html_escapes_user_text(write_yaml):
    plan = plan_file(write_yaml(battery(battery={"name": '<script>alert("x")</script> & co'})))
    run = simulate_plan(plan)
    html = render_html(run.plan, series=run.series, explain=True)
    assert "<script>" not in html
    assert "&lt;script&gt;" in html
    assert "http://" not in html.replace('xmlns="http://www.w3.org/2000/svg"', "")  # no assets


def test_markdown_escapes_table_pipes(write_yaml):
    plan = plan_file(write_yaml(battery(battery={"name": "Bay | 3"})))
    assert "Bay \\| 3" in render_markdown(plan, explain=True)


def _text_plan_lines(plan) -> list[str]:
    """Every finding and caution of the text plan, as the text plan prints them."""
    from chargeplan.render.text import render_text

    text = render_text(plan)
    found = [f.message for f in plan.findings]
    for line in [*found, *plan.cautions]:
        assert line in text  # the text plan is the reference: each line is in it
    return [*found, *plan.cautions]


def _assert_every_line_in_markdown_and_html(plan) -> None:
    import html as html_module

    from chargeplan.render.markdown import md_text

    markdown = render_markdown(plan)
    page = html_module.unescape(render_html(plan))
    for line in _text_plan_lines(plan):
        # user and engine text in Markdown is escaped (chargeplan.render.markdown)
        assert md_text(line) in markdown or line in markdown, line
        assert line in page, line
    for f in plan.findings:
        assert f"({f.rule_id})" in markdown and f"({f.rule_id})" in page
    if plan.total_estimate() is not None:
        # the text plan's caveat on estimated times (plan.txt.j2) is in every format
        for text in (markdown, page):
            assert "the stages still end on their exits, not on these times" in text


def _examples():
    from chargeplan.demo import example_paths

    return example_paths()


@pytest.mark.parametrize("path", _examples(), ids=lambda p: p.name)
def test_markdown_and_html_hold_every_finding_and_caution_of_the_text_plan(path):
    # the same approach as tests/test_storage_season.py's procedure.md vs procedure.html:
    # each passage of the reference format must be in the other two
    plan = plan_file(path)
    _assert_every_line_in_markdown_and_html(plan)


@pytest.mark.parametrize("chemistry", ["flooded", "agm", "gel", "lifepo4", "nmc"])
def test_every_chemistry_cold_and_part_charged_keeps_its_findings_in_every_format(
        write_yaml, chemistry):
    # a cool battery (6 degC: the cool zone's current limit, BU-410 Table 1) read at rest:
    # the info findings (CP103 flat curve on LiFePO4, CP302 current held) must not be dropped
    cells = {"lifepo4": 4, "nmc": 3}.get(chemistry, 6)
    rest = {"lifepo4": "13.2 V", "nmc": "11.1 V"}.get(chemistry, "12.2 V")
    data = battery(battery={"chemistry": chemistry, "cells_in_series": cells},
                   state={"rest_voltage": rest}, conditions={"battery_temperature": "6 degC"})
    data["battery"].pop("nominal_voltage", None)
    data["state"].pop("state_of_charge", None)
    plan = plan_file(write_yaml(data))
    info = [f for f in plan.findings if f.severity.value == "info"]
    assert info, [f.message for f in plan.findings]
    _assert_every_line_in_markdown_and_html(plan)
