"""The console entry point ends quietly when the reader closes the pipe early."""

import pytest

from dampctl import cli


def test_broken_pipe_ends_without_traceback(monkeypatch, tmp_path):
    def closed_pipe():
        raise BrokenPipeError

    sink = open(tmp_path / "out.txt", "w")  # a real descriptor for dup2
    monkeypatch.setattr(cli, "main", closed_pipe)
    monkeypatch.setattr(cli.sys, "stdout", sink)
    with pytest.raises(SystemExit) as ended:
        cli.entry_point()
    sink.close()
    assert ended.value.code == 1
