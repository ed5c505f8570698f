"""The HTML plan in a real browser: headless Chromium renders it to PNG and to PDF.

Checks that the page is not blank, that the chart is there, and that its stage labels are
readable text (pdftotext finds them in the PDF). Skipped, with the reason, where Chromium
or pdftotext is missing; `.ci/run` installs both (Debian's chromium and poppler-utils).
"""

from __future__ import annotations

import shutil
import struct
import subprocess
import zlib
from pathlib import Path

import pytest

from chargeplan.api import plan_file
from chargeplan.demo import example_paths
from chargeplan.render.document import render_html
from chargeplan.simulation import simulate_plan

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
pytestmark = pytest.mark.skipif(
    CHROMIUM is None or shutil.which("pdftotext") is None,
    reason="headless Chromium and pdftotext are not installed (Debian: chromium, poppler-utils)",
)
FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync"]


def _chromium(tmp_path: Path, *args: str) -> None:
    profile = tmp_path / "profile"
    profile.mkdir(exist_ok=True)
    subprocess.run([CHROMIUM, *FLAGS, f"--user-data-dir={profile}", *args], check=True,
                   capture_output=True, timeout=120)


def _png_pixels(path: Path) -> tuple[int, int, bytes]:
    """Width, height and the raw (filtered) scanline bytes of a PNG, by the PNG spec."""
    data = path.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n"
    offset, idat, width, height = 8, b"", 0, 0
    while offset < len(data):
        (length,), kind = struct.unpack(">I", data[offset:offset + 4]), data[offset + 4:offset + 8]
        body = data[offset + 8:offset + 8 + length]
        if kind == b"IHDR":
            width, height = struct.unpack(">II", body[:8])
        elif kind == b"IDAT":
            idat += body
        offset += 12 + length
    return width, height, zlib.decompress(idat)


@pytest.fixture(scope="module")
def page(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("browser")
    plan = plan_file(example_paths()[0])
    run = simulate_plan(plan)
    html = tmp / "plan.html"
    html.write_text(render_html(run.plan, series=run.series), encoding="utf-8")
    return tmp, html, plan


def test_page_renders_and_is_not_blank(page):
    tmp, html, _plan = page
    png = tmp / "plan.png"
    _chromium(tmp, "--window-size=900,1400", f"--screenshot={png}", html.as_uri())
    width, height, raw = _png_pixels(png)
    assert (width, height) == (900, 1400)
    # a blank page is one value repeated; a plan with a chart has many dark pixels
    dark = sum(1 for value in raw if value < 128)
    assert dark > len(raw) * 0.01


def test_pdf_has_the_chart_and_readable_stage_labels(page):
    tmp, html, plan = page
    pdf = tmp / "plan.pdf"
    _chromium(tmp, "--no-pdf-header-footer", f"--print-to-pdf={pdf}", html.as_uri())
    text = subprocess.run(["pdftotext", str(pdf), "-"], check=True, capture_output=True,
                          text=True).stdout
    assert "Simulated charge" in text and "Time (h)" in text and "Voltage (V)" in text
    for stage in plan.stages:
        assert stage.kind.label in text
    assert "licensed practice" in text


@pytest.fixture(scope="module")
def bench_pages(tmp_path_factory):
    from chargeplan.planners.bench import load_bench, plan_bench
    from chargeplan.render.bench_docs import bench_document, bench_sheets

    tmp = tmp_path_factory.mktemp("bench")
    path = next(p for p in example_paths(include_storage=True) if p.name.startswith("bench"))
    plan = plan_bench(load_bench(path))
    pages = {"bench.html": bench_document(plan, html=True), **bench_sheets(plan)}
    for name, text in pages.items():
        (tmp / name).write_text(text, encoding="utf-8")
    return tmp, plan


@pytest.mark.parametrize("name", ["bench", "cards", "tags"])
def test_bench_pages_render_and_read(bench_pages, name):
    tmp, plan = bench_pages
    html = tmp / f"{name}.html"
    png = tmp / f"{name}.png"
    _chromium(tmp, "--window-size=1000,1400", f"--screenshot={png}", html.as_uri())
    width, _height, raw = _png_pixels(png)
    assert width == 1000 and sum(1 for value in raw if value < 128) > len(raw) * 0.002
    pdf = tmp / f"{name}.pdf"
    _chromium(tmp, "--no-pdf-header-footer", f"--print-to-pdf={pdf}", html.as_uri())
    text = subprocess.run(["pdftotext", str(pdf), "-"], check=True, capture_output=True,
                          text=True).stdout
    for job in plan.jobs:  # every scheduled battery is on the page, as readable text
        assert plan.batteries[job.battery].id in text
    if name == "bench":
        assert "closes 17:00" in text and "staggered for ventilation" in text
    if name == "cards":
        assert "safety timer" in text and "Stop at once if" in text
    if name == "tags":
        assert "result:" in text
