"""Coverage study of the two-group intervals: every interval method an index offers, across
populations with a medium effect and near separation, at n = 5 to 50 per group.

For every index of `auditor.effects.two_group_effects()` the study draws many pairs of samples
from known populations, runs `pipeline.estimate_all` on each, and records for every interval in
`Effect.intervals` (the index's own analytic interval, the further ones of `Estimate.more`, the
BCa bootstrap) how often it contains the population value of the index (coverage) and how wide
it is on average. Intervals are told apart by their method names, so an interval method added to
the project shows up in the tables without a change here. Two composite rows measure what a user
is shown:

    reported            the interval `estimate_all` reports for the index (`Effect.ci_method`):
                        its own interval, or the fallback where that one is undefined or withheld;
    BCa, else reported  what the policy setting `[intervals] method = "bootstrap"` quotes: the
                        BCa interval where it is given, the reported interval where it is withheld.

An interval missing from a data set (undefined, or a bootstrap withheld) is left out of that
cell's coverage and counted; the reasons for withheld bootstrap intervals are tallied.

Two groups of populations (`Scenario.group`):
    shift   five population pairs with A = P(X_A > X_B) + P(X_A = X_B)/2 about 0.64,
            n = 10, 20, 50 per group (`--sizes`);
    near    normal location shifts with equal SDs and A = 0.90, 0.95, 0.99 (shift
            delta = sqrt(2) Phi^-1(A)), n = 5, 10, 20 per group (`--near-sizes`, `--near-reps`).

    .venv/bin/python tools/coverage_study.py                      # full run, writes docs/coverage.md
    .venv/bin/python tools/coverage_study.py --quick --out /tmp/c.md   # a smoke test of a minute or two
    .venv/bin/python tools/coverage_study.py --save-raw /tmp/raw.pkl  # keep the simulated intervals
    .venv/bin/python tools/coverage_study.py --from-raw /tmp/raw.pkl  # rewrite the report from them

Population values are computed from the populations themselves (closed forms for normal pairs,
numerical integration over the quantile function otherwise, exact sums for discrete populations),
never from the simulated estimates. r = Z / sqrt(N) is left out: its population value changes
with N, so it has no fixed target.

Randomness: replication `rep` of population `p` (its position in SCENARIOS) at size `n` draws its
data from SeedSequence(seed, spawn_key=(p, n, rep, 0)) and its bootstrap from spawn_key
(p, n, rep, 1). The results therefore do not depend on the number of worker processes or on how
the replications are split among them, and the data do not change with the number of resamples.
"""

from __future__ import annotations

import argparse
import math
import pickle
import sys
import time
import warnings
from collections import Counter
from concurrent.futures import ProcessPoolExecutor
from dataclasses import dataclass
from functools import cached_property
from pathlib import Path
from typing import NamedTuple

import numpy as np
from scipy import integrate, optimize, stats

from auditor.effects import two_group_effects
from auditor.parametric import ROBUST_SCALE, ROBUST_TRIM
from auditor.pipeline import estimate_all

LEVEL = 0.95
UNDER = 0.925  # a coverage figure below this is called undercoverage
OVER = 0.975   # ... above this, conservative
SKIPPED = {"r_from_z": "r = Z / sqrt(N) grows with N for a fixed effect: no population value "
                       "independent of the sample size, so no fixed target"}
BLOCK = 25  # replications per task handed to a worker
TRUTH_PAIRS = 10_000_000  # pairs in the Monte Carlo check of the population values
DEFAULT_SIZES = {"shift": (10, 20, 50), "near": (5, 10, 20)}
NEAR_A = (0.90, 0.95, 0.99)  # A of the near-separation populations

BCA = "bca_bootstrap"
REPORTED = "reported"            # Effect.ci_low / ci_high: the reported interval with fallbacks
BCA_ELSE = "bca_else_reported"   # the BCa interval where given, else the reported one
COMPOSITES = (REPORTED, BCA_ELSE)
ALWAYS = 0.001  # missing from at most this share of every cell's data sets: "always given"
SPARSE = 0.5  # an interval given in fewer than this share of a cell's data sets: not judged there


# ------------------------------------------------------------------ populations


@dataclass(frozen=True)
class Continuous:
    """A continuous population: loc + scale * (standard normal, lognormal(0, shape) or t(shape))."""

    kind: str  # "normal", "lognormal" or "t"
    loc: float = 0.0
    scale: float = 1.0
    shape: float = 1.0  # sigma of the log for "lognormal", degrees of freedom for "t"

    @cached_property
    def dist(self):  # built once per population (the integrals call it many times)
        if self.kind == "normal":
            return stats.norm(self.loc, self.scale)
        if self.kind == "lognormal":
            return stats.lognorm(self.shape, loc=self.loc, scale=self.scale)
        if self.kind == "t":
            return stats.t(self.shape, loc=self.loc, scale=self.scale)
        raise ValueError(f"unknown kind {self.kind!r}")

    def sample(self, rng: np.random.Generator, n: int) -> np.ndarray:
        if self.kind == "normal":
            return rng.normal(self.loc, self.scale, n)
        if self.kind == "lognormal":
            return self.loc + self.scale * rng.lognormal(0.0, self.shape, n)
        return self.loc + self.scale * rng.standard_t(self.shape, n)

    def cdf(self, x):
        return self.dist.cdf(x)

    def ppf(self, u):
        return self.dist.ppf(u)

    def describe(self) -> str:
        if self.kind == "normal":
            return f"N({self.loc:.5g}, SD {self.scale:g})"
        base = f"lognormal(0, {self.shape:g})" if self.kind == "lognormal" else f"t({self.shape:g})"
        return base if self.loc == 0 else f"{self.loc:g} + {base}"


@dataclass(frozen=True)
class Discrete:
    """A population on finitely many values with the given probabilities."""

    values: tuple[float, ...]
    probs: tuple[float, ...]

    def table(self) -> tuple[np.ndarray, np.ndarray]:
        v, p = np.asarray(self.values, float), np.asarray(self.probs, float)
        order = np.argsort(v)
        return v[order], p[order] / p.sum()

    def sample(self, rng: np.random.Generator, n: int) -> np.ndarray:
        v, p = self.table()
        return rng.choice(v, size=n, p=p)

    def describe(self) -> str:
        v, p = self.table()
        return ", ".join(f"P({x:g}) = {q:.3f}" for x, q in zip(v, p))


@dataclass(frozen=True)
class RoundedNormal(Discrete):
    """Ratings low..high: a latent N(mean, sd) rounded to the nearest whole number and clipped."""

    mean: float = 0.0
    sd: float = 1.0
    low: int = 1
    high: int = 7

    @classmethod
    def make(cls, mean: float, sd: float, low: int = 1, high: int = 7) -> "RoundedNormal":
        k = np.arange(low, high + 1, dtype=float)
        upper = np.where(k == high, np.inf, k + 0.5)
        lower = np.where(k == low, -np.inf, k - 0.5)
        p = stats.norm.cdf((upper - mean) / sd) - stats.norm.cdf((lower - mean) / sd)
        return cls(tuple(k), tuple(p), mean, sd, low, high)

    def sample(self, rng: np.random.Generator, n: int) -> np.ndarray:
        return np.clip(np.rint(rng.normal(self.mean, self.sd, n)), self.low, self.high)

    def describe(self) -> str:
        return (f"N({self.mean:g}, SD {self.sd:g}) rounded, clipped to {self.low}..{self.high}")


@dataclass(frozen=True)
class Scenario:
    key: str
    title: str
    a: Continuous | Discrete  # group A (the first group: every signed index is A relative to B)
    b: Continuous | Discrete
    b_size_factor: int = 1  # n_B = factor * n_A
    group: str = "shift"  # "shift" (A about 0.64) or "near" (near separation): its sizes and table

    def sizes(self, n: int) -> tuple[int, int]:
        return n, self.b_size_factor * n

    def draw(self, rng: np.random.Generator, n: int) -> tuple[np.ndarray, np.ndarray]:
        na, nb = self.sizes(n)
        return self.a.sample(rng, na), self.b.sample(rng, nb)


def shift_for_a(a_value: float) -> float:
    """The location shift delta of two normal populations with SD 1 that gives A = a_value:
    X_A - X_B ~ N(delta, 2), so A = Phi(delta / sqrt 2) and delta = sqrt(2) Phi^-1(A)."""
    return math.sqrt(2.0) * float(stats.norm.ppf(a_value))


def near_separation(a_value: float) -> Scenario:
    """Normal groups with SD 1 shifted so far apart that A = a_value (0.90 to 0.99)."""
    return Scenario(f"sep{round(100 * a_value)}", f"normal, A = {a_value:.2f}",
                    Continuous("normal", shift_for_a(a_value)), Continuous("normal", 0.0),
                    group="near")


# Shifts chosen so that A = P(X_A > X_B) + P(X_A = X_B)/2 is about 0.64 in every "shift" scenario
# (a "medium" effect on Vargha and Delaney's scale). New scenarios go at the end: the position
# of a scenario is part of its seeds.
SCENARIOS = (
    Scenario("normal", "normal, shift", Continuous("normal", 0.5), Continuous("normal", 0.0)),
    Scenario("lognormal", "lognormal, shift", Continuous("lognormal", 0.43, shape=1.0),
             Continuous("lognormal", 0.0, shape=1.0)),
    Scenario("t3", "t(3), shift", Continuous("t", 0.63, shape=3.0), Continuous("t", 0.0, shape=3.0)),
    Scenario("unequal", "normal, SD 2 vs 1, n vs 2n", Continuous("normal", 0.8, 2.0),
             Continuous("normal", 0.0, 1.0), b_size_factor=2),
    Scenario("ratings", "ratings 1-7 (ties)", RoundedNormal.make(4.7, 1.3),
             RoundedNormal.make(4.0, 1.3)),
    *(near_separation(a) for a in NEAR_A),
)
SCENARIO_BY_KEY = {s.key: s for s in SCENARIOS}


# ------------------------------------------------------------------ population values


def is_discrete(pop) -> bool:
    return isinstance(pop, Discrete)


def mean_sd(pop) -> tuple[float, float]:
    """Population mean and SD (the square root of the population variance)."""
    if is_discrete(pop):
        v, p = pop.table()
        m = float(p @ v)
        return m, math.sqrt(float(p @ (v - m) ** 2))
    m, var = pop.dist.stats("mv")
    return float(m), math.sqrt(float(var))


def quantile_integral(pop, g, lo: float, hi: float) -> float:
    """Integral over u in [lo, hi] of g(Q(u)), Q the population's quantile function."""
    if is_discrete(pop):
        v, p = pop.table()
        right = np.cumsum(p)
        left = right - p
        overlap = np.clip(np.minimum(right, hi) - np.maximum(left, lo), 0.0, None)
        return float(np.sum(np.asarray(g(v), float) * overlap))
    return integrate.quad(lambda u: g(pop.ppf(u)), lo, hi, limit=200, epsabs=1e-13,
                          epsrel=1e-11)[0]


