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
