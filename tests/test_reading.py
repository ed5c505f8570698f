"""Reading hostile files: anything but a regular file is refused at once (never a hang, never
memory exhausted), YAML depth and expansion are capped before anything is built ("billion
laughs": common practice, DESIGN notes "Files and text"), CSV refuses NUL bytes, doubled
columns and over-long cells with their line, and JSON refuses half surrogate pairs.

The FIFO and /dev/zero cases run the command line in a subprocess with a timeout, so a
regression shows as a failure, not as a suite that never ends."""

from __future__ import annotations

import os
import socket
import subprocess
import sys
from pathlib import Path

import pytest

from chargeplan.csvfile import MAX_CELL_CHARS, read_rows
from chargeplan.errors import InputError
from chargeplan.loading import (
    MAX_YAML_DEPTH,
    MAX_YAML_NODES,
    _check_events,
    parse_json,
    read_input,
    read_mapping,
)
from chargeplan.model.storage import InventoryRow

CORPUS = Path(__file__).parent / "corpus"
SITE = CORPUS / "storage" / "good-site.yaml"
BATTERY = CORPUS / "battery" / "good-battery.yaml"
BENCH = CORPUS / "bench" / "good-bench.yaml"
HEADER = "id,chemistry,nominal_voltage,capacity,state_of_charge,bay\n"


def _cli(*args: str, timeout: float = 30) -> subprocess.CompletedProcess[str]:
    return subprocess.run([sys.executable, "-m", "chargeplan", *args], capture_output=True,
                          text=True, timeout=timeout, stdin=subprocess.DEVNULL)


@pytest.fixture
def fifo(tmp_path) -> Path:
    path = tmp_path / "pipe.yaml"
    os.mkfifo(path)
    return path


COMMANDS = [
    ["plan", "{f}"],
    ["plan", str(BATTERY), "--profiles", "{f}"],
    ["storage", str(SITE), "--inventory", "{f}"],
    ["storage", str(SITE), "--readings", "{f}"],
    ["storage", "{f}"],
    ["bench", "{f}"],
    ["bench", str(BENCH), "--batteries", "{f}"],
    ["check", "{f}"],
    ["check", str(BATTERY), "--charger", "{f}"],
    ["runtime", "{f}", "--load", "2 A"],
]


def _refused(done_code: int, stderr: str, path: str, special: str) -> None:
    kind = "a FIFO (named pipe)" if special == "fifo" else "a device"
    assert done_code == 2, stderr
    assert stderr.startswith(f"error: {path}: is {kind}, not a file; give the "), stderr
    assert len(stderr.splitlines()) == 1


@pytest.mark.parametrize("command", [COMMANDS[0], COMMANDS[2], COMMANDS[7]],
                         ids=["battery", "inventory", "setpoints"])
@pytest.mark.parametrize("special", ["fifo", "/dev/zero"])
def test_a_fifo_or_a_device_is_refused_at_once(command, special, fifo):
    """A real process with a timeout: a FIFO with no writer used to hang it for ever, and
    /dev/zero to read until memory ran out."""
    path = str(fifo) if special == "fifo" else special
    done = _cli(*[a.replace("{f}", path) for a in command])
    _refused(done.returncode, done.stderr, path, special)


@pytest.mark.parametrize("command", COMMANDS, ids=lambda c: "-".join(
    a for a in c if not a.startswith(("/", "{"))))
@pytest.mark.parametrize("special", ["fifo", "/dev/zero"])
def test_every_input_refuses_a_fifo_or_a_device(command, special, fifo):
    """Every input of every command; in this process, with an alarm in case one blocks."""
    import signal

    from typer.testing import CliRunner

    from chargeplan.cli import app

    path = str(fifo) if special == "fifo" else special

    def hung(signum, frame):
        raise TimeoutError(f"reading {special} blocked")

    previous = signal.signal(signal.SIGALRM, hung)
    signal.alarm(20)
    try:
        result = CliRunner().invoke(app, [a.replace("{f}", path) for a in command])
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, previous)
    _refused(result.exit_code, result.stderr, path, special)


def test_a_fifo_with_a_writer_is_still_refused(fifo):
    """Even with data waiting in the pipe: the descriptor, not the data, decides."""
    writer = os.open(fifo, os.O_RDWR | os.O_NONBLOCK)  # holds the pipe open, writes a little
    try:
        os.write(writer, b"battery: {}\n")
        with pytest.raises(InputError, match="is a FIFO"):
            read_input(fifo, what="battery")
    finally:
        os.close(writer)


def test_a_folder_and_a_socket_are_refused(tmp_path):
    with pytest.raises(InputError, match="is a folder, not a file; give the CSV file"):
        read_rows(tmp_path, InventoryRow)
    path = tmp_path / "s.yaml"
    server = socket.socket(socket.AF_UNIX)
    try:
        server.bind(str(path))
        with pytest.raises(InputError, match="is a socket, not a file"):
            read_mapping(path, what="battery")
    finally:
        server.close()


def test_the_size_is_capped_before_and_while_reading(tmp_path):
    path = tmp_path / "big.yaml"
    path.write_bytes(b"#" * 2001)
    with pytest.raises(InputError, match=r"is 0.0 MB, larger than any battery file"):
        read_input(path, what="battery", limit=2000)
    assert read_input(path, what="battery", limit=2001) == b"#" * 2001