def quantile(pop, u: float) -> float:
    """Q(u) = the smallest x with F(x) >= u."""
    if is_discrete(pop):
        v, p = pop.table()
        return float(v[np.searchsorted(np.cumsum(p), u - 1e-12)])
    return float(pop.ppf(u))


def trimmed_mean(pop, gamma: float = ROBUST_TRIM) -> float:
    """Population gamma-trimmed mean: the mean of Q(u) over u in [gamma, 1 - gamma]."""
    return quantile_integral(pop, lambda x: x, gamma, 1 - gamma) / (1 - 2 * gamma)


def winsorized_variance(pop, gamma: float = ROBUST_TRIM) -> float:
    """Population gamma-winsorized variance: the variance of Q(min(max(u, gamma), 1 - gamma))
    for u uniform on (0, 1)."""
    q_lo, q_hi = quantile(pop, gamma), quantile(pop, 1 - gamma)
    mu = gamma * (q_lo + q_hi) + quantile_integral(pop, lambda x: x, gamma, 1 - gamma)
    inner = quantile_integral(pop, lambda x: (x - mu) ** 2, gamma, 1 - gamma)
    return gamma * ((q_lo - mu) ** 2 + (q_hi - mu) ** 2) + inner


def prob_superiority(x, y) -> float:
    """A = P(X > Y) + P(X = Y)/2: exact sums for two discrete populations, otherwise the integral
    over u of F_Y(Q_X(u)) (ties have probability zero)."""
    if is_discrete(x) and is_discrete(y):
        vx, px = x.table()
        vy, py = y.table()
        kernel = (vx[:, None] > vy[None, :]) + 0.5 * (vx[:, None] == vy[None, :])
        return float(px @ kernel @ py)
    if is_discrete(x) or is_discrete(y):
        raise ValueError("mixed discrete and continuous populations are not supported")
    return quantile_integral(x, y.cdf, 0.0, 1.0)


def hodges_lehmann_shift(x, y) -> float:
    """The median of the distribution of X - Y. Discrete: from the exact distribution of the
    difference (the midpoint of the two middle values when its CDF equals 1/2 on an interval).
    Continuous: the root of P(X - Y <= t) = integral over u of F_X(t + Q_Y(u)) = 1/2."""
    if is_discrete(x) and is_discrete(y):
        vx, px = x.table()
        vy, py = y.table()
        diffs = (vx[:, None] - vy[None, :]).ravel()
        probs = (px[:, None] * py[None, :]).ravel()
        values, inverse = np.unique(np.round(diffs, 12), return_inverse=True)
        cdf = np.cumsum(np.bincount(inverse, weights=probs))
        k = int(np.searchsorted(cdf, 0.5 - 1e-12))
        if abs(cdf[k] - 0.5) < 1e-12:
            return float(0.5 * (values[k] + values[k + 1]))
        return float(values[k])
    if is_discrete(x) or is_discrete(y):
        raise ValueError("mixed discrete and continuous populations are not supported")

    def below(t):
        return quantile_integral(y, lambda q: x.cdf(t + q), 0.0, 1.0) - 0.5

    lo = quantile(x, 0.001) - quantile(y, 0.999)
    hi = quantile(x, 0.999) - quantile(y, 0.001)
    return float(optimize.brentq(below, lo, hi, xtol=1e-11, rtol=1e-12))


def is_normal(pop) -> bool:
    return isinstance(pop, Continuous) and pop.kind == "normal"


def normal_trimmed_moments(pop: Continuous, gamma: float = ROBUST_TRIM) -> tuple[float, float]:
    """Closed forms for N(m, s): the gamma-trimmed mean is m (symmetry) and the gamma-winsorized
    variance is s^2 [(1 - 2 gamma) - 2 z phi(z) + 2 gamma z^2] with z = Phi^-1(1 - gamma) (the
    truncated-normal second moment over the middle plus the two clipped tails)."""
    z = float(stats.norm.ppf(1 - gamma))
    var = pop.scale**2 * ((1 - 2 * gamma) - 2 * z * float(stats.norm.pdf(z)) + 2 * gamma * z * z)
    return pop.loc, var


def true_values(scenario: Scenario) -> dict[str, float]:
    """Population value of every index with a fixed target (A relative to B).

    Standardized differences: Cohen's d and Hedges' g divide by the pooled SD with equal weights,
    sqrt((sd_A^2 + sd_B^2)/2); Glass's delta by the reference group's SD (B); d with unpooled SDs
    by the root mean square of the two SDs (the same number); robust d is 0.642 times the
    difference of the 20% trimmed means over the root of the average of the 20% winsorized
    variances.

    Two normal groups use closed forms: X_A - X_B ~ N(m_A - m_B, s_A^2 + s_B^2), so
    A = Phi((m_A - m_B) / sqrt(s_A^2 + s_B^2)) and the median of X_A - X_B is m_A - m_B; the
    trimmed moments are those of `normal_trimmed_moments`. Other pairs integrate.
    """
    (ma, sa), (mb, sb) = mean_sd(scenario.a), mean_sd(scenario.b)
    diff = ma - mb
    rms = math.sqrt((sa**2 + sb**2) / 2)
    if is_normal(scenario.a) and is_normal(scenario.b):
        (ta, wa), (tb, wb) = normal_trimmed_moments(scenario.a), normal_trimmed_moments(scenario.b)
        a = float(stats.norm.cdf(diff / math.sqrt(sa**2 + sb**2)))
        shift = diff
    else:
        ta, tb = trimmed_mean(scenario.a), trimmed_mean(scenario.b)
        wa, wb = winsorized_variance(scenario.a), winsorized_variance(scenario.b)
        a = prob_superiority(scenario.a, scenario.b)
        shift = hodges_lehmann_shift(scenario.a, scenario.b)
    return {
        "mean_difference": diff,
        "cohen_d": diff / rms,
        "hedges_g": diff / rms,
        "glass_delta": diff / sb,
        "d_unpooled": diff / rms,
        "robust_d": ROBUST_SCALE * (ta - tb) / math.sqrt((wa + wb) / 2),
        "prob_superiority": a,
        "cliff_delta": 2 * a - 1,
        "rank_biserial": 2 * a - 1,
        "hodges_lehmann": shift,
    }


def size_weighted_values(scenario: Scenario, n: int) -> dict[str, float]:
    """The pooled-SD indices with the pooled variance weighted as the samples weight it,
    ((n_A - 1) var_A + (n_B - 1) var_B) / (n_A + n_B - 2): what d, g and robust d estimate when
    the groups differ in both size and spread."""
    na, nb = scenario.sizes(n)
    (ma, sa), (mb, sb) = mean_sd(scenario.a), mean_sd(scenario.b)
    pooled = math.sqrt(((na - 1) * sa**2 + (nb - 1) * sb**2) / (na + nb - 2))
    wa, wb = winsorized_variance(scenario.a), winsorized_variance(scenario.b)
    w_pooled = math.sqrt(((na - 1) * wa + (nb - 1) * wb) / (na + nb - 2))
    return {
        "cohen_d": (ma - mb) / pooled,
        "hedges_g": (ma - mb) / pooled,
        "robust_d": ROBUST_SCALE * (trimmed_mean(scenario.a) - trimmed_mean(scenario.b)) / w_pooled,
    }


def monte_carlo_check(scenario: Scenario, pairs: int, seed: int, index: int) -> dict[str, float]:
    """A and the median of X - Y from `pairs` independent pairs (a check of the integrals)."""
    rng = np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(999, index)))
    chunk = 1_000_000
    wins, diffs = 0.0, []
    for start in range(0, pairs, chunk):
        m = min(chunk, pairs - start)
        x, y = scenario.a.sample(rng, m), scenario.b.sample(rng, m)
        wins += np.count_nonzero(x > y) + 0.5 * np.count_nonzero(x == y)
        diffs.append((x - y).astype(np.float32))
    a = wins / pairs
    # SE of the mean of the per-pair score (1, 1/2 or 0); bounded by sqrt(A(1 - A)/pairs)
    se = math.sqrt(a * (1 - a) / pairs)
    return {"prob_superiority": a, "prob_superiority_se": se,
            "hodges_lehmann": float(np.median(np.concatenate(diffs)))}


# ------------------------------------------------------------------ simulation


def index_names() -> list[str]:
    return [s.name for s in two_group_effects() if s.name not in SKIPPED]


# Why a BCa interval was withheld: a phrase of `resampling.bca_interval`'s reason -> a short label
WITHHELD_LABELS = (
    ("complete separation", "complete separation"),
    ("at the index's bound", "estimate at a bound"),
    ("sit at a bound", "resamples piled at a bound"),
    ("distinct values", "too few distinct resample values"),
    ("only one value", "too few distinct resample values"),
    ("bias correction is extreme", "extreme bias correction"),
    ("outside every resample", "estimate outside every resample"),
    ("undefined in almost every", "undefined in the resamples"),
)


def withheld_label(reason: str | None) -> str:
    """A short label for `Effect.bootstrap_reason` ("" when the bootstrap was not withheld)."""
    if not reason:
        return ""
    for phrase, label in WITHHELD_LABELS:
        if phrase in reason:
            return label
    return "other: " + reason[:60]


def _limits(iv) -> tuple[float, float]:
    low = math.nan if iv.low is None else float(iv.low)
    high = math.nan if iv.high is None else float(iv.high)
    return low, high


def replicate(scenario_index: int, n: int, rep: int, seed: int, resamples: int, level: float,
              specs) -> list[tuple]:
    """One simulated data set through `estimate_all` (`resamples` stratified resamples). Per
    index: (estimate, {method: (low, high)} of every interval given, reported (low, high), its
    method, why the BCa interval was withheld or "")."""
    scenario = SCENARIOS[scenario_index]
    data_rng, boot_rng = (
        np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(scenario_index, n, rep, s)))
        for s in (0, 1))
    a, b = scenario.draw(data_rng, n)
    a, b = np.sort(a), np.sort(b)  # as the pipeline does; no index depends on the order
    with warnings.catch_warnings(), np.errstate(all="ignore"):
        warnings.simplefilter("ignore")
        effects, _, _ = estimate_all(specs, (a, b), level, resamples, boot_rng)
    out = []
    for effect in effects:
        est = math.nan if effect.estimate is None else float(effect.estimate)
        given = {iv.method: _limits(iv) for iv in effect.intervals}
        low = math.nan if effect.ci_low is None else float(effect.ci_low)
        high = math.nan if effect.ci_high is None else float(effect.ci_high)
        out.append((est, given, (low, high), effect.ci_method,
                    withheld_label(effect.bootstrap_reason)))
    return out


@dataclass
class Cell:
    """The replications of one population and size."""

    est: np.ndarray              # (reps, k) estimates, NaN where undefined
    intervals: dict              # (index, method) -> (reps, 2), NaN where not given
    reported: np.ndarray         # (reps, k, 2) the reported interval (Effect.ci_low, ci_high)
    reported_method: np.ndarray  # (reps, k) its method (Effect.ci_method), "none" when none
    withheld: np.ndarray         # (reps, k) why the BCa interval was withheld, "" when it was not

    @property
    def reps(self) -> int:
        return self.est.shape[0]


