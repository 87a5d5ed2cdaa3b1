"""The console entry point: quiet on a closed pipe, one line for a file the system refuses."""

import pytest

from dampctl.commands import cli


def test_broken_pipe_ends_without_traceback(monkeypatch, tmp_path):
    def closed_pipe():
        raise BrokenPipeError

    sink = open(tmp_path / "out.txt", "w")  # a real descriptor for dup2
    monkeypatch.setattr(cli, "main", closed_pipe)
    monkeypatch.setattr(cli.sys, "stdout", sink)
    with pytest.raises(SystemExit) as ended:
        cli.entry_point()
    sink.close()
    assert ended.value.code == 141  # 128 + SIGPIPE; never 1, which means 'not met'


def test_a_refused_file_is_one_line_and_exit_2(monkeypatch):
    import io

    from dampctl.commands import check

    def refused(args, out, err):
        raise PermissionError(13, "Permission denied", "/read-only/x.json")

    monkeypatch.setattr(check, "run", refused)
    err = io.StringIO()
    code = cli.main(["check", "plant.toml"], stdout=io.StringIO(), stderr=err)
    assert code == 2
    assert err.getvalue() == "dampctl check: error: /read-only/x.json: Permission denied\n"
