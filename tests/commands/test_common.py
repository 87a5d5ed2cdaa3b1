"""Text tables: names left-aligned, numbers right-aligned, no exponent below a million; mode
lists and option values checked against their stated ranges."""

import pytest

from dampctl.commands._common import table


def test_words_left_numbers_right_and_plain_large_numbers():
    text = table(["pair", "freq (Hz)"], [["vx1", 15014.2], ["long_name", 2.5]])
    lines = text.splitlines()
    assert lines[2] == "vx1            15014"
    assert lines[3] == "long_name        2.5"
    assert "e+04" not in text


def test_dashes_and_blanks_do_not_turn_a_number_column_left():
    text = table(["pair", "m1"], [["vx1", "-"], ["vx2", "0.25"], ["dx1", ""]])
    assert text.splitlines()[2] == "vx1      -"


def test_backwards_mode_range_is_refused():
    import pytest

    from dampctl.commands._common import mode_list
    from dampctl.errors import UsageError

    assert mode_list("1-3,5") == [1, 2, 3, 5]
    with pytest.raises(UsageError, match="runs backwards"):
        mode_list("4-2")


# ---------------------------------------------------------------------- option ranges
def test_a_huge_mode_range_is_refused_before_it_is_expanded():
    import time

    from dampctl.commands._common import mode_list
    from dampctl.errors import UsageError

    start = time.process_time()
    with pytest.raises(UsageError, match=r"--modes: mode 1000000000000 does not exist \(the "
                                         r"plant has 8 modes\)"):
        mode_list("1-1000000000000", n_modes=8)
    with pytest.raises(UsageError, match="mode a number of 41 digits does not exist"):
        mode_list("2-" + "9" * 41)
    assert time.process_time() - start < 1.0  # nothing was allocated
    assert mode_list("3-5,1,4", n_modes=8) == [1, 3, 4, 5]
    with pytest.raises(UsageError, match="runs backwards"):
        mode_list("5-3", n_modes=8)
    with pytest.raises(UsageError, match="start at 1"):
        mode_list("0-2", n_modes=8)


@pytest.mark.parametrize(
    ("argv", "message"),
    [
        (["export", "p", "d", "-o", "x", "--rate", "0"], "--rate: must be in (0, 1e+09] Hz, got 0"),
        (["export", "p", "d", "-o", "x", "--rate", "nan"], "--rate: must be finite, got nan"),
        (["export", "p", "d", "-o", "x", "--rate", "1e400"], "--rate: must be finite, got inf"),
        (["export", "p", "d", "-o", "x", "--rate", "fast"],
         "--rate: expected a number in (0, 1e+09] Hz, got 'fast'"),
        (["tune", "p", "--law", "iff", "-o", "x", "--leak-hz", "-1"],
         "--leak-hz: must be in [0, 1e+07] Hz, got -1"),
        (["tune", "p", "--law", "iff", "-o", "x", "--leak-hz", "1e99"],
         "--leak-hz: must be in [0, 1e+07] Hz, got 1e+99"),
        (["assess", "p", "d", "--seed", "-1"], "--seed: must be in [0, 4294967295], got -1"),
        (["assess", "p", "d", "--seed", "1.5"],
         "--seed: expected a whole number in [0, 4294967295], got '1.5'"),
        (["assess", "p", "d", "--samples", "10000000000"],
         "--samples: must be in [0, 100000], got 10000000000"),
        (["assess", "p", "d", "--delay-s", "5"], "--delay-s: must be in [0, 1] s, got 5"),
        (["tune", "p", "--law", "dvf", "-o", "x", "--target-damping", "1"],
         "--target-damping: must be in (0, 1), got 1"),
        (["size", "p", "--exhaustive-limit", "0"], "--exhaustive-limit: must be in [1, 10000000]"),
    ],
)
def test_option_values_outside_their_range_are_exit_2_naming_the_option(argv, message):
    import io

    from dampctl.commands.cli import main

    err = io.StringIO()
    code = main(argv, stdout=io.StringIO(), stderr=err)
    assert code == 2
    assert err.getvalue().count("\n") == 1
    assert f"error: argument {message}" in err.getvalue()
