"""One error path for every command (scan.cli.main, scan.cli.failure): a user-side failure
is one line and exit 2; a bug is exit 1, one line naming the log file that holds the
traceback, and no traceback on the screen."""
from __future__ import annotations

import errno
import tempfile

import pytest

import scan.cli.summary as summary_cli
from scan.cli import main
from scan.cli.failure import LOG_DIR_VARIABLE


def _raising(exc: BaseException):
    def run(args):
        raise exc
    return run


def _lines(capsys) -> list[str]:
    return capsys.readouterr().err.strip().splitlines()


def test_internal_error_is_one_line_and_a_log_file(tmp_path, capsys, monkeypatch):
    monkeypatch.setenv(LOG_DIR_VARIABLE, str(tmp_path / "logs"))
    monkeypatch.setattr(summary_cli, "run", _raising(ValueError("boom in the summary")))
    assert main(["summary", "somewhere"]) == 1
    (line,) = _lines(capsys)
    assert "internal error" in line and "ValueError: boom in the summary" in line
    assert "report it" in line and "Traceback" not in line
    (log,) = (tmp_path / "logs").iterdir()
    assert str(log) in line
    text = log.read_text()
    assert "Traceback (most recent call last)" in text and "boom in the summary" in text
    assert "command: zetascan summary somewhere" in text


def test_unwritable_log_folder_falls_back_to_the_temporary_folder(tmp_path, capsys,
                                                                 monkeypatch):
    blocker = tmp_path / "file"
    blocker.write_text("not a folder")
    monkeypatch.setenv(LOG_DIR_VARIABLE, str(blocker / "logs"))
    monkeypatch.setenv("TMPDIR", str(tmp_path / "tmp"))
    (tmp_path / "tmp").mkdir()
    monkeypatch.setattr(tempfile, "tempdir", None)  # re-read TMPDIR
    monkeypatch.setattr(summary_cli, "run", _raising(KeyError("x")))
    assert main(["summary", "r"]) == 1
    (line,) = _lines(capsys)
    (log,) = (tmp_path / "tmp").iterdir()
    assert str(log) in line


@pytest.mark.parametrize("exc, words", [
    (OSError(errno.ENOSPC, "No space left on device", "/data/run/chain.h5"),
     ["/data/run/chain.h5", "no space left on device", "resumes"]),
    (OSError(errno.EROFS, "Read-only file system", "/ro/x.h5"),
     ["/ro/x.h5", "read-only file system", "run.output_dir"]),
    (OSError(errno.ENOSPC, "Unable to synchronously create file (file write failed: "
             "filename = '/full/.x.h5.tmp-1', errno = 28)"), ["/full/.x.h5.tmp-1"]),
    (FileNotFoundError(errno.ENOENT, "No such file or directory", "in.csv"), ["in.csv"]),
    (MemoryError(), ["out of memory", "smaller"]),
])
def test_user_side_os_failures_are_one_line_exit_2(capsys, monkeypatch, exc, words):
    monkeypatch.setattr(summary_cli, "run", _raising(exc))
    assert main(["summary", "r"]) == 2
    (line,) = _lines(capsys)
    assert line.startswith("zetascan summary: error: ")
    for word in words:
        assert word in line
