"""Writers: atomic (temp file in the same folder, fsync, rename), never through a link, never
over an existing file without --force."""

from __future__ import annotations

import os

import pytest

from chargeplan.errors import InputError
from chargeplan.render import write as writer


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
