"""Atomic writes: a reader sees the old file or the new one, never half a file; failures leave no temp files."""

from __future__ import annotations

import errno
import os
from pathlib import Path

import numpy as np
import pytest
import scipy.sparse as sp

from workbench.core import atomic
from workbench.core.atomic import TEMP_PREFIX, atomic_open, atomic_path, remove_stale_temps, write_bytes, write_text
from workbench.core.errors import OutputError


def _temps(folder: Path) -> list[Path]:
    return sorted(folder.rglob(f"{TEMP_PREFIX}*"))


def test_new_file_replaces_old_and_leaves_no_temp(tmp_path: Path) -> None:
    """os.replace semantics (Python docs, os.replace: atomic rename on POSIX): the target holds the new bytes."""
    target = tmp_path / "out.txt"
    target.write_text("old", encoding="utf-8")
    write_text(target, "new – ünïcode\n")
    assert target.read_text(encoding="utf-8") == "new – ünïcode\n"
    assert _temps(tmp_path) == []


def test_failure_inside_block_keeps_old_file_and_removes_temp(tmp_path: Path) -> None:
    target = tmp_path / "table.csv"
    target.write_bytes(b"previous")
    with pytest.raises(RuntimeError):
        with atomic_open(target, "wb") as handle:
            handle.write(b"half a fi")
            raise RuntimeError("crash mid-write")
    assert target.read_bytes() == b"previous"
    assert _temps(tmp_path) == []


def test_disk_full_becomes_one_line_output_error(tmp_path: Path) -> None:
    """ENOSPC (POSIX errno) raised by a writer becomes OutputError naming the file and the fix."""
    target = tmp_path / "big.bin"
    target.write_bytes(b"old")
    with pytest.raises(OutputError) as caught:
        with atomic_path(target) as tmp:
            tmp.write_bytes(b"partial")
            raise OSError(errno.ENOSPC, "No space left on device")
    message = str(caught.value)
    assert "disk is full" in message and str(target) in message and "\n" not in message
    assert target.read_bytes() == b"old"
    assert _temps(tmp_path) == []


def test_failed_rename_removes_temp(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    target = tmp_path / "x.json"

    def refuse(src: object, dst: object) -> None:
        raise OSError(errno.EACCES, "Permission denied")

    monkeypatch.setattr(atomic.os, "replace", refuse)
    with pytest.raises(OutputError, match="no permission to write"):
        write_bytes(target, b"{}")
    assert not target.exists()
    assert _temps(tmp_path) == []


def test_temp_name_keeps_suffix_for_libraries_that_add_one(tmp_path: Path) -> None:
    """scipy.sparse.save_npz appends '.npz' to names without it (SciPy docs); the temp name must end in '.npz'."""
    target = tmp_path / "de.weights.npz"
    matrix = sp.csr_matrix(np.array([[0.0, 1.5], [2.0, 0.0]]))
    with atomic_path(target) as tmp:
        assert tmp.parent == target.parent and tmp.name.endswith(target.name)
        sp.save_npz(str(tmp), matrix)
    assert (sp.load_npz(target) != matrix).nnz == 0
    assert sorted(p.name for p in tmp_path.iterdir()) == ["de.weights.npz"]


def test_writing_nothing_is_reported(tmp_path: Path) -> None:
    with pytest.raises(OutputError, match="nothing was written"):
        with atomic_path(tmp_path / "never.txt"):
            pass


def test_stale_temps_of_a_crashed_run_are_removed(tmp_path: Path) -> None:
    (tmp_path / "sub").mkdir()
    crashed = [tmp_path / f"{TEMP_PREFIX}ab12-x.csv", tmp_path / "sub" / f"{TEMP_PREFIX}cd34-y.mtx"]
    for path in crashed:
        path.write_bytes(b"half")
    keep = tmp_path / "keep.csv"
    keep.write_bytes(b"ok")
    assert sorted(remove_stale_temps(tmp_path)) == sorted(crashed)
    assert keep.exists() and _temps(tmp_path) == []


def test_file_is_durable_before_rename(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """fsync before os.replace (POSIX rename is atomic but not durable without it): the order is checked."""
    calls: list[str] = []
    real_fsync, real_replace = os.fsync, os.replace
    monkeypatch.setattr(atomic.os, "fsync", lambda fd: (calls.append("fsync"), real_fsync(fd))[1])
    monkeypatch.setattr(atomic.os, "replace", lambda a, b: (calls.append("replace"), real_replace(a, b))[1])
    write_bytes(tmp_path / "f.bin", b"data")
    assert calls[0] == "fsync" and "replace" in calls
    assert calls.index("replace") > 0


def test_deferred_dir_sync_syncs_each_folder_once_after_the_block(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """Inside deferred_dir_sync a folder is fsync-ed once, after the block, not after every rename
    (POSIX fsync on a directory makes the renames in it durable — common practice for atomic writes)."""
    synced: list[Path] = []
    monkeypatch.setattr(atomic, "_fsync_dir", lambda folder: synced.append(Path(folder)))
    (tmp_path / "sub").mkdir()
    with atomic.deferred_dir_sync():
        for number in range(3):
            write_text(tmp_path / f"a{number}.txt", "x")
            write_text(tmp_path / "sub" / f"b{number}.txt", "y")
        assert synced == []
    assert sorted(synced) == [tmp_path, tmp_path / "sub"]
    write_text(tmp_path / "after.txt", "z")
    assert synced[-1] == tmp_path and len(synced) == 3


def test_deferred_dir_sync_skips_the_syncs_when_the_block_fails(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    synced: list[Path] = []
    monkeypatch.setattr(atomic, "_fsync_dir", lambda folder: synced.append(Path(folder)))
    with pytest.raises(RuntimeError):
        with atomic.deferred_dir_sync():
            write_text(tmp_path / "a.txt", "x")
            raise RuntimeError("export cancelled")
    assert synced == []
