"""The plain route the leave-one-out fast paths are checked against, shared by their tests."""

from __future__ import annotations

import numpy as np


def refit_loop(statistic, samples):
    """Plain loop: drop one unit, recompute with the vectorised statistic on a 1-row stack."""
    out = []
    for j, x in enumerate(samples):
        vals = []
        for i in range(x.shape[0]):
            reduced = [np.delete(s, i, axis=0) if k == j else s for k, s in enumerate(samples)]
            with np.errstate(all="ignore"):
                vals.append(float(statistic(*[r[None, ...] for r in reduced])[0]))
        out.append(np.array(vals))
    return out


def assert_close(fast, slow, scale: float = 1.0):
    """Same length and shapes, the same finite entries, and equal to 1e-12 (relative to
    max(1, scale))."""
    assert len(fast) == len(slow)
    for f, s in zip(fast, slow):
        f, s = np.asarray(f), np.asarray(s)
        assert f.shape == s.shape
        both = np.isfinite(s)
        assert np.array_equal(both, np.isfinite(f))
        assert np.all(np.abs(f[both] - s[both]) <= 1e-12 * max(1.0, scale))
