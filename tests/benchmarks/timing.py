"""Helpers shared by the benchmark scripts: best-of timing, memory readings and lists of sizes
from the command line."""

from __future__ import annotations

import argparse
import os
import resource
import sys
import time


def best_of(fn, repeats: int = 3) -> float:
    """The shortest of `repeats` wall-clock timings of fn() (seconds): the least disturbed run."""
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        fn()
        times.append(time.perf_counter() - start)
    return min(times)


def whole_numbers(text: str, minimum: int, example: str, what: str) -> list[int]:
    """'2000,20000' -> [2000, 20000] (sorted, distinct), each at least `minimum`."""
    try:
        values = sorted({int(part) for part in text.split(",") if part.strip()})
    except ValueError:
        raise argparse.ArgumentTypeError(f"'{text}': give whole numbers, e.g. {example}") from None
    if not values or values[0] < minimum:
        raise argparse.ArgumentTypeError(f"'{text}': give {what} of at least {minimum}")
    return values


def resident_bytes() -> int | None:
    """Current resident memory of this process (Linux), or None where /proc is missing."""
    try:
        with open("/proc/self/statm") as f:
            return int(f.read().split()[1]) * os.sysconf("SC_PAGE_SIZE")
    except (OSError, ValueError, IndexError):
        return None


def peak_bytes(who=resource.RUSAGE_SELF) -> int:
    """Peak resident memory of this process (or, with RUSAGE_CHILDREN, of its largest waited-for
    child), in bytes."""
    peak = resource.getrusage(who).ru_maxrss
    return peak if sys.platform == "darwin" else peak * 1024  # bytes on macOS, KiB elsewhere
