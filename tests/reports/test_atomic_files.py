"""Document files are written whole or not at all: a full disk (ENOSPC) in the middle of
a write leaves no truncated file and no temporary file, keeps an older file of the same
name, and the error names the cause and the file."""

from __future__ import annotations

import errno
import os

import pytest

from qualplan.reports import files


def _disk_fills_after(monkeypatch, n_bytes: int) -> None:
    """os.write writes `n_bytes` in all, then fails as a full disk does (ENOSPC)."""
    real = os.write
    left = {"n": n_bytes}

    def write(fd, data):
        if left["n"] <= 0:
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))
        n = real(fd, bytes(data)[: left["n"]])
        left["n"] -= n
        return n

    monkeypatch.setattr(files.os, "write", write)


def test_full_disk_leaves_no_truncated_file(tmp_path, monkeypatch):
    target = tmp_path / "SPEC-1-r1.json"
    _disk_fills_after(monkeypatch, 100)
    with pytest.raises(OSError) as err:
        files.write_atomic(target, '{"x": "' + "a" * 10_000 + '"}')
    assert err.value.errno == errno.ENOSPC and err.value.filename == str(target)
    assert "No space left" in str(err.value)
    assert list(tmp_path.iterdir()) == []


def test_full_disk_keeps_the_older_file(tmp_path, monkeypatch):
    target = tmp_path / "SPEC-1-r1.csv"
    files.write_atomic(target, "freq_hz,asd_g2_hz\n20,0.01\n")
    _disk_fills_after(monkeypatch, 10)
    with pytest.raises(OSError):
        files.write_atomic(target, "freq_hz,asd_g2_hz\n" + "20,0.02\n" * 1000)
    assert target.read_text() == "freq_hz,asd_g2_hz\n20,0.01\n"
    assert [p.name for p in tmp_path.iterdir()] == [target.name]


def test_short_writes_are_completed(tmp_path, monkeypatch):
    """os.write may write fewer bytes than asked: the rest follows."""
    real = os.write
    monkeypatch.setattr(files.os, "write", lambda fd, data: real(fd, bytes(data)[:7]))
    data = bytes(range(256)) * 40
    files.write_atomic(tmp_path / "x.pdf", data)
    assert (tmp_path / "x.pdf").read_bytes() == data