def _assemble(parts, names) -> Cell:
    """Replications (outputs of `replicate`, in order) -> a Cell; interval keys in order of first
    appearance."""
    m, k = len(parts), len(names)
    keys = {}
    for part in parts:
        for j, name in enumerate(names):
            for method in part[j][1]:
                keys.setdefault((name, method), None)
    intervals = {key: np.full((m, 2), np.nan) for key in keys}
    est = np.full((m, k), np.nan)
    reported = np.full((m, k, 2), np.nan)
    methods = np.empty((m, k), dtype=object)
    withheld = np.empty((m, k), dtype=object)
    for i, part in enumerate(parts):
        for j, (name, (value, given, rep_iv, method, why)) in enumerate(zip(names, part)):
            est[i, j] = value
            for meth, lims in given.items():
                intervals[(name, meth)][i] = lims
            reported[i, j] = rep_iv
            methods[i, j] = method
            withheld[i, j] = why
    return Cell(est, intervals, reported, methods.astype(str), withheld.astype(str))


def _concatenate(cells: list[Cell]) -> Cell:
    keys = {}
    for c in cells:
        for key in c.intervals:
            keys.setdefault(key, None)
    intervals = {key: np.concatenate([c.intervals.get(key, np.full((c.reps, 2), np.nan))
                                      for c in cells]) for key in keys}
    return Cell(np.concatenate([c.est for c in cells]), intervals,
                np.concatenate([c.reported for c in cells]),
                np.concatenate([c.reported_method for c in cells]),
                np.concatenate([c.withheld for c in cells]))


def run_block(task) -> tuple:
    """Replications start..stop-1 of one cell (worker entry point)."""
    scenario_index, n, start, stop, seed, resamples, level = task
    specs = tuple(s for s in two_group_effects() if s.name not in SKIPPED)
    parts = [replicate(scenario_index, n, rep, seed, resamples, level, specs)
             for rep in range(start, stop)]
    return (scenario_index, n, start), _assemble(parts, [s.name for s in specs])


def study_plan(keys, sizes=None, reps: int = 1500, near_reps: int | None = None):
    """[(population key, n, replications)] for the populations `keys`: each at the sizes of its
    group (`sizes` maps "shift"/"near" to sizes; default DEFAULT_SIZES), near-separation ones
    with `near_reps` replications (default `reps`)."""
    sizes = {**DEFAULT_SIZES, **(sizes or {})}
    plan = []
    for key in keys:
        group = SCENARIO_BY_KEY[key].group
        count = near_reps if group == "near" and near_reps is not None else reps
        plan.extend((key, n, count) for n in sizes[group])
    return plan


def simulate(plan, resamples: int, seed: int, level: float = LEVEL, workers: int = 2,
             progress=None) -> dict[tuple[str, int], Cell]:
    """Run every cell of `plan` ([(population key, n, replications)]); the result does not
    depend on `workers`."""
    index_of = {s.key: i for i, s in enumerate(SCENARIOS)}
    tasks = [(index_of[key], n, start, min(reps, start + BLOCK), seed, resamples, level)
             for key, n, reps in plan for start in range(0, reps, BLOCK)]
    # the slowest cells first, so that two workers finish together
    order = sorted(range(len(tasks)),
                   key=lambda i: -tasks[i][1] * (1 + SCENARIOS[tasks[i][0]].b_size_factor))
    blocks = {}
    total = len(tasks)
    started = time.perf_counter()

    def record(result):
        blocks[result[0]] = result[1]
        if progress is not None:
            progress(len(blocks), total, time.perf_counter() - started)

    if workers <= 1:
        for i in order:
            record(run_block(tasks[i]))
    else:
        with ProcessPoolExecutor(max_workers=workers) as pool:
            for result in pool.map(run_block, [tasks[i] for i in order]):
                record(result)
    cells = {}
    for key, n, reps in plan:
        cells[(key, n)] = _concatenate([blocks[(index_of[key], n, start)]
                                        for start in range(0, reps, BLOCK)])
    return cells


def coverage(intervals: np.ndarray, truth: float) -> tuple[float, float, int]:
    """(share of given intervals containing `truth`, their mean width, number not given)."""
    ok = np.all(np.isfinite(intervals), axis=1)
    if not np.any(ok):
        return math.nan, math.nan, int(intervals.shape[0])
    low, high = intervals[ok, 0], intervals[ok, 1]
    hits = (low <= truth) & (truth <= high)
    return float(np.mean(hits)), float(np.mean(high - low)), int(np.count_nonzero(~ok))


def misses(intervals: np.ndarray, truth: float) -> tuple[float, float]:
    """Shares of given intervals entirely below and entirely above `truth`."""
    ok = np.all(np.isfinite(intervals), axis=1)
    low, high = intervals[ok, 0], intervals[ok, 1]
    return float(np.mean(high < truth)), float(np.mean(low > truth))


def interval_sets(cell: Cell, names) -> dict[tuple[str, str], np.ndarray]:
    """Every interval of the cell by (index, method), with the two composites: REPORTED (the
    reported interval) and BCA_ELSE (BCa where given, else the reported one)."""
    out = dict(cell.intervals)
    for j, name in enumerate(names):
        rep = cell.reported[:, j]
        out[(name, REPORTED)] = rep
        boot = cell.intervals.get((name, BCA))  # None: withheld in every data set of the cell
        given = (np.zeros(cell.reps, bool) if boot is None
                 else np.all(np.isfinite(boot), axis=1))
        out[(name, BCA_ELSE)] = rep if boot is None else np.where(given[:, None], boot, rep)
    return out


# ------------------------------------------------------------------ summaries


LABELS = {
    "mean_difference": "mean difference", "cohen_d": "Cohen's d", "hedges_g": "Hedges' g",
    "glass_delta": "Glass's delta (ref. B)", "d_unpooled": "d, unpooled SDs", "robust_d": "robust d",
    "prob_superiority": "A (prob. of superiority)", "cliff_delta": "Cliff's delta",
    "rank_biserial": "rank-biserial r", "hodges_lehmann": "Hodges-Lehmann shift",
}
FAMILIES = {
    "mean": ["mean_difference"],
    "standardized mean": ["cohen_d", "hedges_g", "glass_delta", "d_unpooled", "robust_d"],
    "dominance": ["prob_superiority", "cliff_delta", "rank_biserial"],
    "shift": ["hodges_lehmann"],
}
METHOD_LABELS = {BCA: "BCa bootstrap", REPORTED: "reported interval",
                 BCA_ELSE: "BCa, else reported"}


class Stat(NamedTuple):
    """One interval in one cell."""

    cov: float      # share of the given intervals that contain the population value
    width: float    # their mean width
    missing: int    # data sets without this interval
    below: float    # share of given intervals wholly below the population value
    above: float    # ... wholly above it
    reps: int

    @property
    def given(self) -> float:
        return (self.reps - self.missing) / self.reps


def own_methods(cells, names) -> dict[str, str]:
    """The index's own interval method: the reported one in data sets where the BCa interval was
    given as well (`estimate_all` reports the own interval first, then the BCa one, then the
    first of `Estimate.more`), the most frequent if several."""
    out = {}
    for j, name in enumerate(names):
        counts = Counter()
        for cell in cells.values():
            boot = cell.intervals.get((name, BCA))
            with_boot = (np.all(np.isfinite(boot), axis=1) if boot is not None
                         else np.zeros(cell.reps, bool))
            counts.update(m for m in cell.reported_method[with_boot, j] if m not in (BCA, "none"))
        if counts:
            out[name] = max(counts.items(), key=lambda kv: (kv[1], kv[0]))[0]
    return out


def method_order(cells, names, own) -> list[tuple[str, str]]:
    """(index, method) rows: per index its own method, the other analytic ones (first seen
    first), BCa, then the composites."""
    seen = {}
    for cell in cells.values():
        for key in cell.intervals:
            seen.setdefault(key, None)
    out = []
    for name in names:
        methods = [m for nm, m in seen if nm == name]
        first = [own[name]] if name in own and own[name] in methods else []
        rest = [m for m in methods if m not in first and m != BCA]
        out.extend((name, m) for m in first + rest + ([BCA] if BCA in methods else []))
        out.extend((name, m) for m in COMPOSITES if m == REPORTED or BCA in methods)
    return out


def summarise(cells, truths, names, order) -> dict:
    """rows[(index, method)][(population, n)] = Stat, for cells where the interval was given at
    least once."""
    rows = {key: {} for key in order}
    for (pop, n), cell in cells.items():
        sets = interval_sets(cell, names)
        for name, method in order:
            ivs = sets.get((name, method))
            if ivs is None or not np.any(np.all(np.isfinite(ivs), axis=1)):
                continue
            truth = truths[pop][name]
            cov, width, missing = coverage(ivs, truth)
            below, above = misses(ivs, truth)
            rows[(name, method)][(pop, n)] = Stat(cov, width, missing, below, above, cell.reps)
    return {key: row for key, row in rows.items() if row}


def base_of(name, method, own) -> str | None:
    """The row a composite repeats where nothing falls back: the own interval for REPORTED (BCa
    when the index has none), BCa for BCA_ELSE."""
    if method == REPORTED:
        return own.get(name, BCA)
    if method == BCA_ELSE:
        return BCA
    return None


def composite_differs(cells, names, own, cols) -> set[tuple[str, str]]:
    """Composite rows that differ from the row they repeat in some data set of `cols`."""
    out = set()
    for col in cols:
        sets = interval_sets(cells[col], names)
        for name in names:
            for method in COMPOSITES:
                ivs = sets.get((name, method))
                if ivs is None:
                    continue
                base = sets.get((name, base_of(name, method, own)))
                if base is None or not np.array_equal(ivs, base, equal_nan=True):
                    out.add((name, method))
    return out


def _pct(x: float, digits: int = 1) -> str:
    return "n/a" if not math.isfinite(x) else f"{100 * x:.{digits}f}"


def _width(x: float) -> str:
    if not math.isfinite(x):
        return "n/a"
    return f"{x:#.3g}" if x < 10 else f"{x:.1f}"


def _share(x: float) -> str:
    """A share of data sets in percent: whole numbers, one decimal below 1%."""
    return _pct(x, 1 if 0 < x < 0.01 else 0)


def _shown(x: float) -> float:
    """A coverage figure as the reader sees it (one decimal of a percent)."""
    return round(1000 * x) / 1000


def clear_threshold(reps: int, level: float = LEVEL) -> float:
    """Coverage below UNDER by more than two Monte Carlo SEs: clearly undercovering."""
    return UNDER - 2 * math.sqrt(level * (1 - level) / reps)


def _judged(row, cols) -> list:
    """The cells of `cols` where the interval was given in at least SPARSE of the data sets."""
    return [c for c in cols if c in row and row[c].given >= SPARSE]


def _sparse(row, cols) -> list:
    return [c for c in cols if c in row and row[c].given < SPARSE]


def _worst(row, cols):
    present = _judged(row, cols)
    if not present:
        return math.nan, None
    worst = min(present, key=lambda c: row[c].cov)
    return row[worst].cov, worst


def _at(col) -> str:
    return f"{col[0]} n={col[1]}"


