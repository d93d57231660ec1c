"""Atomic output: no overwrite without force, nothing half-written, ordinary permissions."""

import os
import stat

import pytest

from surfgeo.errors import InputError, OutputExistsError
from surfgeo.io import atomic_output, dump_json, write_text


def test_refuses_to_overwrite_without_force(tmp_path):
    target = tmp_path / "out.txt"
    target.write_text("old")
    with pytest.raises(OutputExistsError):
        write_text(target, "new")
    assert target.read_text() == "old"
    write_text(target, "new", force=True)
    assert target.read_text() == "new"


def test_failure_leaves_nothing_behind(tmp_path):
    target = tmp_path / "out.extxyz"
    with pytest.raises(RuntimeError), atomic_output(target) as tmp:
        assert tmp.suffix == ".extxyz"  # writers that pick a format from the ending still work
        tmp.write_text("partial")
        raise RuntimeError("writer failed")
    assert list(tmp_path.iterdir()) == []


def test_written_files_get_umask_permissions(tmp_path):
    target = tmp_path / "out.json"
    dump_json({"a": 1}, target)
    mode = stat.S_IMODE(os.stat(target).st_mode)
    mask = os.umask(0)
    os.umask(mask)
    assert mode == 0o666 & ~mask


def test_missing_folder_is_a_user_error(tmp_path):
    with pytest.raises(InputError):
        write_text(tmp_path / "no" / "such" / "file.txt", "x")
