"""Atomic writes: all or nothing, no temporary files left behind."""

from __future__ import annotations

import errno
import os
import stat
import sys

import pytest

from calcbuilder.calc import atomic
from calcbuilder.calc.atomic import FileWriteError, atomic_write_bytes, atomic_write_text

posix_only = pytest.mark.skipif(sys.platform == "win32", reason="POSIX permission bits")


def _listing(folder):
    return sorted(p.name for p in folder.iterdir())


def test_writes_new_file(tmp_path):
    target = tmp_path / "a.calc.json"
    assert atomic_write_bytes(target, b"abc") == target
    assert target.read_bytes() == b"abc"
    assert _listing(tmp_path) == ["a.calc.json"]


def test_replaces_existing_file(tmp_path):
    target = tmp_path / "a.txt"
    target.write_bytes(b"old content")
    atomic_write_text(target, "new µ\r\nline")
    assert target.read_bytes() == "new µ\r\nline".encode()  # no newline translation
    assert _listing(tmp_path) == ["a.txt"]


@posix_only
def test_modes(tmp_path):
    secret = atomic_write_bytes(tmp_path / "k.key", b"s", mode=0o600)
    assert stat.S_IMODE(secret.stat().st_mode) == 0o600
    shared = tmp_path / "shared.txt"
    shared.write_bytes(b"x")
    os.chmod(shared, 0o640)
    atomic_write_bytes(shared, b"y")
    assert stat.S_IMODE(shared.stat().st_mode) == 0o640  # a replaced file keeps its mode


def _fail(*args, **kwargs):
    raise OSError(errno.EIO, "Input/output error")


@pytest.mark.parametrize("step", ["replace", "fsync"])
def test_failure_leaves_original_and_no_temp_file(tmp_path, monkeypatch, step):
    target = tmp_path / "a.calc.json"
    target.write_bytes(b"original")
    monkeypatch.setattr(atomic.os, step, _fail)
    with pytest.raises(FileWriteError) as info:
        atomic_write_bytes(target, b"new")
    assert str(target) in str(info.value)
    assert "unchanged" in str(info.value)
    assert target.read_bytes() == b"original"
    assert _listing(tmp_path) == ["a.calc.json"]


class _HalfWriter:
    """Stands in for the temporary file: writes 3 bytes, then the disk is full."""

    def __init__(self, fd, mode, closefd):
        assert (mode, closefd) == ("wb", True)
        self.fd = fd

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        os.close(self.fd)

    def write(self, data):
        os.write(self.fd, data[:3])
        raise OSError(errno.ENOSPC, "No space left on device")


def test_failure_mid_write_leaves_original(tmp_path, monkeypatch):
    target = tmp_path / "a.txt"
    target.write_bytes(b"original")
    monkeypatch.setattr(atomic, "open", _HalfWriter, raising=False)
    with pytest.raises(FileWriteError, match="No space left"):
        atomic_write_bytes(target, b"new content")
    assert target.read_bytes() == b"original"
    assert _listing(tmp_path) == ["a.txt"]


def test_interrupt_leaves_no_temp_file(tmp_path, monkeypatch):
    target = tmp_path / "a.txt"
    target.write_bytes(b"original")

    def interrupt(*args):
        raise KeyboardInterrupt

    monkeypatch.setattr(atomic.os, "replace", interrupt)
    with pytest.raises(KeyboardInterrupt):
        atomic_write_bytes(target, b"new")
    assert target.read_bytes() == b"original"
    assert _listing(tmp_path) == ["a.txt"]


def test_no_overwrite(tmp_path):
    target = tmp_path / "k.pub"
    atomic_write_bytes(target, b"first", overwrite=False)
    with pytest.raises(FileWriteError, match="already exists"):
        atomic_write_bytes(target, b"second", overwrite=False)
    assert target.read_bytes() == b"first"
    assert _listing(tmp_path) == ["k.pub"]


def test_no_overwrite_without_hard_links(tmp_path, monkeypatch):
    def no_links(*args):
        raise OSError(errno.EPERM, "Operation not permitted")

    monkeypatch.setattr(atomic.os, "link", no_links)
    target = tmp_path / "k.pub"
    atomic_write_bytes(target, b"first", overwrite=False)
    assert target.read_bytes() == b"first"
    assert _listing(tmp_path) == ["k.pub"]


def test_missing_folder_is_one_clear_error(tmp_path):
    target = tmp_path / "no" / "such" / "a.json"
    with pytest.raises(FileWriteError, match="folder does not exist") as info:
        atomic_write_bytes(target, b"x")
    assert str(target) in str(info.value)
