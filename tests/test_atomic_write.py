"""Saving keeps what a user expects of a file: its mode, its symbolic link, a long name, and no
temporary files left behind even by a save that was killed."""
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

from layerloom import Design, load, save
from layerloom.core import atomic_write

ROOT = Path(__file__).resolve().parents[1]


def _design(notes: str = "") -> Design:
    d = Design("door-camera", notes=notes)
    d.add("Output", d.add("ReLU", d.input(3, 16, 16)))
    return d


def _mode(path) -> int:
    return stat.S_IMODE(os.stat(path).st_mode)


def test_replacing_a_file_keeps_its_mode(tmp_path):
    path = tmp_path / "shared.loom"
    save(_design(), path)
    for mode in (0o644, 0o640, 0o604):
        os.chmod(path, mode)
        save(_design("again"), path)
        assert _mode(path) == mode


def test_a_new_file_gets_the_umask(tmp_path):
    for umask, mode in ((0o027, 0o640), (0o022, 0o644), (0o077, 0o600)):
        old = os.umask(umask)
        try:
            save(_design(), tmp_path / f"new_{umask:o}.loom")
        finally:
            os.umask(old)
        assert _mode(tmp_path / f"new_{umask:o}.loom") == mode


def test_saving_through_a_symbolic_link_writes_the_target(tmp_path):
    (tmp_path / "real").mkdir()
    target = tmp_path / "real" / "design.loom"
    save(_design(), target)
    link = tmp_path / "link.loom"
    link.symlink_to(target)
    save(_design("through the link"), link)
    assert link.is_symlink() and os.readlink(link) == str(target)
    assert load(target).notes == "through the link"
    assert sorted(os.listdir(tmp_path / "real")) == ["design.loom"]


def test_a_251_byte_name_can_be_saved(tmp_path):
    name = "n" * 246 + ".loom"  # 251 bytes: legal on every common file system (limit 255)
    assert len(name.encode()) == 251
    save(_design("long"), tmp_path / name)
    assert load(tmp_path / name).notes == "long"
    assert os.listdir(tmp_path) == [name]


def test_an_invalid_text_fails_before_anything_is_written(tmp_path):
    path = tmp_path / "d.loom"
    save(_design("first"), path)
    d = _design()
    d.notes = "\ud800"  # bypasses the edit check, as a bug elsewhere might
    with pytest.raises(UnicodeEncodeError):
        save(d, path)
    assert load(path).notes == "first" and os.listdir(tmp_path) == ["d.loom"]


def test_the_folder_is_synced_after_the_rename(tmp_path, monkeypatch):
    synced = []
    real_fsync = os.fsync

    def fsync(fd):
        synced.append(stat.S_ISDIR(os.fstat(fd).st_mode))
        real_fsync(fd)

    monkeypatch.setattr(atomic_write.os, "fsync", fsync)
    save(_design(), tmp_path / "d.loom")
    assert synced == [False, True]  # the file, then its folder


def test_a_save_killed_midway_leaves_a_temporary_file_that_the_next_save_removes(tmp_path):
    path = tmp_path / "d.loom"
    save(_design("old"), path)
    script = textwrap.dedent(f"""
        import os, sys, time
        from layerloom import Design, save
        from layerloom.core import atomic_write
        def stall(*args):
            print("writing", flush=True)
            time.sleep(60)
        atomic_write.os.replace = stall
        d = Design("killed")
        d.add("Output", d.input(3, 8, 8))
        save(d, {str(path)!r})
    """)
    child = subprocess.Popen([sys.executable, "-c", script], stdout=subprocess.PIPE, text=True,
                             env={**os.environ, "PYTHONPATH": str(ROOT / "src")})
    assert child.stdout.readline().strip() == "writing"
    child.send_signal(signal.SIGKILL)
    child.wait()
    left = [n for n in os.listdir(tmp_path) if n != "d.loom"]
    assert len(left) == 1 and len(left[0]) < 40  # the killed save's temporary file, short-named
    assert load(path).notes == "old"
    save(_design("new"), path)
    assert os.listdir(tmp_path) == ["d.loom"] and load(path).notes == "new"


def test_a_temporary_file_of_a_running_save_is_left_alone(tmp_path):
    path = tmp_path / "d.loom"
    key = atomic_write._key(path.name)
    sleeper = subprocess.Popen([sys.executable, "-c", "import time; time.sleep(30)"])
    try:
        busy = tmp_path / f"{atomic_write.PREFIX}{key}-{sleeper.pid}-abc123{atomic_write.SUFFIX}"
        busy.write_text("in progress")
        other = tmp_path / f"{atomic_write.PREFIX}00000000-1-abc123{atomic_write.SUFFIX}"  # another file's
        other.write_text("not ours")
        save(_design(), path)
        assert busy.exists() and other.exists()
        old = time.time() - atomic_write.STALE_AFTER_S - 10
        os.utime(busy, (old, old))
        save(_design(), path)
        assert not busy.exists() and other.exists()
    finally:
        sleeper.kill()
        sleeper.wait()