def test_a_file_that_lies_about_its_size_is_cut_off(tmp_path, monkeypatch):
    """A file whose fstat says less than it holds (/proc, a growing file): the read stops one
    byte past the cap."""
    path = tmp_path / "grows.yaml"
    path.write_bytes(b"#" * 10_000)
    real = os.fstat

    class Small:
        def __init__(self, info):
            self.st_mode, self.st_size = info.st_mode, 10

    monkeypatch.setattr(os, "fstat", lambda fd: Small(real(fd)))
    reads = []
    real_read = os.read
    monkeypatch.setattr(os, "read", lambda fd, n: reads.append(n) or real_read(fd, n))
    with pytest.raises(InputError, match=r"more than 0\.0 MB"):
        read_input(path, what="battery", limit=100)
    assert sum(reads) <= 101


def test_deep_brackets_are_refused_by_depth_not_by_a_crash():
    """100,000 nested '[' made ruamel's C composer recurse until the process died; the
    parser's own event stream has no recursion, and the walk stops at the 65th level."""
    done = subprocess.run(
        [sys.executable, "-c", "from chargeplan.loading import _check_events\n"
         "try: _check_events('battery: ' + '[' * 100_000, 'deep.yaml')\n"
         "except Exception as e: print(e)"], capture_output=True, text=True, timeout=30)
    assert done.returncode == 0, done.stderr  # no segmentation fault
    assert f"is nested more than {MAX_YAML_DEPTH} deep" in done.stdout


def test_depth_counts_what_an_alias_stands_for():
    text = "a: &a " + "[" * 40 + "1" + "]" * 40 + "\nb: " + "[" * 30 + "*a" + "]" * 30 + "\n"
    with pytest.raises(InputError, match="line 2: is nested more than 64 deep"):
        _check_events(text, "x.yaml")
    _check_events(text.replace("[" * 30, "[" * 20).replace("]" * 30, "]" * 20), "x.yaml")


def _merge_bomb(levels: int) -> str:
    lines = ["a0: &a0 {k0: 1}"]
    lines += [f"a{i}: &a{i} {{<<: [*a{i - 1}, *a{i - 1}]}}" for i in range(1, levels)]
    return "\n".join(lines) + "\n"


def test_a_merge_key_bomb_is_refused_before_it_is_built(tmp_path):
    """Each level merges the one before twice, so the cost doubles a level; 50 levels is
    1.4 kB (ruamel takes 0.7 s at 18 levels and doubles from there)."""
    text = _merge_bomb(50)
    assert len(text) < 1500
    path = tmp_path / "merge.yaml"
    path.write_text(text)
    with pytest.raises(InputError, match=f"stands for more than {MAX_YAML_NODES:,} values"):
        read_mapping(path, what="battery")


def test_the_count_is_never_below_what_is_built():
    """An honest file far below the cap reads; a small bomb just past it does not."""
    from ruamel.yaml import YAML

    def built(value) -> int:
        if isinstance(value, dict):
            return 1 + sum(1 + built(v) for v in value.values())
        if isinstance(value, list):
            return 1 + sum(built(v) for v in value)
        return 1

    text = _merge_bomb(8)
    _check_events(text, "x.yaml")
    assert built(YAML(typ="safe").load(text)) < MAX_YAML_NODES
    alias = "a: &a [" + ", ".join(["x"] * 1000) + "]\nb: [" + ", ".join(["*a"] * 1000) + "]\n"
    with pytest.raises(InputError, match="stands for more than"):
        _check_events(alias, "x.yaml")


@pytest.mark.parametrize("body, fragment", [
    ("id,chemistry,nominal_voltage,capacity,capacity,state_of_charge,bay\n"
     "K-1,agm,12 V,6 Ah,600 Ah,80 %,shed\n", "line 1: the column 'capacity' is named twice"),
    (HEADER + "K-1,agm,12 V,6 Ah\x00,80 %,shed\n", "line 2: holds a NUL byte"),
    (HEADER + "K-1,agm,12 V,6 Ah,80 %,shed\nK-2,agm,12 V,6 Ah,80 %," + "x" * 5000 + "\n",
     f"line 3: bay: the cell is 5,000 characters long, more than {MAX_CELL_CHARS:,}"),
    (HEADER + "K-1,agm,12 V,6 Ah,80 %," + "x" * 200_000 + "\n",
     f"line 2: a cell is longer than {MAX_CELL_CHARS:,} characters"),
])
def test_bad_csv_is_refused_with_its_line(tmp_path, body, fragment):
    path = tmp_path / "inventory.csv"
    path.write_text(body, newline="")
    with pytest.raises(InputError) as caught:
        read_rows(path, InventoryRow)
    lines = getattr(caught.value, "lines", None) or [str(caught.value)]
    assert lines[0].startswith(f"{path}: {fragment}"), lines


def test_a_half_surrogate_in_json_is_refused_and_a_pair_is_read():
    with pytest.raises(InputError, match="half of a UTF-16 surrogate pair"):
        parse_json('{"name": "\\ud800x"}', "b.json")
    assert parse_json('{"name": "\\ud83d\\udd0b"}', "b.json") == {"name": "\N{BATTERY}"}


def test_writing_over_a_fifo_is_refused(tmp_path, fifo):
    from chargeplan.render.write import write_atomic

    with pytest.raises(InputError, match="is a FIFO"):
        write_atomic(fifo, "{}", force=True)
    assert fifo.is_fifo()
