"""Helpers shared by the benchmark scripts: best-of timing and lists of sizes from the command
line."""

from __future__ import annotations

import argparse
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
