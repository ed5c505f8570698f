"""The bad-input corpus (tests/corpus/), run through the command line.

Every file in the corpus, and a few bad files built here (a flipped bit, a truncated image,
a 50 MB file, FIFOs with no writer, /dev/zero, folders), must give the exit code and message
fragment listed in tests/corpus/expected.yaml (or in BUILT); the first line names the file;
stderr holds only one-line "error:" or "refused:" messages; there is no traceback and no
internal error; and nothing is written or changed in the output folder. A file listed with
exit 0 looks hostile but is valid (formula-like ids, HTML in names): it runs, and its output
holds the fragment, made inert.
"""

from __future__ import annotations

import json
import os
from pathlib import Path

import pytest
from ruamel.yaml import YAML
from typer.testing import CliRunner

from chargeplan.cli import app
from chargeplan.firmware.setpoints import compute_digest

CORPUS = Path(__file__).parent / "corpus"
EXPECTED: dict[str, list] = dict(YAML(typ="safe").load((CORPUS / "expected.yaml").read_text()))
GOOD = {
    "battery": CORPUS / "battery" / "good-battery.yaml",
    "site": CORPUS / "storage" / "good-site.yaml",
    "bench": CORPUS / "bench" / "good-bench.yaml",
    "channel": CORPUS / "channel" / "good-channel.yaml",
}
runner = CliRunner()


def _command(kind: str, file: Path, out: Path, setpoints: Path) -> list[str]:
    """The command that reads an input of this kind, writing (if at all) into ``out``."""
    f, o = str(file), str(out)
    if kind == "battery":
        return ["plan", f, "-f", "json", "-o", str(out / "plan.json")]
    if kind == "profile":
        return ["plan", str(GOOD["battery"]), "--profiles", f, "-o", str(out / "plan.txt")]
    if kind in ("setpoints", "image"):
        return ["check", f]
    if kind == "channel":
        return ["check", str(setpoints), "--charger", f]
    if kind == "storage":
        return ["storage", f, "-o", o]
    if kind == "inventory":
        return ["storage", str(GOOD["site"]), "--inventory", f, "-o", o]
    if kind == "readings":
        return ["storage", str(GOOD["site"]), "--readings", f, "-o", o]
    if kind == "bench":
        if file.suffix == ".csv":
            return ["bench", str(GOOD["bench"]), "--batteries", f, "-o", o]
        return ["bench", f, "-o", o]
    raise AssertionError(f"no command for corpus kind {kind}")


@pytest.fixture(scope="module")
def good_setpoints(tmp_path_factory) -> dict[str, Path]:
    folder = tmp_path_factory.mktemp("good")
    files = {"json": folder / "good.json", "image": folder / "good.cpsi"}
    for fmt, path in files.items():
        result = runner.invoke(app, ["plan", str(GOOD["battery"]), "-f", fmt, "-o", str(path)])
        assert result.exit_code == 0, result.stderr
    return files


def _snapshot(folder: Path) -> dict[str, bytes]:
    return {p.name: p.read_bytes() for p in sorted(folder.iterdir())}


def _run_accepted(kind: str, file: Path, fragment: str, tmp_path: Path,
                  setpoints: Path) -> None:
    """A hostile-looking file that is valid: it runs, and what it wrote holds the fragment
    (the text made inert: a guarded CSV cell, escaped Markdown)."""
    out = tmp_path / "out"
    result = runner.invoke(app, _command(kind, file, out, setpoints))
    text = result.stderr + result.stdout
    assert result.exit_code == 0 and "Traceback" not in text, text
    written = [p.read_text(encoding="utf-8") for p in sorted(out.iterdir())]
    assert any(fragment in t for t in written), fragment


def _run_bad(kind: str, file: Path, code: int, fragment: str, tmp_path: Path,
             setpoints: Path) -> None:
    if code == 0:
        _run_accepted(kind, file, fragment, tmp_path, setpoints)
        return
    out = tmp_path / "out"
    out.mkdir()
    (out / "keep.txt").write_text("a file that was here before\n")
    before = _snapshot(out)
    result = runner.invoke(app, _command(kind, file, out, setpoints))
    assert result.exception is None or isinstance(result.exception, SystemExit), result.exception
    text = result.stderr + result.stdout
    assert "Traceback" not in text and "internal error" not in text, text
    assert result.exit_code == code, text
    lines = [line for line in result.stderr.splitlines() if line.strip()]
    assert lines or code == 1, text
    first = lines[0] if lines else result.stdout.splitlines()[0]
    assert fragment in first, first
    for line in lines:
        assert line.startswith(("error: ", "refused: ")) or code == 1, line
    if first.startswith("error: "):
        assert first.startswith(f"error: {file}"), first  # the file comes first
    assert _snapshot(out) == before, "the output folder changed"


def test_corpus_is_complete():
    """Every corpus file has an expectation and every expectation a file; at least 60."""
    files = {str(p.relative_to(CORPUS)) for p in CORPUS.rglob("*")
             if p.is_file() and p.name != "expected.yaml" and not p.name.startswith("good-")}
    assert files == set(EXPECTED)
    assert len(files) + len(BUILT) >= 60
    kinds = {name.split("/")[0] for name in files}
    assert kinds >= {"battery", "profile", "setpoints", "image", "storage", "inventory",
                     "readings", "bench", "channel"}


@pytest.mark.parametrize("name", sorted(EXPECTED))
def test_bad_file(name, tmp_path, good_setpoints):
    code, fragment = EXPECTED[name]
    kind = name.split("/")[0]
    _run_bad(kind, CORPUS / name, code, fragment, tmp_path, good_setpoints["json"])