def _cell_list(row, cols, test) -> list[str]:
    return [f"{_at(c)} ({_pct(row[c].cov)}%)" for c in _judged(row, cols) if test(row[c])]


def kind_of(name, method, own) -> str:
    if method in COMPOSITES:
        return "policy"
    if method == BCA:
        return "bootstrap"
    return "own" if own.get(name) == method else "more"


def row_label(name, method) -> str:
    return f"{LABELS[name]} [{METHOD_LABELS.get(method, method)}]"


def _cov(rows, name, method, col) -> str:
    row = rows.get((name, method), {})
    return f"{_pct(row[col].cov)}%" if col in row else "n/a"


# ------------------------------------------------------------------ report


GROUP_TITLES = {"shift": "Medium effect (A about 0.64), n = {sizes}",
                "near": "Near separation (normal, A = 0.90 to 0.99), n = {sizes}"}



def _cell(stat, conservative: bool = True) -> str:
    """One table cell: coverage % (mean width), marked sparse (given in fewer than SPARSE of the
    data sets), bold below UNDER and, with `conservative`, italic above OVER."""
    txt = f"{_pct(stat.cov)} ({_width(stat.width)})"
    if stat.given < SPARSE:
        return txt + " †"
    if _shown(stat.cov) < UNDER:
        return f"**{txt}**"
    if conservative and _shown(stat.cov) > OVER:
        return f"_{txt}_"
    return txt

def coverage_table(rows, cols, order, own, shown_composites) -> list[str]:
    """Coverage % (mean width) for the cells `cols`, one row per interval."""
    out = ["| index | interval | kind | " + " | ".join(_at(c) for c in cols) + " |",
           "| --- | --- | --- |" + " ---: |" * len(cols)]
    for name, method in order:
        row = rows.get((name, method))
        if row is None or not any(c in row for c in cols):
            continue
        if method in COMPOSITES and (name, method) not in shown_composites:
            continue
        texts = []
        for col in cols:
            if col not in row:
                texts.append("-")
                continue
            texts.append(_cell(row[col]))
        out.append(f"| {LABELS[name]} | {METHOD_LABELS.get(method, method)} | "
                   f"{kind_of(name, method, own)} | " + " | ".join(texts) + " |")
    return out


def missing_table(cells, rows, cols, order, own, shown_composites) -> list[str]:
    """Data sets without each interval, for the rows with any."""
    out = []
    for name, method in order:
        if method in COMPOSITES and (name, method) not in shown_composites:
            continue
        if (name, method) not in rows:
            continue
        row = rows[(name, method)]
        counts = [row[c].missing if c in row else cells[c].reps for c in cols]
        if any(counts):
            out.append(_count_row(LABELS[name], METHOD_LABELS.get(method, method), counts))
    return _count_table("interval", cols, out)


def _count_row(label: str, method: str, counts) -> str:
    return f"| {label} | {method} | " + " | ".join(str(x) if x else "" for x in counts) + " |"


def _count_table(second: str, cols, rows: list[str]) -> list[str]:
    """A table of counts per cell (index, `second`, one column per cell), or nothing."""
    if not rows:
        return []
    return ([f"| index | {second} | " + " | ".join(_at(c) for c in cols) + " |",
             "| --- | --- |" + " ---: |" * len(cols)] + rows)


def withheld_table(cells, names, cols) -> list[str]:
    """Why BCa intervals were withheld: counts per reason, indices with equal counts together."""
    by_counts = {}
    for j, name in enumerate(names):
        reasons = sorted({r for c in cols for r in cells[c].withheld[:, j] if r})
        for reason in reasons:
            counts = tuple(int(np.count_nonzero(cells[c].withheld[:, j] == reason)) for c in cols)
            by_counts.setdefault((reason, counts), []).append(LABELS[name])
    if not by_counts:
        return []
    out = ["| indices | reason | " + " | ".join(_at(c) for c in cols) + " |",
           "| --- | --- |" + " ---: |" * len(cols)]
    for (reason, counts), labels in by_counts.items():
        out.append(f"| {', '.join(labels)} | {reason} | "
                   + " | ".join(str(x) if x else "" for x in counts) + " |")
    return out


def reported_mix_table(cells, names, cols, own) -> list[str]:
    """Which method the reported interval came from, for indices where it was not always the
    index's own."""
    out = []
    for j, name in enumerate(names):
        methods = sorted({m for c in cols for m in cells[c].reported_method[:, j]},
                         key=lambda m: (m != own.get(name), m == "none", m))
        if methods == [own.get(name)] or (name not in own and methods == [BCA]):
            continue
        for method in methods:
            counts = [int(np.count_nonzero(cells[c].reported_method[:, j] == method)) for c in cols]
            out.append(_count_row(LABELS[name], method, counts))
    return _count_table("reported method", cols, out)


