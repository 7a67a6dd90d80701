"""Atomic output never leaves half-written files nor destroys earlier ones."""

import pytest

from flatcheck.errors import OutputError
from flatcheck.io import atomic_path, write_text_atomic


def test_failure_keeps_previous_file(tmp_path):
    p = tmp_path / "result.csv"
    p.write_text("previous\n")
    with pytest.raises(RuntimeError):
        with atomic_path(p) as tmp:
            tmp.write_text("half")
            raise RuntimeError("boom")
    assert p.read_text() == "previous\n"
    assert [f.name for f in tmp_path.iterdir()] == ["result.csv"]  # no temporary left behind


def test_success_replaces(tmp_path):
    p = tmp_path / "result.csv"
    p.write_text("previous\n")
    write_text_atomic(p, "new\n")
    assert p.read_text() == "new\n"


def test_missing_folder(tmp_path):
    with pytest.raises(OutputError, match="does not exist"):
        write_text_atomic(tmp_path / "nope" / "x.txt", "x")


def test_data_reaches_the_disk_before_the_rename_and_the_rename_after(tmp_path, monkeypatch):
    # A file system may commit a rename before the data of the renamed file (ext4 with delalloc, XFS): after a
    # power cut the destination would exist but be empty. So the temporary file is fsynced before os.replace,
    # and on POSIX the folder after it (fsync(2), "calling fsync() on a file descriptor for the directory" is
    # needed to make the entry durable; POSIX.1-2008).
    import os
    import stat

    events = []
    real_fsync, real_replace = os.fsync, os.replace

    def fsync(fd):
        st = os.fstat(fd)
        kind = "folder" if stat.S_ISDIR(st.st_mode) else "file"
        size = st.st_size if kind == "file" else None
        events.append(("fsync", kind, size))
        return real_fsync(fd)

    def replace(a, b):
        events.append(("replace", os.path.basename(b), None))
        return real_replace(a, b)

    monkeypatch.setattr(os, "fsync", fsync)
    monkeypatch.setattr(os, "replace", replace)
    p = tmp_path / "plate.toml"
    write_text_atomic(p, "readings = [1.4]\n")
    assert p.read_text() == "readings = [1.4]\n"
    expected = [("fsync", "file", len("readings = [1.4]\n")), ("replace", "plate.toml", None)]
    if os.name == "posix":
        expected.append(("fsync", "folder", None))
    assert events == expected