def test_good_partners_pass(tmp_path, good_setpoints):
    """The valid files the corpus runs against are valid: a failure is the bad file's own."""
    for kind, file in [("battery", GOOD["battery"]), ("storage", GOOD["site"]),
                       ("bench", GOOD["bench"]), ("channel", GOOD["channel"])]:
        out = tmp_path / kind
        out.mkdir()
        result = runner.invoke(app, _command(kind, file, out, good_setpoints["json"]))
        assert result.exit_code == 0, (kind, result.stderr)


def _flip_json_digit(good: dict[str, Path], folder: Path) -> Path:
    text = good["json"].read_text()
    doc = json.loads(text)
    voltage = doc["stages"][1]["voltage_mV"]
    edited = text.replace(f'"voltage_mV": {voltage}', f'"voltage_mV": {voltage ^ 1}', 1)
    assert edited != text
    path = folder / "flipped.json"
    path.write_text(edited)
    return path


def _flip_image_bit(good: dict[str, Path], folder: Path) -> Path:
    data = bytearray(good["image"].read_bytes())
    data[len(data) // 2] ^= 0x10
    path = folder / "flipped.cpsi"
    path.write_bytes(bytes(data))
    return path


def _truncate_image(good: dict[str, Path], folder: Path) -> Path:
    path = folder / "truncated.cpsi"
    path.write_bytes(good["image"].read_bytes()[:-9])
    return path


def _wrong_version(good: dict[str, Path], folder: Path) -> Path:
    doc = json.loads(good["json"].read_text())
    doc["version"] = 99
    doc["digest"] = compute_digest(doc)  # a sound document of a version this one cannot read
    path = folder / "version-99.json"
    path.write_text(json.dumps(doc))
    return path


def _huge_battery(good: dict[str, Path], folder: Path) -> Path:
    path = folder / "huge.yaml"
    with path.open("w") as handle:
        handle.write(GOOD["battery"].read_text())
        handle.write("# padding\n" * (5 * 1024 * 1024 + 1))  # 50 MB of comments
    return path


def _fifo(name: str):
    def build(good: dict[str, Path], folder: Path) -> Path:
        path = folder / name
        os.mkfifo(path)  # no writer: a plain open would wait for ever
        return path
    return build


def _folder(name: str):
    def build(good: dict[str, Path], folder: Path) -> Path:
        path = folder / name
        path.mkdir()
        return path
    return build


def _device(good: dict[str, Path], folder: Path) -> Path:
    return Path("/dev/zero")  # endless: a plain read would fill the memory


_FIFO = "is a FIFO (named pipe), not a file"
_DEVICE = "is a device, not a file"
_FOLDER = "is a folder, not a file"

BUILT = {
    # name: (kind, builder, exit code, fragment)
    "battery/fifo.yaml": ("battery", _fifo("fifo.yaml"), 2, f"{_FIFO}; give the battery file"),
    "battery/dev-zero": ("battery", _device, 2, f"{_DEVICE}; give the battery file"),
    "battery/folder.yaml": ("battery", _folder("folder.yaml"), 2, _FOLDER),
    "profile/fifo.yaml": ("profile", _fifo("fifo.yaml"), 2, f"{_FIFO}; give the profile file"),
    "storage/fifo.yaml": ("storage", _fifo("fifo.yaml"), 2, _FIFO),
    "storage/dev-zero": ("storage", _device, 2, _DEVICE),
    "inventory/fifo.csv": ("inventory", _fifo("fifo.csv"), 2, f"{_FIFO}; give the CSV file"),
    "inventory/folder.csv": ("inventory", _folder("folder.csv"), 2, _FOLDER),
    "inventory/dev-zero": ("inventory", _device, 2, _DEVICE),
    "readings/fifo.csv": ("readings", _fifo("fifo.csv"), 2, _FIFO),
    "readings/folder.csv": ("readings", _folder("folder.csv"), 2, _FOLDER),
    "bench/fifo.yaml": ("bench", _fifo("fifo.yaml"), 2, _FIFO),
    "bench/batteries-fifo.csv": ("bench", _fifo("batteries.csv"), 2, _FIFO),
    "bench/batteries-folder.csv": ("bench", _folder("batteries.csv"), 2, _FOLDER),
    "channel/fifo.yaml": ("channel", _fifo("fifo.yaml"), 2, f"{_FIFO}; give the channel file"),
    "setpoints/fifo.json": ("setpoints", _fifo("fifo.json"), 2, _FIFO),
    "setpoints/dev-zero": ("setpoints", _device, 2, _DEVICE),
    "image/folder.cpsi": ("image", _folder("folder.cpsi"), 2, _FOLDER),
    "setpoints/flipped-digit.json": ("setpoints", _flip_json_digit, 1, "digest does not match"),
    "setpoints/version-99.json": ("setpoints", _wrong_version, 1,
                                  "is not the setpoint format version"),
    "image/flipped-bit.cpsi": ("image", _flip_image_bit, 1, "CRC-32"),
    "image/truncated.cpsi": ("image", _truncate_image, 2, "bytes"),
    "battery/huge-50MB.yaml": ("battery", _huge_battery, 2, "MB"),
}


@pytest.mark.parametrize("name", sorted(BUILT))
def test_built_bad_file(name, tmp_path, good_setpoints):
    kind, build, code, fragment = BUILT[name]
    source = tmp_path / "source"
    source.mkdir()
    file = build(good_setpoints, source)
    _run_bad(kind, file, code, fragment, tmp_path, good_setpoints["json"])