def render(cells, plan, resamples, seed, workers, seconds, truths, checks, level=LEVEL,
           quick=False) -> str:
    names = index_names()
    keys = list(dict.fromkeys(k for k, _, _ in plan))
    scenarios = [SCENARIO_BY_KEY[k] for k in keys]
    cols = [(k, n) for k, n, _ in plan]
    reps_of = {(k, n): r for k, n, r in plan}
    groups = {g: [c for c in cols if SCENARIO_BY_KEY[c[0]].group == g] for g in ("shift", "near")}
    groups = {g: c for g, c in groups.items() if c}
    sizes_of = {g: sorted({n for _, n in c}) for g, c in groups.items()}
    own = own_methods(cells, names)
    order = method_order(cells, names, own)
    rows = summarise(cells, truths, names, order)
    differs = composite_differs(cells, names, own, cols)
    lines = []
    w = lines.append
    w("# Coverage of the two-group intervals")
    w("")
    w("How often each interval that `auditor` computes for two independent groups contains the "
      "population value of its index, and how wide it is: every interval in `Effect.intervals` "
      "(the index's own, those beside it, the BCa bootstrap), the interval reported for the index "
      "with its fallbacks, under "
      f"{len(scenarios)} population pairs ("
      + ", ".join(f"{len(c)} cells " + ("with a medium effect" if g == "shift" else
                                        "near separation") for g, c in groups.items()) + "). "
      "Written by `tools/coverage_study.py`; rerun it with the command below to reproduce every "
      "number (the seed fixes all random draws).")
    w("")

    # settings
    w("## Settings")
    w("")
    rep_values = sorted(set(reps_of.values()))
    reps_main = max((r for c, r in reps_of.items() if c in groups.get("shift", [])), default=None)
    reps_near = max((r for c, r in reps_of.items() if c in groups.get("near", [])), default=None)
    cmd = (f"tools/coverage_study.py --reps {reps_main or reps_near} --resamples {resamples} "
           f"--seed {seed}")
    if "shift" in groups:
        cmd += f" --sizes {','.join(map(str, sizes_of['shift']))}"
    if "near" in groups:
        cmd += f" --near-sizes {','.join(map(str, sizes_of['near']))}"
        if reps_main is not None and reps_near != reps_main:
            cmd += f" --near-reps {reps_near}"
    if len(keys) < len(SCENARIOS):
        cmd += f" --populations {','.join(keys)}"
    w(f"- Command: `.venv/bin/python {cmd} --workers {workers}`"
      + (" (quick mode)" if quick else ""))
    w("- Replications per cell: "
      + "; ".join(f"{r} (" + ", ".join(g for g, c in groups.items()
                                        if any(reps_of[x] == r for x in c)) + ")"
                  for r in rep_values)
      + f"; bootstrap resamples per BCa interval: B = {resamples}; seed {seed}; confidence level "
      f"{level:.0%}.")
    w(f"- Run time: {seconds / 60:.1f} min with {workers} worker process"
      f"{'es' if workers > 1 else ''} on a 2-core machine shared with other work.")
    for r in rep_values:
        se = math.sqrt(level * (1 - level) / r)
        w(f"- Monte Carlo standard error of a coverage figure with {r} replications: "
          f"sqrt(p (1 - p) / reps) = {100 * se:.2f} percentage points at p = 95%; a figure between "
          f"{100 * (level - 2 * se):.1f}% and {100 * (level + 2 * se):.1f}% is consistent with "
          f"exact {level:.0%} coverage (two SEs), and below {100 * clear_threshold(r):.1f}% it is "
          f"clearly under {100 * UNDER:.1f}%.")
    w(f"- In the tables, **bold** marks undercoverage (below {100 * UNDER:.1f}%), _italics_ "
      f"conservative intervals (above {100 * OVER:.1f}%), and † a cell where the interval was "
      f"given in fewer than {SPARSE:.0%} of the data sets: its coverage is conditional on being "
      "given, is not judged, and the composite rows show what replaces it.")
    if resamples < 2000:
        w(f"- B = {resamples} keeps the run short; the project's default B = 2000 makes the BCa "
          "limits less noisy (extreme bootstrap quantiles settle slowly), so the BCa figures here "
          "are, if anything, slightly pessimistic.")
    w("- Data and bootstrap draws come from separate streams: SeedSequence(seed, "
      "spawn_key=(population, n, replication, 0 or 1)); results do not depend on the number of "
      "worker processes.")
    w("")

    # populations
    w("## Populations")
    w("")
    w("Group A is the first group; every signed index is A relative to B. In the medium-effect "
      "populations the shifts make A = P(X_A > X_B) + P(X_A = X_B)/2 about 0.64; the "
      "near-separation ones are normal location shifts with SD 1 in both groups and A = 0.90, "
      "0.95, 0.99, the shift being delta = sqrt(2) Phi^-1(A) (X_A - X_B ~ N(delta, 2)).")
    w("")
    w("| key | group A | group B | sizes (n_A, n_B) per column n | sizes studied |")
    w("| --- | --- | --- | --- | --- |")
    for s in scenarios:
        sz = "(n, 2n)" if s.b_size_factor == 2 else "(n, n)"
        studied = ", ".join(str(n) for k, n in cols if k == s.key)
        w(f"| {s.key} | {s.a.describe()} | {s.b.describe()} | {sz} | {studied} |")
    w("")
    if {"lognormal", "t3"} & set(keys):
        w("- `lognormal` and `t3` are pure shifts: both groups have the same shape and spread "
          "(t(3) has variance 3, so every mean-based target exists).")
    if "unequal" in keys:
        w("- `unequal`: the column labelled n has n_A = n and n_B = 2n ("
          + ", ".join(f"{n}/{2 * n}" for k, n in cols if k == "unequal")
          + "), and the smaller group has the larger SD, the case where pooled-variance methods "
          "are liberal.")
    if "ratings" in keys:
        w("- `ratings`: whole numbers 1..7 obtained by rounding a latent normal; with probabilities "
          + ", ".join(f"{p:.3f}" for p in SCENARIO_BY_KEY["ratings"].b.table()[1])
          + " for group B (values 1..7) most observations share their value with others.")
    if "near" in groups:
        w("- `sep90`, `sep95`, `sep99`: near separation. At A = 0.99 and n = 5 most samples do "
          "not overlap at all (complete separation), where A-hat = 1, the Brunner-Munzel "
          "interval is undefined and the BCa interval is withheld; the tables below count how "
          "often.")
    w("")
    w("### Population values")
    w("")
    w("Computed from the populations, not from the simulations. Two normal groups: closed forms "
      "(A = Phi((m_A - m_B) / sqrt(SD_A^2 + SD_B^2)), the median of X_A - X_B is m_A - m_B, the "
      "20% trimmed mean is the mean and the 20% winsorized variance is SD^2 [(1 - 2g) - "
      "2 z phi(z) + 2 g z^2] with g = 0.2, z = Phi^-1(1 - g)). Other continuous pairs: means and "
      "SDs from scipy, A by integrating F_B(Q_A(u)) over u in (0, 1), the Hodges-Lehmann shift as "
      "the root of an integral, trimmed means and winsorized variances by integrating the "
      "quantile function. The ratings: exact sums.")
    w("")
    w("- Cohen's d and Hedges' g: mean difference / sqrt((SD_A^2 + SD_B^2)/2) (pooled SD with equal "
      "weights; g estimates the same quantity with less bias).")
    w("- Glass's delta: mean difference / SD_B (the reference group, B, as in the default "
      "registry).")
    w("- d with unpooled SDs: mean difference / root mean square of the two SDs; with the "
      "definition above it equals d's target.")
    w(f"- robust d: {ROBUST_SCALE} x (20% trimmed mean_A - trimmed mean_B) / sqrt of the average of "
      "the two 20% winsorized variances (equal weights).")
    w("- Cliff's delta and the rank-biserial r (equal for two groups): 2A - 1.")
    w(f"- Not studied: {SKIPPED['r_from_z']}.")
    w("")
    w("| index | " + " | ".join(s.key for s in scenarios) + " |")
    w("| --- |" + " --- |" * len(scenarios))
    for name in names:
        w(f"| {LABELS[name]} | " + " | ".join(f"{truths[s.key][name]:.4f}" for s in scenarios)
          + " |")
    w("")
    if checks:
        w(f"Check by Monte Carlo ({checks['pairs']:,} independent pairs per population, drawn with "
          "the study's own samplers): A and the median of X_A - X_B.")
        w("")
        w("| population | A (closed form / integral / sum) | A (Monte Carlo) | difference in MC SEs "
          "| shift (closed form / integral / sum) | median of simulated X_A - X_B |")
        w("| --- | --- | --- | --- | --- | --- |")
        for s in scenarios:
            c = checks[s.key]
            t = truths[s.key]
            z = (c["prob_superiority"] - t["prob_superiority"]) / c["prob_superiority_se"]
            w(f"| {s.key} | {t['prob_superiority']:.5f} | {c['prob_superiority']:.5f} "
              f"(SE {c['prob_superiority_se']:.5f}) | {z:+.2f} | {t['hodges_lehmann']:.4f} | "
              f"{c['hodges_lehmann']:.4f} |")
        w("")

    # the tables
    w("## Coverage % (mean width)")
    w("")
    w("Rows: index and interval; columns: population and n per group (for `unequal`, n_A = n, "
      "n_B = 2n). Every interval comes from `pipeline.estimate_all` (`Effect.intervals`). Kind: "
      "`own` the index's own analytic interval, `more` an interval computed beside it "
      "(`Estimate.more`: test-matched and boundary-valid ones), `bootstrap` the BCa interval, "
      "`policy` what a user is shown: the reported interval (`Effect.ci_method`, the own interval "
      "or its fallback where that is undefined or withheld) and, for `[intervals] method = "
      "\"bootstrap\"`, the BCa interval where given, else the reported one. A `policy` row is "
      "shown only where it differs from the row it repeats (own, or BCa) in some data set of the "
      "table.")
    w("")
    for group, gcols in groups.items():
        shown = composite_differs(cells, names, own, gcols)
        w(f"### {GROUP_TITLES[group].format(sizes=', '.join(map(str, sizes_of[group])))}")
        w("")
        lines.extend(coverage_table(rows, gcols, order, own, shown))
        w("")
        hidden = [f"{LABELS[n]} [{METHOD_LABELS[m]}]" for n, m in order
                  if m in COMPOSITES and (n, m) in rows and (n, m) not in shown]
        if hidden:
            w("Equal to the row they repeat in every data set here (not shown): "
              + ", ".join(hidden) + ".")
            w("")
        missing = missing_table(cells, rows, gcols, order, own, shown)
        if missing:
            w(f"Data sets without the interval (left out of its coverage and width; out of "
              f"{'/'.join(str(r) for r in sorted({reps_of[c] for c in gcols}))} per cell):")
            w("")
            lines.extend(missing)
            w("")
        withheld = withheld_table(cells, names, gcols)
        if withheld:
            w("Why the BCa interval was withheld (`Effect.bootstrap_reason`), data sets per cell:")
            w("")
            lines.extend(withheld)
            w("")
        mix = reported_mix_table(cells, names, gcols, own)
        if mix:
            w("Where the reported interval came from (`Effect.ci_method`), data sets per cell, "
              "for the indices whose reported interval was not always their own:")
            w("")
            lines.extend(mix)
            w("")

    # size-weighted targets
    weighted = {}
    unequal_cols = [c for c in cols if c[0] == "unequal"]
    if unequal_cols:
        w("### Unequal sizes and spreads: the size-weighted target")
        w("")
        w("With n_B = 2 n_A the sample pooled SD estimates sqrt(((n_A - 1) SD_A^2 + (n_B - 1) SD_B^2)"
          " / (n_A + n_B - 2)), not the equal-weight SD used above. Against that size-weighted "
          "target (which changes with the sizes) the pooled-SD indices cover as follows.")
        w("")
        w("| index | interval | " + " | ".join(f"n={n}: target, coverage % (width)"
                                              for _, n in unequal_cols) + " |")
        w("| --- | --- |" + " ---: |" * len(unequal_cols))
        scen = SCENARIO_BY_KEY["unequal"]
        for name, method in order:
            if name not in ("cohen_d", "hedges_g", "robust_d") or method in COMPOSITES:
                continue
            parts = []
            for col in unequal_cols:
                ivs = interval_sets(cells[col], names).get((name, method))
                if ivs is None or not np.any(np.isfinite(ivs)):
                    parts = None
                    break
                target = size_weighted_values(scen, col[1])[name]
                cov, width, _ = coverage(ivs, target)
                parts.append(f"{target:.3f}, {_pct(cov)} ({_width(width)})")
                if method == own.get(name):
                    weighted.setdefault(name, []).append(f"{_pct(cov)}%")
            if parts:
                w(f"| {LABELS[name]} | {METHOD_LABELS.get(method, method)} | " + " | ".join(parts)
                  + " |")
        w("")

    ctx = Context(rows, cells, names, own, cols, groups, reps_of, differs, truths)
    w("## Reading")
    w("")
    lines.extend(reading(ctx))
    w("")
    if "near" in groups and ("prob_superiority", REPORTED) in rows:
        w("### A near separation and at small n")
        w("")
        lines.extend(superiority_near(ctx))
        w("")
    w("## Recommendation for the default policy")
    w("")
    lines.extend(recommendation(ctx, weighted))
    w("")
    return "\n".join(lines)


@dataclass(frozen=True)
class Context:
    """What the text sections read: the summaries and the layout of the run."""

    rows: dict
    cells: dict
    names: list
    own: dict
    cols: list
    groups: dict
    reps_of: dict
    differs: set
    truths: dict

    def clear(self, col) -> float:
        return clear_threshold(self.reps_of[col])

    def listed(self):
        """(index, method) rows that carry information of their own: composites only where
        they differ from the row they repeat."""
        return [key for key in self.rows if key[1] not in COMPOSITES or key in self.differs]


# ------------------------------------------------------------------ reading


def reading(ctx: Context) -> list[str]:
    holds, firm, borderline, conservative, sparse = [], [], [], [], []
    for name, method in ctx.listed():
        row = ctx.rows[(name, method)]
        label = row_label(name, method)
        judged = _judged(row, ctx.cols)
        thin = _sparse(row, ctx.cols)
        if thin:
            sparse.append(f"{label}: " + ", ".join(f"{_at(c)} ({_share(row[c].given)}%)"
                                                   for c in thin))
        if not judged:
            continue
        covs = [row[c].cov for c in judged]
        if _shown(min(covs)) >= UNDER:
            holds.append(f"{label} {_pct(min(covs))}-{_pct(max(covs))}% ({len(judged)} cells)")
        bad = sorted((c for c in judged if row[c].cov < ctx.clear(c)), key=lambda c: row[c].cov)
        if bad:
            worst = bad[0]
            firm.append(f"{label}: " + ", ".join(f"{_at(c)} {_pct(row[c].cov)}%" for c in bad)
                        + f" (in {_at(worst)} the interval lies wholly below the target in "
                        f"{_pct(row[worst].below)}% of the data sets where it is given and wholly "
                        f"above it in {_pct(row[worst].above)}%)")
        near = [f"{_at(c)} ({_pct(row[c].cov)}%)" for c in judged
                if _shown(row[c].cov) < UNDER and row[c].cov >= ctx.clear(c)]
        if near:
            borderline.append(f"{label}: " + ", ".join(near))
        high = _cell_list(row, ctx.cols, lambda s: _shown(s.cov) > OVER)
        if high:
            conservative.append(f"{label}: " + ", ".join(high))
    limits = sorted({round(100 * ctx.clear(c), 1) for c in ctx.cols})
    clear_txt = " or ".join(f"{x:.1f}%" for x in limits)
    out = [f"- At least {100 * UNDER:.1f}% in every cell where given in at least {SPARSE:.0%} of "
           "the data sets (range, number of such cells): "
           + ("; ".join(holds) if holds else "none") + "."]
    out.append(f"- Clear undercoverage (below {clear_txt}, i.e. more than two Monte Carlo SEs "
               f"under {100 * UNDER:.1f}%):")
    out.extend(f"  - {t}." for t in firm) if firm else out.append("  - none.")
    out.append(f"- Borderline (between the clear limit and {100 * UNDER:.1f}%, within noise of "
               "it): " + ("; ".join(borderline) if borderline else "none") + ".")
    out.append(f"- Conservative (above {100 * OVER:.1f}%): "
               + ("; ".join(conservative) if conservative else "none") + ".")
    if sparse:
        out.append(f"- Given in fewer than {SPARSE:.0%} of the data sets (share given; coverage "
                   "there is conditional on being given and is not judged): "
                   + "; ".join(sparse) + ".")
    out.append("- Cliff's delta and the rank-biserial r carry A's intervals through 2A - 1 "
               "(analytic and bootstrap alike), so their rows repeat A's coverage with doubled "
               "widths.")
    return out


