"""Checks of the command line's answers shared by the test modules."""

from __future__ import annotations


def one_line_error(res, *needles) -> None:
    """The run failed on the data (exit 1) with exactly one line on stderr, no traceback, and
    that line holds every needle."""
    assert res.code == 1, (res.code, res.err)
    assert "Traceback" not in res.err
    lines = res.err.strip().splitlines()
    assert len(lines) == 1, res.err
    for needle in needles:
        assert needle in lines[0], (needle, lines[0])
