"""Progress bar on a stream: drawn after its delay, shown finished when the work ends early."""

import io

import pytest

from dampctl.progress import Progress


def test_bar_ending_early_is_shown_finished():
    stream = io.StringIO()
    with Progress(10, "work", stream=stream, delay_s=0.0) as bar:
        bar.advance(4)
    frames = stream.getvalue().split("\r")
    assert frames[-1] == "work [" + "#" * 30 + "] 10/10\n"


def test_bar_is_left_as_is_when_the_work_fails():
    stream = io.StringIO()
    with pytest.raises(RuntimeError, match="stop"):
        with Progress(10, "work", stream=stream, delay_s=0.0) as bar:
            bar.advance(4)
            raise RuntimeError("stop")
    assert stream.getvalue().endswith("4/10\n")


def test_bar_silent_before_its_delay():
    stream = io.StringIO()
    with Progress(10, "work", stream=stream, delay_s=60.0) as bar:
        bar.advance(10)
    assert stream.getvalue() == ""
