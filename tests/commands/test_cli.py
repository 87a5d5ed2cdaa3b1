"""The program's exit codes: 0 done, 1 not met, 2 bad input, 3 internal error, 130 interrupted;
tracebacks only with --debug or DAMPCTL_DEBUG=1."""

import io

import pytest

from dampctl.commands import check, cli
from dampctl.errors import PlantError


def _main(argv, monkeypatch=None, env=None):
    out, err = io.StringIO(), io.StringIO()
    code = cli.main(argv, stdout=out, stderr=err)
    return code, out.getvalue(), err.getvalue()


@pytest.fixture
def broken(monkeypatch):
    """check's run raises an unexpected exception (a stand-in for a dampctl bug)."""

    def run(args, out, err):
        out.write("partial\n")
        return {}["missing"]

    monkeypatch.setattr(check, "run", run)
    monkeypatch.delenv("DAMPCTL_DEBUG", raising=False)


def test_an_internal_error_is_exit_3_and_one_line(broken):
    code, _, err = _main(["check", "plant.toml"])
    assert code == 3
    assert err.count("\n") == 1 and "Traceback" not in err
    assert err.startswith("dampctl check: internal error: KeyError: 'missing'; this is a bug")
    assert "please report it" in err and "--debug" in err


@pytest.mark.parametrize("where", ["before", "after"])
def test_debug_prints_the_traceback(broken, where):
    argv = ["--debug", "check", "plant.toml"] if where == "before" else ["check", "p", "--debug"]
    code, _, err = _main(argv)
    assert code == 3
    assert "Traceback (most recent call last)" in err
    assert err.splitlines()[-1].startswith("dampctl check: internal error: KeyError")


def test_the_environment_turns_debug_on(broken, monkeypatch):
    monkeypatch.setenv("DAMPCTL_DEBUG", "1")
    code, _, err = _main(["check", "plant.toml"])
    assert code == 3 and "Traceback" in err
    monkeypatch.setenv("DAMPCTL_DEBUG", "0")
    code, _, err = _main(["check", "plant.toml"])
    assert code == 3 and "Traceback" not in err


def test_bad_input_is_exit_2_with_a_traceback_only_in_debug(monkeypatch):
    def run(args, out, err):
        raise PlantError("must be > 0, got -1.0", source="p.toml", field="modes[2].freq_hz")

    monkeypatch.setattr(check, "run", run)
    monkeypatch.delenv("DAMPCTL_DEBUG", raising=False)
    code, _, err = _main(["check", "p.toml"])
    assert (code, err) == (2, "dampctl check: error: p.toml: modes[2].freq_hz: must be > 0, "
                              "got -1.0\n")
    code, _, err = _main(["--debug", "check", "p.toml"])
    assert code == 2 and "Traceback" in err


def test_ctrl_c_is_one_line_and_exit_130(monkeypatch):
    def run(args, out, err):
        raise KeyboardInterrupt

    monkeypatch.setattr(check, "run", run)
    code, _, err = _main(["check", "p.toml"])
    assert (code, err) == (130, "dampctl check: interrupted\n")


def test_a_command_returning_something_odd_is_an_internal_error(monkeypatch):
    monkeypatch.setattr(check, "run", lambda args, out, err: None)
    code, _, err = _main(["check", "p.toml"])
    assert code == 3 and "internal error" in err


def test_usage_errors_are_exit_2():
    code, _, err = _main(["check"])
    assert code == 2 and err.startswith("dampctl check: ")
    code, _, err = _main(["nonsense"])
    assert code == 2 and "invalid choice" in err


def test_exit_codes_are_documented_in_the_help():
    text = " ".join(cli.build_parser().format_help().split())
    for code in (0, 1, 2, 3, 130):
        assert f"{code} " in text
    assert set(cli.EXIT_CODES) >= {0, 1, 2, 3, 130}


def test_out_of_memory_is_one_line_naming_command_and_size_exit_2(monkeypatch, tmp_path):
    # Issue 20 point 4: running out of memory is the size of the problem, not a bug: exit 2,
    # one line naming the command and the plant's modes, never a traceback.
    from dampctl.model.plantfile import dump_plant
    from dampctl.testing import chain_plant

    path = tmp_path / "chain.toml"
    path.write_text(dump_plant(chain_plant([1.0] * 5, [1e4] * 5)))

    def run(args, out, err):
        raise MemoryError("Unable to allocate 7.2 GiB for an array with shape (31, 6000, 6000)")

    monkeypatch.setattr(check, "run", run)
    monkeypatch.delenv("DAMPCTL_DEBUG", raising=False)
    code, _, err = _main(["check", str(path)])
    assert code == 2
    assert err.count("\n") == 1 and "Traceback" not in err
    assert err.startswith("dampctl check: error: out of memory on a plant of 5 modes")
    assert "7.2 GiB" in err