def verdict(ctx: Context, row, cols) -> str:
    """One sentence on an interval over the cells `cols`."""
    judged = _judged(row, cols)
    thin = [c for c in cols if c not in row or row[c].given < SPARSE]
    parts = []
    if judged:
        covs = [row[c].cov for c in judged]
        under = [c for c in judged if _shown(row[c].cov) < UNDER]
        clear = [c for c in under if row[c].cov < ctx.clear(c)]
        span = (f"{_pct(min(covs))}%" if _pct(min(covs)) == _pct(max(covs))
                else f"{_pct(min(covs))}-{_pct(max(covs))}%")
        where = (f"the {len(judged)} cells" if len(judged) > 1 else "the one cell") + (
            " where it is given in most data sets" if thin else "")
        if any(row[c].missing for c in judged):
            where += ", counting only the data sets where it is given"
        if not under:
            parts.append(f"holds: no cell below {100 * UNDER:.1f}% ({span} over {where})")
        else:
            parts.append(f"does not hold: {span} over {where}, below {100 * UNDER:.1f}% in "
                         + ", ".join(f"{_at(c)} ({_pct(row[c].cov)}%)" for c in under)
                         + (f", of which clearly (more than two SEs) in "
                            + ", ".join(_at(c) for c in clear) if clear else ""))
        high = [c for c in judged if _shown(row[c].cov) > OVER]
        if high:
            parts.append("conservative (above 97.5%) in " + ", ".join(
                f"{_at(c)} ({_pct(row[c].cov)}%)" for c in high))
    shares = {c: (row[c].missing / row[c].reps if c in row else 1.0) for c in cols}
    worst_missing = max(cols, key=lambda c: shares[c])
    if shares[worst_missing] > 0:
        parts.append(f"not given in up to {_pct(shares[worst_missing])}% of the data sets "
                     f"({_at(worst_missing)})")
    if thin:
        parts.append(f"given in fewer than {SPARSE:.0%} of the data sets in "
                     + ", ".join(_at(c) for c in thin) + ", so not judged there")
    return "; ".join(parts)


def _row(ctx, name, method):
    return ctx.rows.get((name, method), {})


def superiority_near(ctx: Context) -> list[str]:
    """A near separation: every interval of A in the near-separation cells, and a verdict on
    each."""
    name = "prob_superiority"
    near = ctx.groups["near"]
    own = ctx.own.get(name)
    methods = [m for nm, m in ctx.rows if nm == name]
    extra = [m for m in methods if m not in (own, BCA, *COMPOSITES)]
    shown = [m for m in [own, *extra, BCA, REPORTED, BCA_ELSE] if m in methods]
    out = ["Every interval of A in the near-separation cells: coverage % (mean width) "
           "[share of data sets without the interval].", "",
           "| interval | kind | " + " | ".join(_at(c) for c in near) + " |",
           "| --- | --- |" + " ---: |" * len(near)]
    for m in shown:
        row = _row(ctx, name, m)
        texts = []
        for c in near:
            if c not in row:
                texts.append("- [100%]")
                continue
            s = row[c]
            texts.append(_cell(s, conservative=False)
                         + (f" [{_share(1 - s.given)}%]" if s.missing else ""))
        out.append(f"| {METHOD_LABELS.get(m, m)} | {kind_of(name, m, ctx.own)} | "
                   + " | ".join(texts) + " |")
    j = ctx.names.index(name)
    split = separation_split(ctx, name, near)
    for label, which in (("separated", 0), ("overlapping", 1)):
        texts = []
        for c in near:
            cov, width, count = split[c][which]
            texts.append("-" if not count else
                         f"{_pct(cov)} ({_width(width)}) [{_share(count / ctx.cells[c].reps)}% "
                         "of data sets]")
        out.append(f"| reported interval, {label} data sets | policy | " + " | ".join(texts) + " |")
    out.append("")
    out.append("The last two rows split the reported interval's data sets by whether the groups "
               "overlap; the bracket there gives the share of data sets of each kind.")
    out.append("")
    letters = iter("abcdefgh")
    if own:
        out.append(f"- ({next(letters)}) Brunner-Munzel (`{own}`, A's own interval): "
                   f"{verdict(ctx, _row(ctx, name, own), near)}.")
    for m in extra:
        out.append(f"- ({next(letters)}) `{m}` (beside the own interval): "
                   f"{verdict(ctx, _row(ctx, name, m), near)}.")
    if BCA in methods:
        own_fallback = {c: float(np.mean((ctx.cells[c].withheld[:, j] != "")
                                         & (ctx.cells[c].reported_method[:, j] == own)))
                        for c in near}
        top = max(near, key=lambda c: own_fallback[c])
        out.append(f"- ({next(letters)}) BCa bootstrap: {verdict(ctx, _row(ctx, name, BCA), near)}."
                   " With the reported interval where it is withheld (`BCa, else reported`, what "
                   "`method = \"bootstrap\"` shows): "
                   f"{verdict(ctx, _row(ctx, name, BCA_ELSE), near)}."
                   + (f" Where it is withheld without complete separation (resamples piled at a "
                      f"bound, too few distinct values) the stand-in is `{own}` itself: "
                      f"{_share(own_fallback[top])}% of the data sets in {_at(top)}."
                      if own_fallback[top] > 0 else ""))
    fallback = {c: float(np.mean(ctx.cells[c].reported_method[:, j] != own)) for c in near}
    most = max(near, key=lambda c: fallback[c])
    out.append(f"- ({next(letters)}) The reported interval (`Effect.ci_method`: the own interval, "
               f"or its fallback): {verdict(ctx, _row(ctx, name, REPORTED), near)}. It came from a "
               f"fallback in up to {_pct(fallback[most])}% of the data sets ({_at(most)}).")
    return out


def separation_split(ctx: Context, name, cols) -> dict:
    """Per cell: (coverage, mean width, count) of the reported interval of `name` on the data
    sets with complete separation (BCa withheld for that reason) and on the others."""
    j = ctx.names.index(name)
    out = {}
    for c in cols:
        cell = ctx.cells[c]
        separated = cell.withheld[:, j] == "complete separation"
        parts = []
        for mask in (separated, ~separated):
            if not np.any(mask):
                parts.append((math.nan, math.nan, 0))
                continue
            cov, width, _ = coverage(cell.reported[mask, j], ctx.truths[c[0]][name])
            parts.append((cov, width, int(np.count_nonzero(mask))))
        out[c] = tuple(parts)
    return out


def pooled_split(ctx: Context, name, cols) -> tuple:
    """The reported interval of `name` over all data sets of `cols` with complete separation, and
    over all the others: ((coverage, count), (coverage, count))."""
    j = ctx.names.index(name)
    hits, counts = [0, 0], [0, 0]
    for c in cols:
        cell = ctx.cells[c]
        separated = cell.withheld[:, j] == "complete separation"
        low, high = cell.reported[:, j, 0], cell.reported[:, j, 1]
        truth = ctx.truths[c[0]][name]
        inside = (low <= truth) & (truth <= high)
        for k, mask in enumerate((separated, ~separated)):
            hits[k] += int(np.count_nonzero(inside & mask))
            counts[k] += int(np.count_nonzero(mask))
    return tuple((hits[k] / counts[k] if counts[k] else math.nan, counts[k]) for k in (0, 1))


# ------------------------------------------------------------------ recommendation


def _width_ratio(row, base, cols) -> float:
    common = [c for c in _judged(row, cols) if c in _judged(base, cols)]
    if not common:
        return math.nan
    return float(np.mean([row[c].width / base[c].width for c in common]))


def _label_pick(ctx, name, method) -> str:
    if method == REPORTED:
        own = ctx.own.get(name)
        if own is None:
            return "BCa"
        return (f"own ({own}), with its fallbacks" if (name, REPORTED) in ctx.differs
                else f"own ({own})")
    return METHOD_LABELS.get(method, method)


def choose(ctx: Context, name) -> tuple[str, str]:
    """The interval the study favours for an index, and why: what the index reports now (its own
    interval, with the fallbacks) unless that clearly undercovers somewhere and another of its
    intervals (one beside it, or the BCa interval with the reported one where the BCa interval
    is withheld) has a better worst cell."""
    base = ctx.rows[(name, REPORTED)]
    b_min, b_at = _worst(base, ctx.cols)
    alternatives = [(m, row) for (nm, m), row in ctx.rows.items()
                    if nm == name and m not in (REPORTED, BCA, ctx.own.get(name))
                    and (m != BCA_ELSE or ctx.own.get(name) is not None)]
    if not alternatives:
        return REPORTED, (f"the only interval; worst cell {_pct(b_min)}% ({_at(b_at)})")
    scored = []
    for m, row in alternatives:
        a_min, a_at = _worst(row, ctx.cols)
        scored.append((a_min, m, a_at, row))
    scored.sort(key=lambda t: -t[0] if math.isfinite(t[0]) else math.inf)
    others = "; ".join(f"{METHOD_LABELS.get(m, m)} worst {_pct(a)}% ({_at(at)}), "
                       f"{_width_ratio(row, base, ctx.cols):.2f} times as wide"
                       for a, m, at, row in scored)
    clear_everywhere = all(base[c].cov >= ctx.clear(c) for c in _judged(base, ctx.cols))
    if clear_everywhere:
        return REPORTED, (f"never clearly undercovers (worst {_pct(b_min)}%, {_at(b_at)}); "
                          + others)
    bad = [f"{_at(c)} ({_pct(base[c].cov)}%)" for c in _judged(base, ctx.cols)
           if base[c].cov < ctx.clear(c)]
    best_min, best, _, _ = scored[0]
    if math.isfinite(best_min) and best_min > b_min:
        return best, ("the reported interval undercovers in " + ", ".join(bad) + "; " + others)
    return REPORTED, (f"no alternative has a better worst cell; reported worst {_pct(b_min)}% "
                      f"({_at(b_at)}); " + others)


def policy_rows(ctx: Context) -> tuple[list[str], list[str]]:
    """For each two-group branch of the built-in policy: its primary index's coverage under each
    setting of `[intervals] method` (worst cell over the populations the branch is meant for)
    and which of the indices listed beside it have a reported interval that undercovers there."""
    from auditor.policy import default_policy

    policy = default_policy()
    min_n = int(policy.settings.get("sample_size", {}).get("minimum_n", 10))
    shift_cols = ctx.groups.get("shift", [])
    near_cols = ctx.groups.get("near", [])
    smallest = {}
    for k, n in shift_cols:
        smallest[k] = min(n, smallest.get(k, n))
    selections = {
        "assumptions_hold": [("normal (all n)", [c for c in shift_cols if c[0] == "normal"]),
                             (f"near separation, n >= {min_n}",
                              [c for c in near_cols if c[1] >= min_n])],
        "small_sample": [(f"near separation at n < {min_n} (the branch is for n < {min_n}); the "
                          "other populations at their smallest n",
                          [c for c in near_cols if c[1] < min_n]
                          + [c for c in shift_cols if c[1] == smallest[c[0]]])],
        "heavy_ties": [("ratings (all n)", [c for c in shift_cols if c[0] == "ratings"])],
        "outliers": [("t3 (all n)", [c for c in shift_cols if c[0] == "t3"])],
        "non_normal": [("lognormal, t3 (all n)",
                        [c for c in shift_cols if c[0] in ("lognormal", "t3")])],
        "unequal_spread": [("unequal (all n)", [c for c in shift_cols if c[0] == "unequal"])],
    }
    flagged_branches = []
    out = ["| branch | populations (n) | primary | `method = \"analytic\"`: reported interval, "
           "worst | `method = \"bootstrap\"`: BCa, else reported, worst | indices beside it whose "
           "reported interval undercovers |",
           "| --- | --- | --- | ---: | ---: | --- |"]
    for check in ("assumptions_hold", *policy.precedence("two_groups")):
        branch = policy.branch("two_groups", check)
        if branch is None or check not in selections:
            continue
        for where, subset in selections[check]:
            if not subset:
                continue

            def worst(name, method):
                row = ctx.rows.get((name, method))
                if row is None or not _judged(row, subset):
                    return "none"
                cov, at = _worst(row, subset)
                return f"{_pct(cov)}% ({_at(at)})"

            flagged = []
            for name in branch.also:
                row = ctx.rows.get((name, REPORTED))
                if row is None or not _judged(row, subset):
                    continue
                cov, at = _worst(row, subset)
                if _shown(cov) < UNDER:
                    flagged.append(f"{LABELS[name]} {_pct(cov)}% ({_at(at)})")
            rep_row = ctx.rows.get((branch.primary, REPORTED))
            alt_row = ctx.rows.get((branch.primary, BCA_ELSE))
            if rep_row is not None and alt_row is not None and _judged(rep_row, subset):
                r_min, r_at = _worst(rep_row, subset)
                b_min, _ = _worst(alt_row, subset)
                if r_min < ctx.clear(r_at) and b_min > r_min:
                    flagged_branches.append(
                        f"`{check}` ({where}): the reported interval of {LABELS[branch.primary]} "
                        f"covers {_pct(r_min)}% in {_at(r_at)}, the BCa one (else reported) at "
                        f"worst {_pct(b_min)}%")
            boot = (worst(branch.primary, BCA_ELSE) if alt_row is not None
                    else worst(branch.primary, REPORTED))
            out.append(f"| {check} | {where} | {LABELS.get(branch.primary, branch.primary)} | "
                       f"{worst(branch.primary, REPORTED)} | {boot} | "
                       + ("; ".join(flagged) if flagged else "none") + " |")
    return out, flagged_branches


