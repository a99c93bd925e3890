"""cli/output.py: files whole or not at all, with the modes the umask gives, and unusable places as bad input."""

import errno
import os
import stat
import time

import pytest

from truepull.cli import output
from truepull.cli.output import folder_mode, write_atomic
from truepull.geometry.errors import InputError


@pytest.fixture
def umask():
    old = os.umask(0o022)
    os.umask(old)

    def set_mask(m):
        os.umask(m)

    yield set_mask
    os.umask(old)


@pytest.mark.parametrize("mask, want", [(0o022, 0o644), (0o077, 0o600), (0o002, 0o664)])
def test_written_files_follow_the_umask(tmp_path, umask, mask, want):
    umask(mask)
    write_atomic(tmp_path / "a.txt", "x")
    # POSIX open(2): a new file's mode is 0666 & ~umask
    assert stat.S_IMODE((tmp_path / "a.txt").stat().st_mode) == want
    assert output.current_umask() == mask  # read without changing it
    assert folder_mode() == 0o777 & ~mask


def test_a_path_under_a_file_is_bad_input(tmp_path):
    (tmp_path / "plain").write_text("x")
    with pytest.raises(InputError, match="cannot write"):
        write_atomic(tmp_path / "plain" / "out.csv", "data")


def test_a_full_disk_is_bad_input_and_leaves_nothing(tmp_path, monkeypatch):
    real = os.fdopen

    class Full:
        def __init__(self, fh):
            self.fh = fh

        def __enter__(self):
            return self

        def __exit__(self, *a):
            self.fh.close()

        def write(self, data):
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    monkeypatch.setattr(output.os, "fdopen", lambda fd, mode: Full(real(fd, mode)))
    with pytest.raises(InputError, match="No space left"):
        write_atomic(tmp_path / "out.csv", "data")
    assert list(tmp_path.iterdir()) == []


def test_unwritable_out_exits_2_with_one_line(tmp_path, capsys):
    from truepull.cli.main import main
    from scene_fixtures import PATH_THROUGH_BOB

    scene = tmp_path / "scene.toml"
    scene.write_text(PATH_THROUGH_BOB)
    (tmp_path / "plain").write_text("x")
    code = main(["report", str(scene), "--out", str(tmp_path / "plain" / "rep"), "--no-bias", "--no-view"])
    err = capsys.readouterr().err
    assert code == 2 and err.count("\n") == 1 and "cannot write" in err
    assert sorted(p.name for p in tmp_path.iterdir()) == ["plain", "scene.toml"]


def test_stale_build_folders_of_ours_are_cleaned(tmp_path):
    from truepull.cli.report import clean_stale_folders, STALE_AFTER

    old = time.time() - STALE_AFTER - 60
    stale = tmp_path / ".rep.tmp-abcd1234"
    fresh = tmp_path / ".rep.tmp-zyxw9876"
    other = tmp_path / ".rep.tmp-keep"  # not our exact naming (8 characters)
    mine_too = tmp_path / ".rep.old-a1b2c3d4"
    for d in (stale, fresh, other, mine_too):
        d.mkdir()
        (d / "f").write_text("x")
    for d in (stale, other, mine_too):
        os.utime(d, (old, old))
    removed = clean_stale_folders(tmp_path)
    assert sorted(p.name for p in removed) == [".rep.old-a1b2c3d4", ".rep.tmp-abcd1234"]
    assert fresh.exists() and other.exists() and not stale.exists()


def test_relative_path():
    from truepull.cli.report import relative_path

    assert relative_path("/a/b/scene.toml", "/a/reports/r1") == "../../b/scene.toml"
