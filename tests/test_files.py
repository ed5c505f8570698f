"""Writers: single files atomic (temp file in the same folder, fsync, rename); output folders
whole (staged beside the target, swapped in); never through a link, never over an existing
file or tool-written folder without --force, never over a folder holding someone else's
files; files and folders follow the umask (POSIX open/umask convention)."""

from __future__ import annotations

import os
import signal
import stat
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pytest

from chargeplan.errors import InputError
from chargeplan.render import write as writer

CORPUS = Path(__file__).parent / "corpus"
NEW = {"a.md": "new a\n", "b.csv": "new b\n", "c.ics": b"new c\n"}
OLD = {"a.md": "old a\n", "b.csv": "old b\n", "old-only.json": "{}\n"}


def _contents(folder: Path) -> dict[str, bytes]:
    return {p.name: p.read_bytes() for p in sorted(folder.iterdir())}


def _expected(files: dict[str, str | bytes]) -> dict[str, bytes]:
    found = {name: data.encode() if isinstance(data, str) else data
             for name, data in files.items()}
    found[writer.MANIFEST] = "".join(f"{n}\n" for n in files).encode()
    return dict(sorted(found.items()))


def _old_folder(tmp_path: Path) -> Path:
    out = tmp_path / "out"
    writer.write_all(out, OLD)
    assert _contents(out) == _expected(OLD)
    return out


def _no_leftovers(tmp_path: Path) -> None:
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out"], list(tmp_path.iterdir())


def test_failure_mid_write_keeps_the_old_file_and_leaves_no_temp(tmp_path, monkeypatch):
    target = tmp_path / "plan.json"
    target.write_text("old contents")

    def broken_fsync(fd):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(os, "fsync", broken_fsync)
    with pytest.raises(InputError, match="No space left"):
        writer.write_atomic(target, "new contents", force=True)
    assert target.read_text() == "old contents"
    assert [p.name for p in tmp_path.iterdir()] == ["plan.json"]


def test_interrupted_write_leaves_no_temp(tmp_path, monkeypatch):
    target = tmp_path / "plan.json"

    def interrupted(src, dst):
        raise KeyboardInterrupt

    monkeypatch.setattr(os, "replace", interrupted)
    with pytest.raises(KeyboardInterrupt):
        writer.write_atomic(target, "contents")
    assert list(tmp_path.iterdir()) == []


def test_never_writes_through_a_link(tmp_path):
    outside = tmp_path / "outside.txt"
    outside.write_text("keep me")
    folder = tmp_path / "out"
    folder.mkdir()
    (folder / "bench.md").symlink_to(outside)
    with pytest.raises(InputError, match="symbolic link"):
        writer.write_all(folder, {"bench.md": "x"}, force=True)
    assert outside.read_text() == "keep me"
    linked = tmp_path / "linked"
    linked.symlink_to(folder)
    with pytest.raises(InputError, match="not a folder"):
        writer.write_all(linked, {"a.md": "x"})


def test_nothing_replaced_without_force_and_all_checked_first(tmp_path):
    folder = tmp_path / "out"
    folder.mkdir()
    (folder / "b.md").write_text("old")
    with pytest.raises(InputError, match="--force"):
        writer.write_all(folder, {"a.md": "new", "b.md": "new"})
    assert sorted(p.name for p in folder.iterdir()) == ["b.md"]  # a.md was not written first
    writer.write_all(folder, {"a.md": "new", "b.md": "new"}, force=True)
    assert (folder / "b.md").read_text() == "new"


def test_a_folder_is_replaced_whole(tmp_path):
    out = _old_folder(tmp_path)
    writer.write_all(out, NEW, force=True)
    assert _contents(out) == _expected(NEW)  # old-only.json went with the old folder
    _no_leftovers(tmp_path)


def test_the_fallback_swap_replaces_it_whole(tmp_path, monkeypatch):
    """Where renameat2(RENAME_EXCHANGE) is missing: old folder aside, new in, old removed."""
    out = _old_folder(tmp_path)
    monkeypatch.setattr(writer, "_exchange", lambda first, second: False)
    writer.write_all(out, NEW, force=True)
    assert _contents(out) == _expected(NEW)
    _no_leftovers(tmp_path)


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="renameat2 is Linux's")
def test_linux_swaps_in_one_step(tmp_path):
    first, second = tmp_path / "first", tmp_path / "second"
    first.mkdir()
    second.mkdir()
    (first / "one").write_text("1")
    assert writer._exchange(first, second)  # tmpfs and ext4 have had it since Linux 3.15
    assert [p.name for p in second.iterdir()] == ["one"] and not any(first.iterdir())


