"""Output-location errors are the user's (issue 17, item 4): one line, exit 2, earlier files kept.

docs/errors.md reserves exit 1 for bugs; every OS error on the output path (disk full, a
file-size limit, a read-only file system, a path through a file, odd locations) is a
`damper: error:` line with exit 2 and no traceback. A full disk and a read-only file system
are simulated: by a file-size limit (``RLIMIT_FSIZE``, a real OS limit), by the OS refusing
writes in a directory without write permission (when the tests do not run as root, who may
write anywhere), else by making ``os.open`` fail the way a read-only file system does.
"""

import errno
import json
import os
import subprocess
import sys

import pytest

from damper.cli import main

from .conftest import ROOT
from .test_run_directory import ONE


@pytest.fixture
def one_case(tmp_path):
    path = tmp_path / "one.yaml"
    path.write_text(ONE, encoding="utf-8")
    return str(path)


def _one_error_line(err):
    lines = [ln for ln in err.strip().splitlines() if ln]
    assert "Traceback" not in err and "internal error" not in err
    assert lines and lines[0].startswith("damper: error: ")
    assert sum(ln.startswith("damper: error:") for ln in lines) == 1
    assert all(ln.startswith(("damper: error:", "damper: note:", "damper: warning:")) for ln in lines), lines
    return lines[0]


def test_a_file_size_limit_is_an_error_of_the_output_location(tmp_path, one_case):
    import resource

    out = tmp_path / "run"

    def limit():  # 50 kB: design.json (about 9 kB) fits, a response table (about 200 kB) does not
        resource.setrlimit(resource.RLIMIT_FSIZE, (50_000, 50_000))

    proc = subprocess.run([sys.executable, "-m", "damper", "design", one_case, "--out", str(out), "--no-plots",
                           "--quiet"], cwd=ROOT, capture_output=True, text=True, timeout=120, preexec_fn=limit)
    assert proc.returncode == 2, proc.stderr
    line = _one_error_line(proc.stderr)
    assert "response-01-only-one-1-doublet.csv: cannot write" in line and "file-size limit" in line
    assert "the files written before it are kept" in line
    # the earlier file is intact and accounted for: an incomplete run that --force can replace
    doc = json.loads((out / "design.json").read_text())
    assert doc["conditions"][0]["name"] == "only-one"
    assert not any(n.startswith(".tmp-") for n in os.listdir(out))
    assert main(["design", one_case, "--out", str(out), "--no-plots", "--force"]) == 0


def _read_only_case(monkeypatch, directory):
    """Make `directory` refuse writes: by its mode, or (as root) as a read-only file system would."""
    directory.mkdir()
    if os.geteuid() != 0:
        directory.chmod(0o555)
        return
    real_open, real_mkdir = os.open, os.mkdir
    base = str(directory)

    def inside(path):
        return os.path.abspath(os.fspath(path)).startswith(base + os.sep)

    def ro_open(path, flags, *a, **k):
        if inside(path) and flags & (os.O_WRONLY | os.O_RDWR | os.O_CREAT):
            raise OSError(errno.EROFS, os.strerror(errno.EROFS), os.fspath(path))
        return real_open(path, flags, *a, **k)

    def ro_mkdir(path, *a, **k):
        if inside(path):
            raise OSError(errno.EROFS, os.strerror(errno.EROFS), os.fspath(path))
        return real_mkdir(path, *a, **k)

    monkeypatch.setattr(os, "open", ro_open)
    monkeypatch.setattr(os, "mkdir", ro_mkdir)


def test_a_read_only_directory_is_an_error_of_the_output_location(tmp_path, one_case, monkeypatch, capsys):
    ro = tmp_path / "ro"
    _read_only_case(monkeypatch, ro)
    try:
        assert main(["design", one_case, "--out", str(ro / "run"), "--no-plots", "--quiet"]) == 2
        line = _one_error_line(capsys.readouterr().err)
        assert f"{ro / 'run'}: cannot create or lock the run directory" in line
        assert ("read-only" in line) or ("permission denied" in line)
        assert main(["design", one_case, "--out", str(ro), "--no-plots", "--quiet"]) == 2
        _one_error_line(capsys.readouterr().err)
    finally:
        ro.chmod(0o755)
    assert os.listdir(ro) == []


def test_a_full_disk_is_an_error_of_the_output_location(tmp_path, one_case, monkeypatch, capsys):
    # ENOSPC on the first file after design.json (a response table); design.json is kept
    real_write = os.write
    out = tmp_path / "run"

    def full(fd, data):
        try:
            name = os.readlink(f"/proc/self/fd/{fd}")
        except OSError:
            name = ""
        if os.path.basename(name).startswith(".tmp-") and (out / "design.json").exists():
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))
        return real_write(fd, data)

    if not os.path.isdir("/proc/self/fd"):
        pytest.skip("needs /proc/self/fd to tell which file is written")
    monkeypatch.setattr(os, "write", full)
    assert main(["design", one_case, "--out", str(out), "--no-plots", "--quiet"]) == 2
    line = _one_error_line(capsys.readouterr().err)
    assert "response-01-only-one-1-doublet.csv: cannot write: the disk is full" in line
    assert "free space or choose another output location" in line
    assert json.loads((out / "design.json").read_text())["conditions"][0]["name"] == "only-one"
    assert (out / ".damper-journal").exists()
    assert not any(n.startswith(".tmp-") for n in os.listdir(out))


@pytest.mark.parametrize(
    "where, expected",
    [
        ("", "--out is empty"),
        ("/proc/damper-test/run", "cannot create or lock the run directory"),
        ("FILE/run", "is a file, not a directory"),
        ("FILE", "exists and is not a directory"),
    ],
)
def test_odd_output_locations_are_one_line_and_exit_2(tmp_path, one_case, capsys, where, expected):
    f = tmp_path / "a-file"
    f.write_text("x", encoding="utf-8")
    where = where.replace("FILE", str(f))
    assert main(["design", one_case, "--out", where, "--no-plots", "--quiet"]) == 2
    assert expected in _one_error_line(capsys.readouterr().err)
    assert f.read_text() == "x"


def test_sweep_csv_into_a_directory_that_cannot_exist(tmp_path, capsys):
    f = tmp_path / "a-file"
    f.write_text("x", encoding="utf-8")
    demo = os.path.join(ROOT, "cases", "utility_single_aft_cg.yaml")
    assert main(["sweep", demo, "--condition", "SL-climb-fwd", "--csv", str(f / "sweep.csv"), "--quiet"]) == 2
    assert "cannot write" in _one_error_line(capsys.readouterr().err)