def superiority_advice(ctx: Context) -> list[str]:
    """Which interval the default policy should quote for A, from the numbers: the intervals a
    policy can quote on every data set (the reported one, an interval beside it that is always
    given, the BCa one with its fallback) over every cell."""
    name = "prob_superiority"
    own = ctx.own.get(name)
    if (name, REPORTED) not in ctx.rows:
        return []
    candidates = [(REPORTED, ctx.rows[(name, REPORTED)])]
    for (nm, m), row in ctx.rows.items():
        if nm != name or m in (REPORTED, own, BCA):
            continue
        if m != BCA_ELSE and any(c not in row or row[c].missing > ALWAYS * row[c].reps
                                 for c in ctx.cols):
            continue  # missing from some data sets: it would need a fallback of its own
        candidates.append((m, row))
    base = ctx.rows[(name, REPORTED)]

    def score(row):
        judged = _judged(row, ctx.cols)
        under = [c for c in judged if _shown(row[c].cov) < UNDER]
        clear = [c for c in under if row[c].cov < ctx.clear(c)]
        w_min, _ = _worst(row, ctx.cols)
        return len(clear), len(under), -w_min

    facts = []
    for m, row in candidates:
        w_min, w_at = _worst(row, ctx.cols)
        n_clear, n_under, _ = score(row)
        near_min, near_at = _worst(row, ctx.groups.get("near", []))
        facts.append(f"{_label_pick(ctx, name, m) if m == REPORTED else METHOD_LABELS.get(m, m)}: "
                     f"worst {_pct(w_min)}% ({_at(w_at)}) over all {len(_judged(row, ctx.cols))} "
                     f"cells, {n_under} below {100 * UNDER:.1f}% ({n_clear} clearly)"
                     + (f", near separation worst {_pct(near_min)}% ({_at(near_at)})"
                        if near_at is not None else "")
                     + ("" if m == REPORTED else
                        f", {_width_ratio(row, base, ctx.cols):.2f} times as wide as the reported "
                        "interval on average"))
    # the same failure criterion as `choose`: a cell clearly (two SEs) under UNDER
    holding = [(m, row) for m, row in candidates if score(row)[0] == 0]
    out = ["For A, the intervals a policy can quote on every data set (" + "; ".join(facts) + "):"]

    def name_of(m):
        return "the reported interval" if m == REPORTED else f"`{METHOD_LABELS.get(m, m)}`"

    failing = [f"{_at(c)} ({_pct(base[c].cov)}%)" for c in _judged(base, ctx.cols)
               if base[c].cov < ctx.clear(c)]

    def clear_cells(row):
        return [c for c in _judged(row, ctx.cols) if row[c].cov < ctx.clear(c)]

    near_keys = {k for k, _ in ctx.groups.get("near", [])}
    for m, row in candidates:
        bad = clear_cells(row)
        if not bad:
            continue
        at_near = [c for c in bad if c[0] in near_keys]
        out.append(f"- {name_of(m)[0].upper() + name_of(m)[1:]} clearly undercovers in "
                   + ", ".join(f"{_at(c)} ({_pct(row[c].cov)}%)" for c in bad)
                   + (": all near separation" if len(at_near) == len(bad) else
                      ": none near separation" if not at_near else "") + ".")
    if any(m == REPORTED for m, _ in holding):
        others = [m for m, _ in holding if m != REPORTED]
        out.append(f"- Keep quoting A's own interval (`{own}`, matched to the Brunner-Munzel test "
                   "under `match_test`) with its fallback where it is undefined: the reported "
                   "interval never clearly undercovers, near separation and at the smallest n "
                   "included."
                   + (" Never clearly under either: " + ", ".join(name_of(m) for m in others) + "."
                      if others else ""))
        return out
    if holding:
        pick = min(holding, key=lambda t: (score(t[1])[1], np.mean(
            [t[1][c].width for c in _judged(t[1], ctx.cols)])))[0]
        text = (f"- Quote {name_of(pick)} for A: it never clearly undercovers, while the reported "
                f"interval (`{own}`, with its fallback) does, in " + ", ".join(failing) + ".")
    else:
        pick = min(candidates, key=lambda t: score(t[1]))[0]
        text = ("- No interval of A avoids clear undercoverage in every cell; the least bad is "
                f"{name_of(pick)} (fewest cells clearly under, then fewest under, then the best "
                "worst cell)"
                + (f", {len(clear_cells(dict(candidates)[pick]))} cell(s) against "
                   f"{len(clear_cells(base))} for the reported interval." if pick != REPORTED
                   else "."))
    if pick == BCA_ELSE:
        text += (" That is `[intervals] method = \"bootstrap\"` for the branches with A as the "
                 "primary index; `match_test` would still quote the Brunner-Munzel interval "
                 "beside the Brunner-Munzel test, so it would have to be off there.")
    elif pick != REPORTED:
        text += (f" `{pick}` is matched to the Mann-Whitney test (`agreement.MATCHED`): with "
                 "`match_test` on, the branches that pair A with the Brunner-Munzel test quote "
                 "the failing Brunner-Munzel interval; pairing A with the Mann-Whitney test there "
                 "keeps interval and test in agreement, or A's own interval would have to change.")
    out.append(text)
    return out


def explanations(ctx: Context, weighted) -> list[str]:
    """Why the failures happen, with the numbers of this run (only for populations present)."""
    rows, own = ctx.rows, ctx.own
    shift_cols = ctx.groups.get("shift", [])
    keys = {k for k, _ in shift_cols}
    out = []
    if not shift_cols:
        return out
    sizes = sorted({n for _, n in shift_cols})
    small = min(sizes)

    def covs(name, method, key):
        return ", ".join(_cov(rows, name, method, (key, n)) for n in sizes if (key, n) in ctx.cells)

    if "unequal" in keys:
        out.append(
            "- Cohen's d and Hedges' g (noncentral t) assume equal variances. In `unequal` the "
            "smaller group has twice the SD, and they cover "
            + covs("cohen_d", own.get("cohen_d"), "unequal")
            + f" (d, n = {', '.join(map(str, sizes))}). Against the size-weighted target the "
            "figures are " + ", ".join(weighted.get("cohen_d", [])) + ", so the shortfall "
            "belongs to the interval, not to the choice of target. When the spread check fires, the "
            "policy's unequal-spread branch reports d with unpooled SDs, whose interval holds there ("
            + covs("d_unpooled", own.get("d_unpooled"), "unequal") + ").")
        out.append(
            "- Glass's delta's normal-approximation variance, (s_A^2/s_B^2)/n_A + 1/n_B + "
            "delta^2/(2 (n_B - 1)), allows unequal spreads (the first term) but still treats s_B "
            "as if the data were normal (the last). `unequal`: "
            + covs("glass_delta", own.get("glass_delta"), "unequal") + "."
            + (" `lognormal`, where the normal-theory variance of s_B is too small: "
               + covs("glass_delta", own.get("glass_delta"), "lognormal")
               + "." if "lognormal" in keys else "")
            + " (Before the unequal-spread term was added, `unequal` gave about 77%.)")
        out.append(
            "- The Hodges-Lehmann distribution-free interval is exact when the two distributions "
            "differ by a pure shift (normal, lognormal and t3 here: "
            + ", ".join(_cov(rows, "hodges_lehmann", own.get("hodges_lehmann"), (k, small))
                        for k in ("normal", "lognormal", "t3") if k in keys)
            + f" at n = {small}). `unequal` is not a shift: "
            + covs("hodges_lehmann", own.get("hodges_lehmann"), "unequal")
            + "; the BCa interval does better there ("
            + covs("hodges_lehmann", BCA, "unequal") + ").")
    if "ratings" in keys:
        out.append(
            "- With heavy ties the shift's population value is a whole number and the interval "
            "limits, pairwise differences of whole numbers, often fall on it, so both shift "
            "intervals cover more than promised ("
            + covs("hodges_lehmann", own.get("hodges_lehmann"), "ratings")
            + " for the distribution-free one).")
    if "normal" in keys:
        out.append(
            f"- The BCa interval of the mean difference is too narrow in small samples (normal "
            f"n = {small}: {_cov(rows, 'mean_difference', BCA, ('normal', small))}, against "
            f"{_cov(rows, 'mean_difference', own.get('mean_difference'), ('normal', small))} for "
            f"{own.get('mean_difference')}): bootstrap quantiles carry no t-type allowance for "
            "estimating the SD."
            + (f" Skewness adds to it (lognormal: {covs('mean_difference', BCA, 'lognormal')})."
               if "lognormal" in keys else ""))
    a_own = own.get("prob_superiority")
    a_an, a_bca = rows.get(("prob_superiority", a_own)), rows.get(("prob_superiority", BCA))
    if a_an and a_bca:
        judged = _judged(a_an, shift_cols)
        at_small = [c for c in _judged(a_bca, shift_cols) if c[1] == small and c in a_an]
        low, high = (f(a_an[c].cov for c in judged) for f in (min, max))
        text = (f"- Brunner-Munzel's interval for A covers {_pct(low)}-{_pct(high)}% across the "
                "medium-effect cells.")
        if at_small:
            ratio = np.mean([a_bca[c].width / a_an[c].width for c in at_small])
            text += (f" At n = {small} the BCa interval for A covers "
                     f"{_pct(min(a_bca[c].cov for c in at_small))}-"
                     f"{_pct(max(a_bca[c].cov for c in at_small))}% while being {ratio:.2f} "
                     "times as wide as Brunner-Munzel's.")
        out.append(text)
    near_cols = ctx.groups.get("near", [])
    if near_cols and a_an:
        j = ctx.names.index("prob_superiority")
        sep = {c: float(np.mean(ctx.cells[c].withheld[:, j] == "complete separation"))
               for c in near_cols}
        most = max(near_cols, key=lambda c: sep[c])
        (sep_cov, sep_n), (ovl_cov, ovl_n) = pooled_split(ctx, "prob_superiority", near_cols)
        used = Counter(m for c in near_cols for m, why in
                       zip(ctx.cells[c].reported_method[:, j], ctx.cells[c].withheld[:, j])
                       if why == "complete separation")
        fallback_used = ", ".join(m for m, _ in used.most_common()) or "none"
        out.append(
            "- Near separation the groups often do not overlap at all (complete separation in up "
            f"to {_pct(sep[most])}% of the data sets, {_at(most)}). There A-hat = 1, the "
            "Brunner-Munzel interval is undefined and the BCa interval is withheld, so their "
            "coverage figures describe only the data sets that overlap, a selected subset; the "
            "`policy` rows include the fallback on the separated data sets."
            + (f" Over all near-separation cells the reported interval covers {_pct(sep_cov)}% of "
               f"the {sep_n} separated data sets (the fallback, `{fallback_used}` here) "
               f"and {_pct(ovl_cov)}% of the {ovl_n} overlapping ones (`{a_own}`): the fallback "
               "repairs the separated samples, and what remains short is the own interval on "
               "samples that overlap a little." if sep_n and ovl_n else ""))
        bm_above = [(c, a_an[c].above) for c in _judged(a_an, near_cols)]
        if bm_above:
            c_top, above = max(bm_above, key=lambda t: t[1])
            out.append(
                f"- Why `{a_own}` falls short there: its variance is estimated from the placements "
                "(ranks within and across groups), which barely vary when nearly every A value "
                "lies above every B value, so the interval is too narrow and sits above the "
                f"target: wholly above it in {_pct(above)}% of the data sets in {_at(c_top)} "
                f"(coverage {_pct(a_an[c_top].cov)}%). The proportional-odds score interval takes "
                "its variance at each candidate value from a model instead, and it does not "
                "shrink to nothing at the bound.")
    po = next((m for nm, m in rows if nm == "prob_superiority" and m not in
               (a_own, BCA, *COMPOSITES)), None)
    unequal = [c for c in shift_cols if c[0] == "unequal"]
    if po and unequal and a_an:
        out.append(
            f"- `{po}` takes its variance from the proportional-odds (logistic shift) model, which "
            "assumes the two groups differ in location on one common scale. In `unequal` (SD 2 "
            "against 1, n against 2n) they do not, and it covers "
            + ", ".join(_cov(rows, "prob_superiority", po, c) for c in unequal)
            + f", where `{a_own}`, which estimates the variance from the data, covers "
            + ", ".join(_cov(rows, "prob_superiority", a_own, c) for c in unequal) + ".")
    return out


