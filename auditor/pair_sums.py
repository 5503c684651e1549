"""Selection among pair sums without listing all pairs.

Both Hodges-Lehmann shifts are medians of a multiset of pair sums: the two-sample shift is the
median of the n_A n_B differences a_i - b_j (= a_i + (-b_j)); the one-sample (paired) shift is the
median of the n(n+1)/2 Walsh averages (d_i + d_j)/2, i <= j, i.e. half the median of the sums
d_i + d_j. Sums are formed exactly as the plain estimators form them (one floating-point
addition), and fl(u + v) never decreases as v grows, so every count below is a prefix of a sorted
array found by binary search and corrected for rounding. Samples are held as distinct values with
counts, so tied data cost little.

The k-th smallest sum is found by bisection on the value (Johnson & Mizoguchi 1978 give an
O(n log n) algorithm; this simpler one takes O(n log n) per step): counts keep count(<= lo) < k <=
count(<= hi) until few candidates remain, which are then listed with their multiplicities.
Memory is O(n).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

_SMALL_BRACKET = 4  # list the candidates once at most this many per distinct value remain


def prefix_counts(u: np.ndarray, v: np.ndarray, s: np.ndarray, strict: bool) -> np.ndarray:
    """For each u_p and bound s_p: how many of the ascending values v satisfy fl(u_p + v) <= s_p
    (strict: < s_p). Binary search on s - u, then a correction for rounding, which is exact
    because fl(u + v) is non-decreasing in v."""
    u, s = np.broadcast_arrays(np.asarray(u, dtype=float), np.asarray(s, dtype=float))
    q = np.searchsorted(v, s - u, side="left" if strict else "right")
    m = v.size

    def belongs(idx):
        total = u + v[np.clip(idx, 0, m - 1)]
        return total < s if strict else total <= s

    while True:
        down = (q > 0) & ~belongs(q - 1)
        if not down.any():
            break
        q = q - down
    while True:
        up = (q < m) & belongs(q)
        if not up.any():
            break
        q = q + up
    return q


@dataclass(frozen=True)
class PairSums:
    """The multiset {fl(u_p + v_q)} over pairs of units, held as distinct values with counts.

    `walsh` False: every unit of u with every unit of v (two samples, v = the other group
    negated). `walsh` True: u and v are the same sample and only pairs of units i <= j count.
    """

    u: np.ndarray
    u_counts: np.ndarray
    v: np.ndarray
    v_counts: np.ndarray
    v_cumulative: np.ndarray  # v_cumulative[q] = number of v units with the q smallest values
    walsh: bool

    @property
    def size(self) -> int:
        nu, nv = int(self.u_counts.sum()), int(self.v_counts.sum())
        return nu * (nu + 1) // 2 if self.walsh else nu * nv

    def count_at_most(self, s: float) -> int:
        """Number of elements <= s."""
        return self._at_most(s)[0]

    def _at_most(self, s: float) -> tuple[int, np.ndarray]:
        """Number of elements <= s, and per u_p the number of v values whose sum with it is <= s."""
        q = prefix_counts(self.u, self.v, np.full(self.u.size, s), strict=False)
        ordered = int(np.dot(self.u_counts, self.v_cumulative[q]))
        if not self.walsh:
            return ordered, q
        diagonal = int(self.u_counts[self.u + self.u <= s].sum())
        return (ordered + diagonal) // 2, q

    def listed(self, low: float, high: float, include_low: bool):
        """Distinct-pair elements with low < s <= high (low <= s with include_low), and their
        multiplicities."""
        q0 = prefix_counts(self.u, self.v, np.full(self.u.size, low), strict=include_low)
        q1 = prefix_counts(self.u, self.v, np.full(self.u.size, high), strict=False)
        if self.walsh:
            q0 = np.maximum(q0, np.arange(self.u.size))
        counts = np.clip(q1 - q0, 0, None)
        p = np.repeat(np.arange(self.u.size), counts)
        starts = np.repeat(np.cumsum(counts) - counts, counts)
        q = np.arange(int(counts.sum())) - starts + np.repeat(q0, counts)
        values = self.u[p] + self.v[q]
        weights = self.u_counts[p] * self.v_counts[q]
        if self.walsh:
            same = p == q
            c = self.u_counts[p[same]]
            weights[same] = c * (c + 1) // 2
        return values, weights

    def kth(self, k: int) -> float:
        """The k-th smallest element (1-based). The bracket (lo, hi] narrows until it holds few
        distinct pairs (however many tied elements they stand for), which are then listed."""
        lo = float(np.nextafter(self.u[0] + self.v[0], -np.inf))
        hi = float(self.u[-1] + self.v[-1])
        c_lo, q_lo = 0, np.zeros(self.u.size, dtype=np.int64)
        q_hi = np.full(self.u.size, self.v.size, dtype=np.int64)
        budget = _SMALL_BRACKET * (self.u.size + self.v.size)
        while int((q_hi - q_lo).sum()) > budget:
            mid = lo / 2 + hi / 2
            if not lo < mid < hi:
                return hi  # (lo, hi] holds one float: every candidate equals hi
            c, q = self._at_most(mid)
            if c >= k:
                hi, q_hi = mid, q
            else:
                lo, c_lo, q_lo = mid, c, q
        values, weights = self.listed(lo, hi, include_low=False)
        order = np.argsort(values, kind="stable")
        position = np.searchsorted(np.cumsum(weights[order]), k - c_lo, side="left")
        return float(values[order][position])


def pair_sums(u: np.ndarray, v: np.ndarray | None = None) -> PairSums:
    """Two samples (u, v): sums u_i + v_j. One sample (v None): Walsh sums u_i + u_j, i <= j."""
    uu, cu = np.unique(u, return_counts=True)
    cu = cu.astype(np.int64)
    if v is None:
        return PairSums(uu, cu, uu, cu, _cumulative(cu), True)
    vv, cv = np.unique(v, return_counts=True)
    cv = cv.astype(np.int64)
    return PairSums(uu, cu, vv, cv, _cumulative(cv), False)


def _cumulative(counts: np.ndarray) -> np.ndarray:
    return np.concatenate([[0], np.cumsum(counts)])
