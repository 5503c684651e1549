"""Adjusted p-values for many tests: Holm's step-down family-wise adjustment and the
Benjamini-Hochberg false-discovery-rate adjustment. One implementation each, for the pairwise
follow-ups of an omnibus audit and for the screen's rows. An undefined p (None) stays None and
does not count among the m tests; ties keep their input order."""

from __future__ import annotations


def holm(pvalues) -> list[float | None]:
    """Holm's (1979) step-down adjustment: with the m defined p sorted ascending, the i-th
    (0-based) becomes max over j <= i of min(1, (m - j) p_(j))."""
    present = sorted((p, i) for i, p in enumerate(pvalues) if p is not None)
    m = len(present)
    adjusted: list[float | None] = [None] * len(pvalues)
    running = 0.0
    for rank, (p, i) in enumerate(present):
        running = max(running, min(1.0, (m - rank) * p))
        adjusted[i] = running
    return adjusted


def benjamini_hochberg(pvalues) -> list[float | None]:
    """Benjamini & Hochberg's (1995) adjustment: with the m defined p sorted ascending, the
    k-th (1-based) becomes min over j >= k of min(1, p_(j) m / j)."""
    present = sorted((p, i) for i, p in enumerate(pvalues) if p is not None)
    m = len(present)
    adjusted: list[float | None] = [None] * len(pvalues)
    running = 1.0
    for rank in range(m, 0, -1):
        p, i = present[rank - 1]
        running = min(running, p * m / rank)
        adjusted[i] = min(1.0, running)
    return adjusted