def test_someone_elses_files_are_refused_never_deleted(tmp_path):
    out = _old_folder(tmp_path)
    (out / "notes.txt").write_text("mine")
    with pytest.raises(InputError, match=r"notes\.txt: was not written by chargeplan"):
        writer.write_all(out, NEW, force=True)
    assert (out / "notes.txt").read_text() == "mine"
    (out / "notes.txt").unlink()
    (out / "sub").mkdir()
    with pytest.raises(InputError, match="sub: was not written by chargeplan"):
        writer.write_all(out, NEW, force=True)
    assert (out / "sub").is_dir()
    plain = tmp_path / "plain"
    plain.mkdir()
    (plain / "holiday.jpg").write_bytes(b"\xff\xd8")
    with pytest.raises(InputError, match=r"holiday\.jpg"):
        writer.write_all(plain, NEW, force=True)
    assert (plain / "holiday.jpg").exists()


@pytest.mark.parametrize("failure", [OSError(28, "No space left on device"),
                                     KeyboardInterrupt()], ids=["disk-full", "interrupt"])
def test_a_failure_at_any_file_leaves_the_old_folder(tmp_path, monkeypatch, failure):
    """Every file the write creates (marker, each output, manifest) in turn fails."""
    out = _old_folder(tmp_path)
    real = writer._create
    for fail_at in range(len(NEW) + 2):
        calls = []

        def create(path, data, fail_at=fail_at, calls=calls):
            calls.append(path)
            if len(calls) - 1 == fail_at:
                real(path, data[: len(data) // 2])  # half of it is on the disk
                raise failure
            real(path, data)

        monkeypatch.setattr(writer, "_create", create)
        expected = InputError if isinstance(failure, OSError) else KeyboardInterrupt
        with pytest.raises(expected):
            writer.write_all(out, NEW, force=True)
        assert len(calls) == fail_at + 1
        assert _contents(out) == _expected(OLD), fail_at
        _no_leftovers(tmp_path)


@pytest.mark.parametrize("step", ["_exchange", "rename"])
def test_a_failure_at_the_swap_leaves_the_old_folder(tmp_path, monkeypatch, step):
    out = _old_folder(tmp_path)

    def broken(*args, **kwargs):
        raise OSError(5, "Input/output error")

    if step == "rename":  # the fallback: the new folder cannot be moved in
        monkeypatch.setattr(writer, "_exchange", lambda first, second: False)
        real = os.rename

        def rename(src, dst):
            if str(src).endswith(".chargeplan-new"):
                broken()
            real(src, dst)

        monkeypatch.setattr(os, "rename", rename)
    else:
        monkeypatch.setattr(writer, "_exchange", broken)
    with pytest.raises(InputError, match="Input/output error"):
        writer.write_all(out, NEW, force=True)
    assert _contents(out) == _expected(OLD)
    _no_leftovers(tmp_path)


def test_sigterm_during_the_swap_waits_until_it_is_done(tmp_path, monkeypatch):
    out = _old_folder(tmp_path)
    real = writer._finish

    def finish(new, old):
        os.kill(os.getpid(), signal.SIGTERM)  # blocked: delivered once the swap is done
        real(new, old)

    monkeypatch.setattr(writer, "_finish", finish)
    with pytest.raises(writer.Terminated):
        writer.write_all(out, NEW, force=True)
    assert _contents(out) == _expected(NEW)
    _no_leftovers(tmp_path)
    assert signal.getsignal(signal.SIGTERM) is not None  # the previous handler is back


@pytest.mark.parametrize("umask", [0o022, 0o077, 0o002])
def test_files_and_folders_follow_the_umask(tmp_path, umask):
    previous = os.umask(umask)
    try:
        single = writer.write_atomic(tmp_path / "plan.json", "{}")
        writer.write_atomic(single, "{}", force=True)
        out = tmp_path / "out"
        writer.write_all(out, NEW)
        writer.write_all(out, NEW, force=True)
    finally:
        os.umask(previous)
    assert stat.S_IMODE(single.stat().st_mode) == 0o666 & ~umask
    assert stat.S_IMODE(out.stat().st_mode) == 0o777 & ~umask
    for path in out.iterdir():
        assert stat.S_IMODE(path.stat().st_mode) == 0o666 & ~umask, path


# What a crash (SIGKILL, power loss) can leave, and what the next write makes of it.


def _leftover(tmp_path: Path, kind: str, mark: str | None,
              files: dict[str, str | bytes]) -> Path:
    folder = tmp_path / f".out.0123456789ab.chargeplan-{kind}"
    folder.mkdir()
    for name, data in files.items():
        (folder / name).write_bytes(data.encode() if isinstance(data, str) else data)
    if mark:
        (folder / mark).write_text(folder.name)
    return folder


def test_a_staging_folder_left_by_a_crash_is_removed_and_said(tmp_path):
    out = _old_folder(tmp_path)
    _leftover(tmp_path, "new", writer.STAGING_MARK, {"a.md": "half"})
    said: list[str] = []
    writer.write_all(out, NEW, force=True, say=said.append)
    assert _contents(out) == _expected(NEW)
    _no_leftovers(tmp_path)
    assert len(said) == 1 and "removed .out.0123456789ab.chargeplan-new" in said[0]


def test_a_crash_just_after_the_exchange_is_finished(tmp_path):
    """The new folder is in place with the staging marker, which names the folder now
    holding the old files; the next run removes that one and the marker."""
    out = _old_folder(tmp_path)
    old = _leftover(tmp_path, "new", None, OLD | {writer.MANIFEST: "a.md\nb.csv\n"})
    (out / writer.STAGING_MARK).write_text(old.name)
    said: list[str] = []
    writer.write_all(out, NEW, force=True, say=said.append)
    assert _contents(out) == _expected(NEW)
    _no_leftovers(tmp_path)
    assert len(said) == 2


def test_a_folder_set_aside_by_a_crash_is_restored(tmp_path):
    """The fallback swap stopped between moving the old folder aside and the new one in."""
    out = _old_folder(tmp_path)
    aside = tmp_path / ".out.0123456789ab.chargeplan-old"
    (out / writer.ASIDE_MARK).write_text(aside.name)
    out.rename(aside)
    staging = _leftover(tmp_path, "new", writer.STAGING_MARK, NEW)
    said: list[str] = []
    with pytest.raises(InputError, match="--force"):  # restored, and then it exists
        writer.write_all(out, NEW, say=said.append)
    assert _contents(out) == _expected(OLD)
    assert not staging.exists() and not aside.exists()
    assert any("restored" in line for line in said)


def test_a_lookalike_folder_that_is_not_marked_is_left_alone(tmp_path):
    out = _old_folder(tmp_path)
    foreign = _leftover(tmp_path, "new", None, {"thesis.tex": "years of work"})
    said: list[str] = []
    writer.write_all(out, NEW, force=True, say=said.append)
    assert (foreign / "thesis.tex").read_text() == "years of work" and said == []


# Real processes: a file-size limit (a full disk) and real signals.

_SLOW_CHILD = textwrap.dedent("""
    import sys, time
    import chargeplan.render.write as w
    real = w._create
    def slow(path, data):
        real(path, data)
        time.sleep(0.1)
    w._create = slow
    sys.argv = ["chargeplan", *sys.argv[1:]]
    from chargeplan.__main__ import run
    run()
""")


def _storage_args(out: Path) -> list[str]:
    return ["storage", str(CORPUS / "storage" / "good-site.yaml"), "-o", str(out), "--force"]


def _folder_state(out: Path, old: dict[str, bytes], new: dict[str, bytes]) -> str:
    found = _contents(out)
    assert found in (old, new), sorted(found)
    return "old" if found == old else "new"


def test_a_file_size_limit_leaves_the_old_folder(tmp_path):
    """RLIMIT_FSIZE (16 KiB) stands in for a full disk: the write fails (EFBIG) with exit 2,
    and the old folder is left whole."""
    resource = pytest.importorskip("resource")
    out = _old_folder(tmp_path)
    big = {f"file-{i}.md": "x" * 6000 for i in range(4)} | {"big.csv": "y" * 40_000}

    def limit() -> None:
        resource.setrlimit(resource.RLIMIT_FSIZE, (16 * 1024, 16 * 1024))

    code = ("import sys; from chargeplan.render.write import write_all\n"
            "from chargeplan.errors import InputError\n"
            f"try: write_all({str(out)!r}, {big!r}, force=True)\n"
            "except InputError as e: print(e, file=sys.stderr); sys.exit(2)\n")
    done = subprocess.run([sys.executable, "-c", code], preexec_fn=limit, timeout=60,
                          capture_output=True, text=True)
    assert done.returncode == 2, done.stderr
    assert "File too large" in done.stderr
    assert _contents(out) == _expected(OLD)
    _no_leftovers(tmp_path)


def test_the_cli_under_a_file_size_limit(tmp_path):
    resource = pytest.importorskip("resource")
    out = tmp_path / "out"
    first = subprocess.run([sys.executable, "-m", "chargeplan", *_storage_args(out)],
                           timeout=60, capture_output=True, text=True)
    assert first.returncode == 0, first.stderr
    old = _contents(out)

    def limit() -> None:
        resource.setrlimit(resource.RLIMIT_FSIZE, (1024, 1024))  # smaller than procedure.md

    done = subprocess.run([sys.executable, "-m", "chargeplan", *_storage_args(out)],
                          preexec_fn=limit, timeout=60, capture_output=True, text=True)
    assert done.returncode == 2, done.stderr
    assert done.stderr.startswith(f"error: {out}: cannot write it (File too large)")
    assert _contents(out) == old
    _no_leftovers(tmp_path)


@pytest.mark.parametrize("signum", [signal.SIGINT, signal.SIGTERM], ids=["SIGINT", "SIGTERM"])
def test_a_signal_at_any_moment_leaves_one_whole_folder(tmp_path, signum):
    """The CLI writes a storage folder slowly (0.1 s a file); the signal comes at moments of
    the write. Each time: the old folder or the new one, whole, and nothing else beside it,
    and the process ends as the signal says. (A signal during the swap itself is held back
    until the swap is done: test_sigterm_during_the_swap_waits_until_it_is_done.)"""
    out = tmp_path / "out"
    old = {"procedure.md": b"old\n"}
    seen = set()
    for delay in (0.05, 0.4):
        writer.write_all(out, {k: v.decode() for k, v in old.items()}, force=True)
        before = _contents(out)
        child = subprocess.Popen([sys.executable, "-c", _SLOW_CHILD, *_storage_args(out)],
                                 stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
        deadline = time.monotonic() + 30
        while not any(p.name.endswith(".chargeplan-new") for p in tmp_path.iterdir()):
            assert child.poll() is None and time.monotonic() < deadline, child.stderr.read()
            time.sleep(0.005)
        time.sleep(delay)
        child.send_signal(signum)
        _, err = child.communicate(timeout=30)
        assert "Traceback" not in err, err
        new_names = {"procedure.md", "procedure.html", "schedule.csv", "calendar.ics",
                     writer.MANIFEST}
        found = _contents(out)
        if found != before:
            assert set(found) == new_names, sorted(found)
            assert child.returncode in (0, 128 + signum, -signum, 1), child.returncode
            seen.add("new")
        else:
            assert child.returncode in (128 + signum, -signum, 1), (child.returncode, err)
            seen.add("old")
        _no_leftovers(tmp_path)
    assert "old" in seen, seen  # the early signals caught the write before its swap


# Output cannot be turned against its reader: CSV cells guarded against spreadsheet formulas
# (OWASP "CSV Injection"), user text in Markdown shown as written (checked with markdown-it-py,
# a CommonMark renderer, with raw HTML switched on as most Markdown viewers have it).

HOSTILE = ['=HYPERLINK("http://example.invalid/x","open me")', "+SUM(1+1)", "@cmd",
           "-2+3+cmd|' /C calc'!A0", "\tTAB", "=1+1"]


def _write_inventory(path: Path, ids: list[str], owners: list[str]) -> None:
    import csv

    with path.open("w", newline="") as handle:
        out = csv.writer(handle)
        out.writerow(["id", "owner", "chemistry", "nominal_voltage", "capacity",
                      "state_of_charge", "bay"])
        for i, (battery, owner) in enumerate(zip(ids, owners, strict=True)):
            out.writerow([battery, owner, "agm", "12 V", f"{40 + i} Ah", "85 %", "shed"])


def test_formula_like_ids_are_guarded_in_the_csv_and_read_back_as_they_are(tmp_path):
    from typer.testing import CliRunner

    from chargeplan.cli import app
    from chargeplan.csvfile import csv_reader, csv_rows

    owners = [*HOSTILE[1:], "-5.5"]
    inventory = tmp_path / "inventory.csv"
    _write_inventory(inventory, HOSTILE, owners)
    out = tmp_path / "out"
    result = CliRunner().invoke(app, ["storage", str(CORPUS / "storage" / "good-site.yaml"),
                                      "--inventory", str(inventory), "-o", str(out)])
    assert result.exit_code == 0, result.stderr
    raw = (out / "schedule.csv").read_text()
    assert "'=HYPERLINK(" in raw and ",'+SUM(1+1)," in raw and "'@cmd" in raw
    assert "'-2+3+cmd|" in raw and ",-5.5," in raw  # a plain number stays a number
    shown, reader = csv_reader(out / "schedule.csv")
    errors: list[str] = []
    rows = [data for _, data in csv_rows(reader, shown, errors)]
    assert not errors
    first_round = [r for r in rows if r["battery"] != "C-1"][: len(HOSTILE)]  # C-1: the site's
    assert [r["battery"] for r in first_round] == [h.strip() for h in HOSTILE]
    assert [r["owner"] for r in first_round] == [o.strip() for o in owners]


def test_simulate_csv_goes_through_the_guard(tmp_path):
    from chargeplan.simulation import simulate_file

    text = simulate_file(CORPUS / "battery" / "good-battery.yaml").csv()
    assert text.splitlines()[0] == "time_s,stage,voltage_V,current_A,state_of_charge_pct"
    assert not any(line.startswith("'") for line in text.splitlines())  # numbers stay numbers


def _html_of(markdown: str) -> str:
    from markdown_it import MarkdownIt

    return MarkdownIt("commonmark", {"html": True}).enable("table").render(markdown)


SCRIPT = "<script>alert(1)</script>"
IMAGE = '<img src=x onerror="alert(2)">'
LINK = "[open](javascript:alert(3))"


def _assert_inert(markdown: str, text: str) -> None:
    html = _html_of(markdown)
    assert "<script" not in html and "<img" not in html, html
    assert 'href="javascript' not in html, html
    assert text in html, html  # shown to the reader, as text


def test_plan_markdown_shows_html_in_a_name_as_text(tmp_path):
    from ruamel.yaml import YAML

    from chargeplan.api import plan_file
    from chargeplan.render.document import render_markdown

    data = YAML(typ="safe").load((CORPUS / "battery" / "good-battery.yaml").read_text())
    data["battery"]["name"] = f"{SCRIPT} | {IMAGE} {LINK}"
    path = tmp_path / "b.json"
    import json

    path.write_text(json.dumps(data))
    markdown = render_markdown(plan_file(path), explain=True)
    _assert_inert(markdown, "&lt;script&gt;alert(1)&lt;/script&gt; | &lt;img")


def test_bench_and_storage_markdown_show_html_as_text(tmp_path):
    from typer.testing import CliRunner

    from chargeplan.cli import app

    site = (CORPUS / "storage" / "good-site.yaml").read_text()
    site = site.replace("name: Corpus shed", f"name: '{SCRIPT} {LINK}'")
    site = site.replace("id: C-1", f"id: '{IMAGE} | x'")
    (tmp_path / "site.yaml").write_text(site)
    out = tmp_path / "storage"
    result = CliRunner().invoke(app, ["storage", str(tmp_path / "site.yaml"), "-o", str(out)])
    assert result.exit_code == 0, result.stderr
    _assert_inert((out / "procedure.md").read_text(), "&lt;script&gt;")
    bench = (CORPUS / "bench" / "good-bench.yaml").read_text()
    bench = bench.replace("{name: A,", "{name: '```\n  ``` <script>alert(1)</script> |',")
    bench = bench.replace("id: mower-3", f"id: '{IMAGE} {LINK}'")
    (tmp_path / "bench.yaml").write_text(bench)
    out = tmp_path / "bench"
    result = CliRunner().invoke(app, ["bench", str(tmp_path / "bench.yaml"), "-o", str(out)])
    assert result.exit_code == 0, result.stderr
    _assert_inert((out / "bench.md").read_text(), "&lt;img")


def test_md_text_shows_any_text_as_written():
    """Whatever the text, CommonMark renders md_text of it as exactly that text."""
    import html

    from hypothesis import given, settings
    from hypothesis import strategies as st

    from chargeplan.render.markdown import md_text

    alphabet = st.sampled_from([*"ab1 <>&\"'|\\`*_[]()!#~=+-.:/;{}", "&amp;", "&#60;"])

    @settings(max_examples=300, deadline=None)
    @given(st.lists(alphabet, max_size=30).map("".join))
    def check(text: str) -> None:
        rendered = _html_of(f"x {md_text(text)} x")
        inner = rendered.strip().removeprefix("<p>").removesuffix("</p>")
        assert " ".join(html.unescape(inner).split()) == " ".join(f"x {text} x".split()), rendered

    check()


def test_md_code_block_cannot_be_closed_early():
    from chargeplan.render.markdown import md_code_block

    text = "a ```\n  ```\n<b>bold</b> ````"
    html = _html_of(md_code_block(text) + "\n\nafter")
    assert html.count("<pre>") == 1 and "&lt;b&gt;bold" in html and "<p>after</p>" in html


def test_missing_parents_are_made_and_a_file_in_the_path_is_refused(tmp_path):
    out = tmp_path / "reports" / "2026" / "winter"
    writer.write_all(out, NEW)
    assert _contents(out) == _expected(NEW)
    (tmp_path / "plain").write_text("a file")
    with pytest.raises(InputError, match="a part of its path is a file"):
        writer.write_all(tmp_path / "plain" / "out", NEW)


def test_a_fifo_in_place_of_the_list_is_refused_not_read(tmp_path):
    out = _old_folder(tmp_path)
    (out / writer.MANIFEST).unlink()
    os.mkfifo(out / writer.MANIFEST)
    with pytest.raises(InputError, match=r"\.chargeplan-files: was not written by chargeplan"):
        writer.write_all(out, NEW, force=True)


def test_a_written_row_is_guarded_cell_for_cell_and_reads_back():
    """csv_row (inlined for speed) writes what csv_cell gives each cell (OWASP "CSV
    Injection": a cell a spreadsheet would run as a formula gets a leading apostrophe; a
    plain number is left alone), and csv_unguard gives the text back."""
    import csv
    import io

    from hypothesis import given
    from hypothesis import strategies as st

    from chargeplan.csvfile import csv_cell, csv_row, csv_unguard

    cells = st.lists(st.one_of(st.none(), st.integers(), st.floats(allow_nan=False),
                               st.text(alphabet="=+-@\t\r'.e0123456789 ax|(", max_size=8)),
                     max_size=6)

    @given(cells)
    def check(row):
        mine, theirs = io.StringIO(), io.StringIO()
        csv_row(csv.writer(mine), row)
        csv.writer(theirs).writerow([csv_cell(c) for c in row])
        assert mine.getvalue() == theirs.getvalue()
        back = next(csv.reader(io.StringIO(mine.getvalue()), strict=True)) if row else []
        assert [csv_unguard(c) for c in back] == ["" if c is None else str(c) for c in row]

    check()


def test_fields_joined_are_the_row_csv_row_writes():
    """csv_fields (each distinct cell of a table guarded and quoted once) gives the fields
    csv_row writes: joined with commas, a row of two cells or more is the writer's line."""
    import csv
    import io

    from hypothesis import given
    from hypothesis import strategies as st

    from chargeplan.csvfile import csv_fields, csv_row

    cells = st.lists(st.one_of(st.none(), st.integers(), st.floats(),
                               st.text(alphabet="=+-@\t\r\n'\",.e0123456789 ax|(", max_size=8),
                               st.text(max_size=4)),
                     min_size=2, max_size=6)

    @given(cells)
    def check(row):
        out = io.StringIO()
        csv_row(csv.writer(out, lineterminator="\n"), row)
        assert ",".join(csv_fields(row)) + "\n" == out.getvalue()

    check()


def test_makers_are_called_once_in_order_while_the_file_before_is_written(tmp_path):
    # write_all takes a function in place of a file's contents: the command line makes a
    # file while the file before it is written (render.write._create_each)
    out = tmp_path / "out"
    made: list[str] = []

    def maker(name: str, data: str | bytes):
        def make():
            made.append(name)
            return data
        return make

    writer.write_all(out, {name: maker(name, data) for name, data in NEW.items()})
    assert made == list(NEW)
    assert _contents(out) == _expected(NEW)


@pytest.mark.parametrize("at", range(len(NEW)))
def test_a_maker_that_fails_leaves_the_old_folder(tmp_path, at):
    out = _old_folder(tmp_path)
    files: dict[str, object] = dict(NEW)
    name = list(NEW)[at]

    def broken():
        raise InputError("cannot be made", file="x", fix="none")

    files[name] = broken
    with pytest.raises(InputError, match="cannot be made"):
        writer.write_all(out, files, force=True)
    assert _contents(out) == _expected(OLD)
    _no_leftovers(tmp_path)