def recommendation(ctx: Context, weighted=None) -> list[str]:
    limits = sorted({round(100 * ctx.clear(c), 1) for c in ctx.cols})
    out = ["Rule: keep what an index reports now (its own interval, with the fallbacks of "
           "`estimate_all` where that one is undefined or withheld) unless it clearly undercovers "
           f"somewhere (below {' or '.join(f'{x:.1f}%' for x in limits)}) and another of its "
           "intervals (one beside it, or the BCa interval with the reported one where the BCa "
           "interval is withheld) has a better worst cell; cells where an interval is given in "
           f"fewer than {SPARSE:.0%} of the data sets are not judged. The analytic intervals need "
           "no resampling and do not change with the seed.",
           ""]
    picks = {}
    for family, names in FAMILIES.items():
        parts = []
        for name in names:
            if (name, REPORTED) not in ctx.rows:
                continue
            pick, why = choose(ctx, name)
            picks[name] = pick
            parts.append(f"{LABELS[name]}: **{_label_pick(ctx, name, pick)}** - {why}")
        if parts:
            out.append(f"- {family}: " + "; ".join(parts) + ".")
    out.append("")
    out.extend(superiority_advice(ctx))
    out.append("")
    out.append("The policy's `[intervals] method` chooses the interval quoted for the primary "
               "index. Below, each two-group branch of the built-in policy is read against the "
               "populations it is meant for (the actual branch depends on each sample's screening, "
               "so this is a guide, not a simulation of the decision):")
    out.append("")
    table, flagged_branches = policy_rows(ctx)
    out.extend(table)
    out.append("")
    if flagged_branches:
        out.append("- Keep `method = \"analytic\"` as the default except in: "
                   + "; ".join(flagged_branches) + ".")
    else:
        out.append("- Keep `method = \"analytic\"` as the default: the primary index's reported "
                   "interval never clearly undercovers in any branch, or the BCa interval does no "
                   "better there.")
    keep = [LABELS[n] for n, p in picks.items() if p == REPORTED and n in ctx.own]
    switch = [f"{LABELS[n]} (to {METHOD_LABELS.get(p, p)})" for n, p in picks.items()
              if p != REPORTED]
    out.append(f"- Keep the own interval (with its fallbacks) for: {', '.join(keep) or 'none'}.")
    out.append("- Prefer another interval (the reported one clearly undercovers in some "
               "population) for: " + (", ".join(switch) if switch else "none")
               + (" (robust d has only the BCa interval)." if "robust_d" not in ctx.own else "."))
    out.append("")
    out.append("Why, in this run:")
    out.append("")
    out.extend(explanations(ctx, weighted or {}))
    return out


# ------------------------------------------------------------------ command line


def _sizes(text: str | None, default) -> list[int]:
    return [int(s) for s in text.split(",")] if text else list(default)


def parse_args(argv=None):
    p = argparse.ArgumentParser(description=__doc__.split("\n\n")[0],
                                formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("--reps", type=int, default=None, help="replications per cell (default 1500)")
    p.add_argument("--near-reps", type=int, default=None,
                   help="replications per near-separation cell (default: as --reps)")
    p.add_argument("--sizes", default=None,
                   help="per-group sizes of the medium-effect populations, comma separated "
                        "(default 10,20,50)")
    p.add_argument("--near-sizes", default=None,
                   help="per-group sizes of the near-separation populations (default 5,10,20)")
    p.add_argument("--resamples", type=int, default=None, help="bootstrap resamples B (default 2000)")
    p.add_argument("--seed", type=int, default=20240917, help="seed of every random draw")
    p.add_argument("--populations", default=None,
                   help="population keys, comma separated (default all: "
                        + ",".join(s.key for s in SCENARIOS) + ")")
    p.add_argument("--workers", type=int, default=2, help="worker processes (default 2)")
    p.add_argument("--quick", action="store_true",
                   help="small run for a smoke test: reps 100, B 300, Monte Carlo check 10^6 pairs")
    p.add_argument("--check-pairs", type=int, default=None,
                   help=f"pairs in the Monte Carlo check of A and the shift (default {TRUTH_PAIRS:.0e},"
                        " 10^6 with --quick)")
    p.add_argument("--out", default="docs/coverage.md", help="Markdown file to write")
    p.add_argument("--save-raw", default=None, metavar="FILE",
                   help="also keep the simulated estimates and intervals in FILE (a pickle)")
    p.add_argument("--from-raw", default=None, metavar="FILE",
                   help="write the report from a file of --save-raw instead of simulating (the "
                        "settings and run time are those of that run)")
    return p.parse_args(argv)


RAW_FORMAT = 1  # version of the --save-raw content


def save_raw(path, run: dict) -> None:
    with open(path, "wb") as f:
        pickle.dump({"format": RAW_FORMAT, **run}, f, protocol=pickle.HIGHEST_PROTOCOL)


def load_raw(path) -> dict:
    """A run kept by --save-raw (a file this script wrote: pickle runs code on loading, so load
    only your own files)."""
    with open(path, "rb") as f:
        run = pickle.load(f)
    if run.get("format") != RAW_FORMAT:
        raise ValueError(f"{path}: not a raw file of this version of the coverage study")
    return run


def main(argv=None) -> int:
    args = parse_args(argv)
    if args.from_raw:
        run = load_raw(args.from_raw)
        return write_report(run, args.out)
    reps = args.reps if args.reps is not None else (100 if args.quick else 1500)
    near_reps = args.near_reps if args.near_reps is not None else reps
    resamples = args.resamples if args.resamples is not None else (300 if args.quick else 2000)
    sizes = {"shift": _sizes(args.sizes, DEFAULT_SIZES["shift"]),
             "near": _sizes(args.near_sizes, DEFAULT_SIZES["near"])}
    keys = (args.populations.split(",") if args.populations else [s.key for s in SCENARIOS])
    unknown = [k for k in keys if k not in SCENARIO_BY_KEY]
    smallest = min(min(v) for v in sizes.values())
    if unknown or min(reps, near_reps) < 1 or resamples < 100 or smallest < 5:
        print(f"coverage_study: bad settings (unknown populations {unknown}; need reps >= 1, "
              "resamples >= 100, sizes >= 5)", file=sys.stderr)
        return 2
    started = time.perf_counter()
    print("population values and their Monte Carlo check ...", file=sys.stderr)
    truths = {k: true_values(SCENARIO_BY_KEY[k]) for k in keys}
    pairs = args.check_pairs or (1_000_000 if args.quick else TRUTH_PAIRS)
    index_of = {s.key: i for i, s in enumerate(SCENARIOS)}
    checks = {k: monte_carlo_check(SCENARIO_BY_KEY[k], pairs, args.seed, index_of[k]) for k in keys}
    checks["pairs"] = pairs

    def progress(done, total, elapsed):
        eta = elapsed / done * (total - done)
        print(f"\r{done}/{total} blocks of up to {BLOCK} replications, {elapsed / 60:.1f} min, "
              f"about {eta / 60:.1f} min left", end="", file=sys.stderr, flush=True)

    plan = study_plan(keys, sizes, reps, near_reps)
    cells = simulate(plan, resamples, args.seed, LEVEL, args.workers, progress)
    print("", file=sys.stderr)
    seconds = time.perf_counter() - started
    run = {"cells": cells, "plan": plan, "resamples": resamples, "seed": args.seed,
           "workers": args.workers, "seconds": seconds, "truths": truths, "checks": checks,
           "quick": args.quick}
    if args.save_raw:
        save_raw(args.save_raw, run)
    return write_report(run, args.out)


def write_report(run: dict, path) -> int:
    text = render(run["cells"], run["plan"], run["resamples"], run["seed"], run["workers"],
                  run["seconds"], run["truths"], run["checks"], quick=run["quick"])
    out = Path(path)
    out.parent.mkdir(parents=True, exist_ok=True)
    out.write_text(text, encoding="utf-8")
    print(f"wrote {out} (simulation {run['seconds'] / 60:.1f} min)", file=sys.stderr)
    return 0


if __name__ == "__main__":
    sys.exit(main())
