"""Progress bar on a stream: drawn after its delay, shown finished when the work ends early,
and only on a terminal."""

import io
import os

import pytest

from dampctl.progress import Progress, is_terminal


def test_bar_ending_early_is_shown_finished():
    stream = io.StringIO()
    with Progress(10, "work", stream=stream, delay_s=0.0, force=True) as bar:
        bar.advance(4)
    frames = stream.getvalue().split("\r")
    assert frames[-1].rstrip() == "work [" + "#" * 30 + "] 10/10"


def test_bar_is_left_as_is_when_the_work_fails():
    stream = io.StringIO()
    with pytest.raises(RuntimeError, match="stop"):
        with Progress(10, "work", stream=stream, delay_s=0.0, force=True) as bar:
            bar.advance(4)
            raise RuntimeError("stop")
    assert stream.getvalue().endswith("4/10, about 0 s left\n")


def test_bar_silent_before_its_delay():
    stream = io.StringIO()
    with Progress(10, "work", stream=stream, delay_s=60.0, force=True) as bar:
        bar.advance(10)
    assert stream.getvalue() == ""


class FakeTerminal(io.StringIO):
    def isatty(self) -> bool:
        return True


def test_bar_drawn_on_a_terminal():
    stream = FakeTerminal()
    with Progress(4, "work", stream=stream, delay_s=0.0) as bar:
        bar.advance(4)
    assert stream.getvalue().startswith("\rwork [")


@pytest.mark.parametrize("kind", ["stringio", "file", "pipe"])
def test_never_a_carriage_return_into_a_file_or_pipe(kind: str, tmp_path):
    if kind == "stringio":
        stream = io.StringIO()
    elif kind == "file":
        stream = open(tmp_path / "log.txt", "w")
    else:
        read_end, write_end = os.pipe()
        os.close(read_end)  # any write would now fail with BrokenPipeError
        stream = os.fdopen(write_end, "w")
    with stream, Progress(10, "work", stream=stream, delay_s=0.0) as bar:
        bar.advance(3)
        bar.advance(7)
        if kind == "stringio":
            assert stream.getvalue() == ""
    if kind == "file":
        assert (tmp_path / "log.txt").read_text() == ""


def test_quiet_wins_over_a_terminal():
    stream = FakeTerminal()
    with Progress(4, "work", stream=stream, delay_s=0.0, enabled=False) as bar:
        bar.advance(4)
    assert stream.getvalue() == ""


def test_closed_stream_is_not_a_terminal(tmp_path):
    stream = open(tmp_path / "log.txt", "w")
    stream.close()  # isatty() on a closed file raises ValueError
    assert not is_terminal(stream)
    assert not is_terminal(None)


def test_time_left_is_the_time_so_far_scaled_by_the_steps_left():
    # 3 of 12 steps in 20 s: 9 steps left at 20/3 s each is 60 s (issue 20 point 6)
    now = [100.0]
    stream = io.StringIO()
    bar = Progress(12, "size", stream=stream, delay_s=0.0, force=True, clock=lambda: now[0])
    now[0] = 120.0
    bar.advance(3)
    assert stream.getvalue() == "\rsize [" + "#" * 7 + "-" * 23 + "] 3/12, about 1 min 00 s left"
    now[0] = 40000.0  # 39900 s for 11 steps: one more is 3627 s
    bar.advance(8)
    assert stream.getvalue().endswith("11/12, about 1 h 00 min left")
    bar.advance(1)  # finished: no estimate, the longer frame before it blanked out
    last = stream.getvalue().split("\r")[-1]
    assert last.rstrip() == "size [" + "#" * 30 + "] 12/12" and len(last) > len(last.rstrip())
