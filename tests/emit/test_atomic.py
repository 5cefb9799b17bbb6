"""Atomic outputs: a finished file or the earlier one, never half of one; usual file modes."""

from __future__ import annotations

import os
from pathlib import Path

import pytest

from driftline.emit.atomic import write_output
from driftline.errors import OutputError


def test_new_file_gets_umask_mode_and_overwrite_keeps_mode(tmp_path: Path):
    target = tmp_path / "r.json"
    umask = os.umask(0o022)
    try:
        write_output(str(target), "one")
        # common practice (POSIX creat): a new file is 0666 less the umask
        assert target.stat().st_mode & 0o777 == 0o644
        target.chmod(0o640)
        write_output(str(target), "two")
        assert (target.read_text(), target.stat().st_mode & 0o777) == ("two", 0o640)
    finally:
        os.umask(umask)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["r.json"]  # no temporary left behind


def test_missing_folder_is_a_clear_error(tmp_path: Path):
    with pytest.raises(OutputError, match="does not exist"):
        write_output(str(tmp_path / "nope" / "r.json"), "x")
