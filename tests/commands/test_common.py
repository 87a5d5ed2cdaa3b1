"""Text tables: names left-aligned, numbers right-aligned, no exponent below a million."""

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
