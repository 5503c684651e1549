"""Coverage study of the two-group intervals: analytic and BCa bootstrap, across populations.

For every index of `auditor.effects.two_group_effects()` and each interval it offers (its own
analytic interval when it has one, and the BCa bootstrap interval of `pipeline.estimate_all`),
the study draws many pairs of samples from known populations and records how often the interval
contains the population value of the index (coverage) and how wide it is on average.

    .venv/bin/python tools/coverage_study.py                      # full run, writes docs/coverage.md
    .venv/bin/python tools/coverage_study.py --quick --out /tmp/c.md   # a few minutes of smoke test

Population values are computed from the populations themselves (numerical integration over the
quantile function, or exact sums for discrete populations), never from the simulated estimates.
r = Z / sqrt(N) is left out: its population value changes with N, so it has no fixed target.

Randomness: replication `rep` of population `p` at size `n` draws its data from
SeedSequence(seed, spawn_key=(p, n, rep, 0)) and its bootstrap from spawn_key (p, n, rep, 1). The
results therefore do not depend on the number of worker processes or on how the replications are
split among them, and the data do not change with the number of resamples.
"""

from __future__ import annotations

import argparse
import math
import sys
import time
import warnings
from collections import Counter
from concurrent.futures import ProcessPoolExecutor
from dataclasses import dataclass
from functools import cached_property
from pathlib import Path

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
            return f"N({self.loc:g}, SD {self.scale:g})"
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

    def sizes(self, n: int) -> tuple[int, int]:
        return n, self.b_size_factor * n

    def draw(self, rng: np.random.Generator, n: int) -> tuple[np.ndarray, np.ndarray]:
        na, nb = self.sizes(n)
        return self.a.sample(rng, na), self.b.sample(rng, nb)


# Shifts chosen so that A = P(X_A > X_B) + P(X_A = X_B)/2 is about 0.64 in every scenario
# (a "medium" effect on Vargha and Delaney's scale).
SCENARIOS = (
    Scenario("normal", "normal, shift", Continuous("normal", 0.5), Continuous("normal", 0.0)),
    Scenario("lognormal", "lognormal, shift", Continuous("lognormal", 0.43, shape=1.0),
             Continuous("lognormal", 0.0, shape=1.0)),
    Scenario("t3", "t(3), shift", Continuous("t", 0.63, shape=3.0), Continuous("t", 0.0, shape=3.0)),
    Scenario("unequal", "normal, SD 2 vs 1, n vs 2n", Continuous("normal", 0.8, 2.0),
             Continuous("normal", 0.0, 1.0), b_size_factor=2),
    Scenario("ratings", "ratings 1-7 (ties)", RoundedNormal.make(4.7, 1.3),
             RoundedNormal.make(4.0, 1.3)),
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


def true_values(scenario: Scenario) -> dict[str, float]:
    """Population value of every index with a fixed target (A relative to B).

    Standardized differences: Cohen's d and Hedges' g divide by the pooled SD with equal weights,
    sqrt((sd_A^2 + sd_B^2)/2); Glass's delta by the reference group's SD (B); d with unpooled SDs
    by the root mean square of the two SDs (the same number); robust d is 0.642 times the
    difference of the 20% trimmed means over the root of the average of the 20% winsorized
    variances.
    """
    (ma, sa), (mb, sb) = mean_sd(scenario.a), mean_sd(scenario.b)
    diff = ma - mb
    rms = math.sqrt((sa**2 + sb**2) / 2)
    wa, wb = winsorized_variance(scenario.a), winsorized_variance(scenario.b)
    a = prob_superiority(scenario.a, scenario.b)
    return {
        "mean_difference": diff,
        "cohen_d": diff / rms,
        "hedges_g": diff / rms,
        "glass_delta": diff / sb,
        "d_unpooled": diff / rms,
        "robust_d": ROBUST_SCALE * (trimmed_mean(scenario.a) - trimmed_mean(scenario.b))
        / math.sqrt((wa + wb) / 2),
        "prob_superiority": a,
        "cliff_delta": 2 * a - 1,
        "rank_biserial": 2 * a - 1,
        "hodges_lehmann": hodges_lehmann_shift(scenario.a, scenario.b),
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


def replicate(scenario_index: int, n: int, rep: int, seed: int, resamples: int, level: float,
              specs) -> tuple[np.ndarray, np.ndarray, np.ndarray, list[str]]:
    """One simulated data set: estimates, analytic intervals (from `spec.estimate`) and BCa
    intervals (from `estimate_all`, `resamples` stratified resamples), NaN where undefined."""
    scenario = SCENARIOS[scenario_index]
    data_rng, boot_rng = (
        np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(scenario_index, n, rep, s)))
        for s in (0, 1))
    a, b = scenario.draw(data_rng, n)
    a, b = np.sort(a), np.sort(b)  # as the pipeline does; no index depends on the order
    k = len(specs)
    est = np.full(k, np.nan)
    analytic = np.full((k, 2), np.nan)
    boot = np.full((k, 2), np.nan)
    methods = []
    with warnings.catch_warnings(), np.errstate(all="ignore"):
        warnings.simplefilter("ignore")
        effects, _, _ = estimate_all(specs, (a, b), level, resamples, boot_rng)
        for j, (spec, effect) in enumerate(zip(specs, effects)):
            own = spec.estimate(a, b, level)
            if own.value is not None:
                est[j] = own.value
            if own.interval is not None:
                analytic[j] = own.interval.low, own.interval.high
                methods.append(f"{spec.name}:{own.interval.method}")
            for iv in effect.intervals:
                if iv.method == "bca_bootstrap":
                    boot[j] = iv.low, iv.high
    return est, analytic, boot, methods


def run_block(task) -> tuple:
    """Replications start..stop-1 of one cell (worker entry point)."""
    scenario_index, n, start, stop, seed, resamples, level = task
    specs = tuple(s for s in two_group_effects() if s.name not in SKIPPED)
    parts = [replicate(scenario_index, n, rep, seed, resamples, level, specs)
             for rep in range(start, stop)]
    est = np.stack([p[0] for p in parts])
    analytic = np.stack([p[1] for p in parts])
    boot = np.stack([p[2] for p in parts])
    methods = Counter(m for p in parts for m in p[3])
    return (scenario_index, n, start), est, analytic, boot, methods


@dataclass
class Cell:
    est: np.ndarray       # (reps, k)
    analytic: np.ndarray  # (reps, k, 2)
    boot: np.ndarray      # (reps, k, 2)
    methods: Counter


def simulate(scenario_keys, sizes, reps: int, resamples: int, seed: int, level: float = LEVEL,
             workers: int = 2, progress=None) -> dict[tuple[str, int], Cell]:
    """Run every cell; the result does not depend on `workers`."""
    index_of = {s.key: i for i, s in enumerate(SCENARIOS)}
    tasks = [(index_of[key], n, start, min(reps, start + BLOCK), seed, resamples, level)
             for key in scenario_keys for n in sizes for start in range(0, reps, BLOCK)]
    blocks = {}
    total = len(tasks)
    started = time.perf_counter()

    def record(result):
        blocks[result[0]] = result[1:]
        if progress is not None:
            progress(len(blocks), total, time.perf_counter() - started)

    if workers <= 1:
        for task in tasks:
            record(run_block(task))
    else:
        with ProcessPoolExecutor(max_workers=workers) as pool:
            for result in pool.map(run_block, tasks):
                record(result)
    cells = {}
    for key in scenario_keys:
        for n in sizes:
            parts = [blocks[(index_of[key], n, start)] for start in range(0, reps, BLOCK)]
            cells[(key, n)] = Cell(np.concatenate([p[0] for p in parts]),
                                   np.concatenate([p[1] for p in parts]),
                                   np.concatenate([p[2] for p in parts]),
                                   sum((p[3] for p in parts), Counter()))
    return cells


def coverage(intervals: np.ndarray, truth: float) -> tuple[float, float, int]:
    """(share of defined intervals containing `truth`, their mean width, number undefined)."""
    ok = np.all(np.isfinite(intervals), axis=1)
    if not np.any(ok):
        return math.nan, math.nan, int(intervals.shape[0])
    low, high = intervals[ok, 0], intervals[ok, 1]
    hits = (low <= truth) & (truth <= high)
    return float(np.mean(hits)), float(np.mean(high - low)), int(np.count_nonzero(~ok))


def misses(intervals: np.ndarray, truth: float) -> tuple[float, float]:
    """Shares of defined intervals entirely below and entirely above `truth`."""
    ok = np.all(np.isfinite(intervals), axis=1)
    low, high = intervals[ok, 0], intervals[ok, 1]
    return float(np.mean(high < truth)), float(np.mean(low > truth))


# ------------------------------------------------------------------ report


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


def _pct(x: float, digits: int = 1) -> str:
    return "n/a" if not math.isfinite(x) else f"{100 * x:.{digits}f}"


def _width(x: float) -> str:
    if not math.isfinite(x):
        return "n/a"
    return f"{x:#.3g}" if x < 10 else f"{x:.1f}"


def analytic_method_names(cells, names) -> dict[str, str]:
    """The analytic interval's method per index (the most frequent one; others noted)."""
    total = sum((c.methods for c in cells.values()), Counter())
    out = {}
    for name in names:
        found = [(count, m.split(":", 1)[1]) for m, count in total.items()
                 if m.split(":", 1)[0] == name]
        if found:
            out[name] = max(found)[1]
    return out


def summarise(cells, truths, scenario_keys, sizes, names):
    """rows[(name, kind)][(key, n)] = (coverage, width, undefined, below, above)."""
    rows = {}
    for name in names:
        j = names.index(name)
        for kind in ("analytic", "bca"):
            row = {}
            for key in scenario_keys:
                for n in sizes:
                    cell = cells[(key, n)]
                    ivs = cell.analytic[:, j] if kind == "analytic" else cell.boot[:, j]
                    if not np.any(np.isfinite(ivs)):
                        continue
                    truth = truths[key][name]
                    cov, width, undefined = coverage(ivs, truth)
                    below, above = misses(ivs, truth)
                    row[(key, n)] = (cov, width, undefined, below, above)
            if row:
                rows[(name, kind)] = row
    return rows


def render(cells, scenario_keys, sizes, reps, resamples, seed, workers, seconds, truths,
           checks, level=LEVEL, quick=False) -> str:
    names = index_names()
    scenarios = [SCENARIO_BY_KEY[k] for k in scenario_keys]
    methods = analytic_method_names(cells, names)
    rows = summarise(cells, truths, scenario_keys, sizes, names)
    se95 = math.sqrt(level * (1 - level) / reps)
    lines = []
    w = lines.append
    w("# Coverage of the two-group intervals")
    w("")
    w("How often each interval that `auditor` reports for two independent groups contains the "
      "population value of its index, and how wide it is, under five population pairs and three "
      "sample sizes. Written by `tools/coverage_study.py`; rerun it with the command below to "
      "reproduce every number (the seed fixes all random draws).")
    w("")
    w("## Settings")
    w("")
    cmd = (f"tools/coverage_study.py --reps {reps} --resamples {resamples} --seed {seed} "
           f"--sizes {','.join(map(str, sizes))}")
    w(f"- Command: `.venv/bin/python {cmd}`" + (" (quick mode)" if quick else ""))
    w(f"- Replications per cell: {reps}; bootstrap resamples per BCa interval: B = {resamples}; "
      f"seed {seed}; confidence level {level:.0%}.")
    w(f"- Run time: {seconds / 60:.1f} min with {workers} worker process"
      f"{'es' if workers > 1 else ''} on a 2-core machine shared with other work.")
    w(f"- Monte Carlo standard error of a coverage figure: sqrt(p (1 - p) / reps) = "
      f"{100 * se95:.2f} percentage points at p = 95%. A figure between "
      f"{100 * (level - 2 * se95):.1f}% and {100 * (level + 2 * se95):.1f}% is consistent with "
      f"exact {level:.0%} coverage (two SEs).")
    w(f"- In the tables, **bold** marks undercoverage (below {100 * UNDER:.1f}%) and _italics_ "
      f"conservative intervals (above {100 * OVER:.1f}%).")
    if resamples < 2000:
        w(f"- B = {resamples} keeps the run short; the project's default B = 2000 makes the BCa "
          "limits less noisy (extreme bootstrap quantiles settle slowly), so the BCa figures here "
          "are, if anything, slightly pessimistic.")
    w("- Data and bootstrap draws come from separate streams: SeedSequence(seed, "
      "spawn_key=(population, n, replication, 0 or 1)); results do not depend on the number of "
      "worker processes.")
    w("")
    w("## Populations")
    w("")
    w("Group A is the first group; every signed index is A relative to B. The shifts make "
      "A = P(X_A > X_B) + P(X_A = X_B)/2 about 0.64 in every scenario.")
    w("")
    w("| key | group A | group B | sizes (n_A, n_B) per column n |")
    w("| --- | --- | --- | --- |")
    for s in scenarios:
        sz = "(n, 2n)" if s.b_size_factor == 2 else "(n, n)"
        w(f"| {s.key} | {s.a.describe()} | {s.b.describe()} | {sz} |")
    w("")
    w("- `lognormal` and `t3` are pure shifts: both groups have the same shape and spread (t(3) has "
      "variance 3, so every mean-based target exists).")
    w("- `unequal`: the column labelled n has n_A = n and n_B = 2n ("
      + ", ".join(f"{n}/{2 * n}" for n in sizes) + "), and the smaller group has the larger SD, "
      "the case where pooled-variance methods are liberal.")
    w("- `ratings`: whole numbers 1..7 obtained by rounding a latent normal; with probabilities "
      + ", ".join(f"{p:.3f}" for p in scenarios[-1].b.table()[1]) + " for group B (values 1..7) "
      "most observations share their value with others."
      if scenarios and scenarios[-1].key == "ratings" else "")
    w("")
    w("### Population values")
    w("")
    w("Computed from the populations, not from the simulations: means and SDs exactly (scipy) or "
      "by exact sums (ratings); A by integrating F_B(Q_A(u)) over u in (0, 1) (exact sums for the "
      "ratings); the Hodges-Lehmann shift as the median of the distribution of X_A - X_B (root of "
      "an integral; exact for the ratings); trimmed means and winsorized variances by integrating "
      "the quantile function (exact sums for the ratings).")
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
    header = "| index | " + " | ".join(s.key for s in scenarios) + " |"
    w(header)
    w("| --- |" + " --- |" * len(scenarios))
    for name in names:
        w(f"| {LABELS[name]} | " + " | ".join(f"{truths[s.key][name]:.4f}" for s in scenarios)
          + " |")
    w("")
    if checks:
        w(f"Check by Monte Carlo ({checks['pairs']:,} independent pairs per population, drawn with "
          "the study's own samplers): A and the median of X_A - X_B.")
        w("")
        w("| population | A (integral / sum) | A (Monte Carlo) | difference in MC SEs | shift "
          "(integral / sum) | median of simulated X_A - X_B |")
        w("| --- | --- | --- | --- | --- | --- |")
        for s in scenarios:
            c = checks[s.key]
            t = truths[s.key]
            z = (c["prob_superiority"] - t["prob_superiority"]) / c["prob_superiority_se"]
            w(f"| {s.key} | {t['prob_superiority']:.5f} | {c['prob_superiority']:.5f} "
              f"(SE {c['prob_superiority_se']:.5f}) | {z:+.2f} | {t['hodges_lehmann']:.4f} | "
              f"{c['hodges_lehmann']:.4f} |")
        w("")

    # main table
    w("## Coverage % (mean width)")
    w("")
    w("Rows: index and interval; columns: population and n per group (for `unequal`, n_A = n, "
      "n_B = 2n). Analytic intervals come from the index's `estimate` function, BCa intervals "
      "from `pipeline.estimate_all`.")
    w("")
    cols = [(s.key, n) for s in scenarios for n in sizes]
    w("| index | interval | " + " | ".join(f"{k} n={n}" for k, n in cols) + " |")
    w("| --- | --- |" + " ---: |" * len(cols))
    undefined = {}  # row label -> ((population, n, count), ...)
    for (name, kind), row in rows.items():
        method = methods.get(name, "analytic") if kind == "analytic" else "BCa bootstrap"
        cells_txt = []
        for col in cols:
            if col not in row:
                cells_txt.append("")
                continue
            cov, width, n_undefined, _, _ = row[col]
            txt = f"{_pct(cov)} ({_width(width)})"
            shown = round(1000 * cov) / 1000  # mark what the reader sees
            if shown < UNDER:
                txt = f"**{txt}**"
            elif shown > OVER:
                txt = f"_{txt}_"
            cells_txt.append(txt)
            if n_undefined:
                undefined.setdefault(f"{LABELS[name]} [{method}]", []).append(
                    (col[0], col[1], n_undefined))
        w(f"| {LABELS[name]} | {method} | " + " | ".join(cells_txt) + " |")
    w("")
    other = sum((c.methods for c in cells.values()), Counter())
    fallbacks = [f"{m.split(':')[0]} used `{m.split(':')[1]}` in {c} data sets"
                 for m, c in other.items() if methods.get(m.split(":")[0]) != m.split(":")[1]]
    if undefined:
        groups = {}
        for label, where in undefined.items():
            groups.setdefault(tuple(where), []).append(label)
        w("Intervals that were undefined in some data sets (left out of that cell's coverage and "
          f"width; out of {reps} each): "
          + "; ".join(", ".join(labels) + ": " + ", ".join(f"{k} n={n} {c}" for k, n, c in where)
                      for where, labels in groups.items()) + ".")
        w("")
    if fallbacks:
        w("Analytic fallbacks: " + "; ".join(fallbacks) + ".")
        w("")

    # size-weighted targets
    weighted = {}
    if "unequal" in scenario_keys:
        j_names = ["cohen_d", "hedges_g", "robust_d"]
        w("### Unequal sizes and spreads: the size-weighted target")
        w("")
        w("With n_B = 2 n_A the sample pooled SD estimates sqrt(((n_A - 1) SD_A^2 + (n_B - 1) SD_B^2)"
          " / (n_A + n_B - 2)), not the equal-weight SD used above. Against that size-weighted "
          "target (which changes with the sizes) the pooled-SD indices cover as follows.")
        w("")
        w("| index | interval | " + " | ".join(f"n={n}: target, coverage % (width)" for n in sizes)
          + " |")
        w("| --- | --- |" + " ---: |" * len(sizes))
        scen = SCENARIO_BY_KEY["unequal"]
        for name in j_names:
            j = names.index(name)
            for kind in ("analytic", "bca"):
                parts = []
                for n in sizes:
                    cell = cells[("unequal", n)]
                    ivs = cell.analytic[:, j] if kind == "analytic" else cell.boot[:, j]
                    if not np.any(np.isfinite(ivs)):
                        parts = None
                        break
                    target = size_weighted_values(scen, n)[name]
                    cov, width, _ = coverage(ivs, target)
                    parts.append(f"{target:.3f}, {_pct(cov)} ({_width(width)})")
                    if kind == "analytic":
                        weighted.setdefault(name, []).append(f"{_pct(cov)}%")
                if parts:
                    method = methods.get(name, "analytic") if kind == "analytic" else "BCa bootstrap"
                    w(f"| {LABELS[name]} | {method} | " + " | ".join(parts) + " |")
        w("")

    w("## Reading")
    w("")
    lines.extend(reading(rows, methods, cols, reps))
    w("")
    w("## Recommendation for the default policy")
    w("")
    lines.extend(recommendation(rows, methods, cols, sizes, reps, weighted))
    w("")
    return "\n".join(lines)


def _cell_list(row, cols, test) -> list[str]:
    return [f"{k} n={n} ({_pct(row[(k, n)][0])}%)" for k, n in cols
            if (k, n) in row and test(round(1000 * row[(k, n)][0]) / 1000)]


def _row_label(name, kind, methods) -> str:
    return f"{LABELS[name]} [{methods.get(name, 'analytic') if kind == 'analytic' else 'BCa'}]"


def clear_threshold(reps: int, level: float = LEVEL) -> float:
    """Coverage below UNDER by more than two Monte Carlo SEs: clearly undercovering."""
    return UNDER - 2 * math.sqrt(level * (1 - level) / reps)


def reading(rows, methods, cols, reps) -> list[str]:
    clear = clear_threshold(reps)
    holds, firm, borderline, conservative = [], [], [], []
    for (name, kind), row in rows.items():
        covs = [row[c][0] for c in cols if c in row]
        label = _row_label(name, kind, methods)
        if round(1000 * min(covs)) / 1000 >= UNDER:  # as shown, to one decimal of a percent
            holds.append(f"{label} {_pct(min(covs))}-{_pct(max(covs))}%")
        bad = sorted((c for c in cols if c in row and row[c][0] < clear), key=lambda c: row[c][0])
        if bad:
            worst = bad[0]
            firm.append(f"{label}: " + ", ".join(f"{k} n={n} {_pct(row[(k, n)][0])}%"
                                                   for k, n in bad)
                        + f" (in {worst[0]} n={worst[1]} the interval lies wholly below the target "
                        f"in {_pct(row[worst][3])}% of data sets and wholly above it in "
                        f"{_pct(row[worst][4])}%)")
        near = _cell_list(row, cols, lambda c: clear <= c < UNDER)
        if near:
            borderline.append(f"{label}: " + ", ".join(near))
        high = _cell_list(row, cols, lambda c: c > OVER)
        if high:
            conservative.append(f"{label}: " + ", ".join(high))
    out = [f"- At least {100 * UNDER:.1f}% in every cell (range over the {len(cols)} cells): "
           + ("; ".join(holds) if holds else "none") + "."]
    out.append(f"- Clear undercoverage (below {100 * clear:.1f}%, i.e. more than two Monte Carlo "
               "SEs under " f"{100 * UNDER:.1f}%):")
    out.extend(f"  - {t}." for t in firm) if firm else out.append("  - none.")
    out.append(f"- Borderline (between {100 * clear:.1f}% and {100 * UNDER:.1f}%, within noise of "
               "the limit): " + ("; ".join(borderline) if borderline else "none") + ".")
    out.append(f"- Conservative (above {100 * OVER:.1f}%): "
               + ("; ".join(conservative) if conservative else "none") + ".")
    out.append("- Cliff's delta and the rank-biserial r carry A's intervals through 2A - 1 "
               "(analytic and bootstrap alike), so their rows repeat A's coverage with doubled "
               "widths.")
    return out


def _worst(row, cols):
    present = [c for c in cols if c in row]
    worst = min(present, key=lambda c: row[c][0])
    return row[worst][0], worst


def choose(name, rows, cols, reps) -> tuple[str, str]:
    """The interval the study favours for an index, and why: the analytic one unless it clearly
    undercovers somewhere (below `clear_threshold`) and the BCa interval's worst cell is better."""
    clear = clear_threshold(reps)
    a_row, b_row = rows.get((name, "analytic")), rows.get((name, "bca"))
    b_min, b_at = _worst(b_row, cols)
    if a_row is None:
        return "bca", f"the only interval; worst cell {_pct(b_min)}% ({b_at[0]} n={b_at[1]})"
    a_min, a_at = _worst(a_row, cols)
    a_w = np.array([a_row[c][1] for c in cols if c in a_row])
    b_w = np.array([b_row[c][1] for c in cols if c in b_row])
    ratio = f"BCa is {float(np.mean(b_w / a_w)):.2f} times as wide on average"
    if a_min >= clear:
        return "analytic", (f"never clearly undercovers (worst {_pct(a_min)}%, {a_at[0]} "
                            f"n={a_at[1]}); BCa worst {_pct(b_min)}% ({b_at[0]} n={b_at[1]}); {ratio}")
    bad = _cell_list(a_row, cols, lambda c: c < clear)
    if b_min > a_min:
        return "bca", (f"the analytic interval undercovers in " + ", ".join(bad)
                       + f"; BCa worst {_pct(b_min)}% ({b_at[0]} n={b_at[1]}); {ratio}")
    return "analytic", ("neither holds everywhere; analytic worst " f"{_pct(a_min)}%, BCa worst "
                        f"{_pct(b_min)}%; {ratio}")


def _cov(rows, name, kind, key, n) -> str:
    row = rows.get((name, kind), {})
    return f"{_pct(row[(key, n)][0])}%" if (key, n) in row else "n/a"


def explanations(rows, cols, sizes, weighted) -> list[str]:
    """Why the failures happen, with the numbers of this run (only for populations present)."""
    keys = {k for k, _ in cols}
    small, large = min(sizes), max(sizes)
    out = []
    if "unequal" in keys:
        out.append(
            "- Cohen's d and Hedges' g (noncentral t) assume equal variances. In `unequal` the "
            "smaller group has twice the SD, and they cover "
            + ", ".join(_cov(rows, "cohen_d", "analytic", "unequal", n) for n in sizes)
            + f" (d, n = {', '.join(map(str, sizes))}). Against the size-weighted target the "
            "figures are " + ", ".join(weighted.get("cohen_d", [])) + ", so the shortfall "
            "belongs to the interval, not to the choice of target. When the spread check fires, the "
            "policy's unequal-spread branch reports d with unpooled SDs, whose interval holds there ("
            + ", ".join(_cov(rows, "d_unpooled", "analytic", "unequal", n) for n in sizes) + ").")
        out.append(
            "- Glass's delta's normal-approximation variance, (s_A^2/s_B^2)/n_A + 1/n_B + "
            "delta^2/(2 (n_B - 1)), allows unequal spreads (the first term) but still treats s_B "
            "as if the data were normal (the last). `unequal`: "
            + ", ".join(_cov(rows, "glass_delta", "analytic", "unequal", n) for n in sizes) + "."
            + (" `lognormal`, where the normal-theory variance of s_B is too small: "
               + ", ".join(_cov(rows, "glass_delta", "analytic", "lognormal", n) for n in sizes)
               + "." if "lognormal" in keys else "")
            + " (Before the unequal-spread term was added, `unequal` gave about 77%.)")
        out.append(
            "- The Hodges-Lehmann distribution-free interval is exact when the two distributions "
            "differ by a pure shift (normal, lognormal and t3 here: "
            + ", ".join(f"{_cov(rows, 'hodges_lehmann', 'analytic', k, small)}"
                        for k in ("normal", "lognormal", "t3") if k in keys)
            + f" at n = {small}). `unequal` is not a shift: "
            + ", ".join(_cov(rows, "hodges_lehmann", "analytic", "unequal", n) for n in sizes)
            + "; the BCa interval does better there ("
            + ", ".join(_cov(rows, "hodges_lehmann", "bca", "unequal", n) for n in sizes) + ").")
    if "ratings" in keys:
        out.append(
            "- With heavy ties the shift's population value is a whole number and the interval "
            "limits, pairwise differences of whole numbers, often fall on it, so both shift "
            "intervals cover more than promised ("
            + ", ".join(_cov(rows, "hodges_lehmann", "analytic", "ratings", n) for n in sizes)
            + " for the distribution-free one).")
    out.append(
        f"- The BCa interval of the mean difference is too narrow in small samples (normal "
        f"n = {small}: {_cov(rows, 'mean_difference', 'bca', 'normal', small)}, against "
        f"{_cov(rows, 'mean_difference', 'analytic', 'normal', small)} for Welch): bootstrap "
        "quantiles carry no t-type allowance for estimating the SD. Skewness adds to it "
        + (f"(lognormal: {', '.join(_cov(rows, 'mean_difference', 'bca', 'lognormal', n) for n in sizes)})"
           if "lognormal" in keys else "") + ".")
    a_an, a_bca = rows[("prob_superiority", "analytic")], rows[("prob_superiority", "bca")]
    at_small = [c for c in cols if c[1] == small]
    width_ratio = np.mean([a_bca[c][1] / a_an[c][1] for c in at_small])
    out.append(
        "- Brunner-Munzel's interval for A covers "
        f"{_pct(min(a_an[c][0] for c in cols))}-{_pct(max(a_an[c][0] for c in cols))}% across "
        "the cells, slightly under 95% but never clearly below the limit. At "
        f"n = {small} the BCa interval for A covers {_pct(min(a_bca[c][0] for c in at_small))}-"
        f"{_pct(max(a_bca[c][0] for c in at_small))}% while being {width_ratio:.2f} times as "
        "wide as Brunner-Munzel's.")
    return out


BRANCH_SCENARIOS = {  # built-in policy branch -> the populations it is meant for
    "assumptions_hold": ("normal",),
    "unequal_spread": ("unequal",),
    "non_normal": ("lognormal", "t3"),
    "heavy_ties": ("ratings",),
    "outliers": ("t3",),
    "small_sample": None,  # every population, at the smallest n studied
}


def policy_rows(rows, methods, cols, sizes, reps) -> tuple[list[str], list[str]]:
    """For each two-group branch of the built-in policy: its primary index's coverage (analytic
    and BCa, worst cell over the populations the branch is meant for) and which of the indices
    listed beside it have an analytic interval that undercovers there."""
    from auditor.policy import default_policy

    policy = default_policy()
    clear = clear_threshold(reps)
    flagged_branches = []
    out = ["| branch | populations (n) | primary | primary: analytic worst | primary: BCa worst |"
           " indices beside it whose analytic interval undercovers |",
           "| --- | --- | --- | ---: | ---: | --- |"]
    for check in ("assumptions_hold", *policy.precedence("two_groups")):
        branch = policy.branch("two_groups", check)
        if branch is None or check not in BRANCH_SCENARIOS:
            continue
        keys = BRANCH_SCENARIOS[check]
        if keys is None:
            subset = [c for c in cols if c[1] == min(sizes)]
            where = f"all, n = {min(sizes)} (the branch is for n < 10)"
        else:
            subset = [c for c in cols if c[0] in keys]
            where = ", ".join(keys) + " (all n)"
        if not subset:
            continue

        def worst(name, kind):
            row = rows.get((name, kind))
            if row is None or not any(c in row for c in subset):
                return "none"
            cov, at = _worst(row, subset)
            return f"{_pct(cov)}% ({at[0]} n={at[1]})"

        flagged = []
        for name in branch.also:
            row = rows.get((name, "analytic"))
            if row is None:
                continue
            cov, at = _worst(row, subset)
            if cov < UNDER:
                flagged.append(f"{LABELS[name]} {_pct(cov)}% ({at[0]} n={at[1]})")
        a_row, b_row = rows.get((branch.primary, "analytic")), rows.get((branch.primary, "bca"))
        if a_row is not None and b_row is not None:
            a_min, a_at = _worst(a_row, subset)
            b_min, _ = _worst(b_row, subset)
            if a_min < clear and b_min > a_min:
                flagged_branches.append(
                    f"`{check}`: the analytic interval of {LABELS[branch.primary]} covers "
                    f"{_pct(a_min)}% in {a_at[0]} n={a_at[1]}, the BCa interval at worst "
                    f"{_pct(b_min)}%")
        out.append(f"| {check} | {where} | {LABELS.get(branch.primary, branch.primary)} | "
                   f"{worst(branch.primary, 'analytic')} | {worst(branch.primary, 'bca')} | "
                   + ("; ".join(flagged) if flagged else "none") + " |")
    return out, flagged_branches


def recommendation(rows, methods, cols, sizes, reps, weighted=None) -> list[str]:
    out = ["Rule: keep an index's analytic interval unless it clearly undercovers somewhere "
           f"(below {100 * clear_threshold(reps):.1f}%) and the BCa interval's worst cell is "
           "better. The analytic interval needs no resampling and does not change with the seed.",
           ""]
    picks = {}
    for family, names in FAMILIES.items():
        parts = []
        for name in names:
            if (name, "bca") not in rows:
                continue
            pick, why = choose(name, rows, cols, reps)
            picks[name] = pick
            label = "BCa" if pick == "bca" else f"analytic ({methods.get(name)})"
            parts.append(f"{LABELS[name]}: **{label}** - {why}")
        out.append(f"- {family}: " + "; ".join(parts) + ".")
    out.append("")
    out.append("The policy's `[intervals] method` chooses the interval quoted for the primary "
               "index. Below, each two-group branch of the built-in policy is read against the "
               "populations it is meant for (the actual branch depends on each sample's screening, "
               "so this is a guide, not a simulation of the decision):")
    out.append("")
    table, flagged_branches = policy_rows(rows, methods, cols, sizes, reps)
    out.extend(table)
    out.append("")
    if flagged_branches:
        out.append("- Keep `method = \"analytic\"` as the default: the primary index's analytic "
                   "interval holds in every branch except " + "; ".join(flagged_branches)
                   + ". The small-sample branch comes first in the precedence, so it is taken "
                   "whatever the spreads; there, quoting the BCa interval, or making d with "
                   "unpooled SDs the primary index, would avoid the shortfall."
                   if any(f.startswith("`small_sample`") for f in flagged_branches) else
                   "- Keep `method = \"analytic\"` as the default except in: "
                   + "; ".join(flagged_branches) + ".")
    else:
        out.append("- Keep `method = \"analytic\"` as the default: the primary index's analytic "
                   "interval holds in every branch.")
    bca = [LABELS[n] for n, p in picks.items() if p == "bca" and (n, "analytic") in rows]
    keep = [LABELS[n] for n, p in picks.items() if p == "analytic"]
    out.append(f"- Keep the analytic interval for: {', '.join(keep) if keep else 'none'}.")
    out.append("- Prefer the BCa interval (the analytic one clearly undercovers in some population) "
               "for: " + (", ".join(bca) if bca else "none")
               + " (robust d has only the BCa interval).")
    out.append("")
    out.append("Why, in this run:")
    out.append("")
    out.extend(explanations(rows, cols, sizes, weighted or {}))
    return out


# ------------------------------------------------------------------ command line


def parse_args(argv=None):
    p = argparse.ArgumentParser(description=__doc__.split("\n\n")[0],
                                formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("--reps", type=int, default=None, help="replications per cell (default 1500)")
    p.add_argument("--sizes", default=None, help="per-group sizes, comma separated (default 10,20,50)")
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
    return p.parse_args(argv)


def main(argv=None) -> int:
    args = parse_args(argv)
    reps = args.reps if args.reps is not None else (100 if args.quick else 1500)
    resamples = args.resamples if args.resamples is not None else (300 if args.quick else 2000)
    sizes = [int(s) for s in (args.sizes or "10,20,50").split(",")]
    keys = (args.populations.split(",") if args.populations else [s.key for s in SCENARIOS])
    unknown = [k for k in keys if k not in SCENARIO_BY_KEY]
    if unknown or reps < 1 or resamples < 100 or min(sizes) < 5:
        print(f"coverage_study: bad settings (unknown populations {unknown}, reps >= 1, "
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
        print(f"\r{done}/{total} blocks of {BLOCK} replications, {elapsed / 60:.1f} min, "
              f"about {eta / 60:.1f} min left", end="", file=sys.stderr, flush=True)

    cells = simulate(keys, sizes, reps, resamples, args.seed, LEVEL, args.workers, progress)
    print("", file=sys.stderr)
    seconds = time.perf_counter() - started
    text = render(cells, keys, sizes, reps, resamples, args.seed, args.workers, seconds, truths,
                  checks, quick=args.quick)
    out = Path(args.out)
    out.parent.mkdir(parents=True, exist_ok=True)
    out.write_text(text, encoding="utf-8")
    print(f"wrote {out} ({seconds / 60:.1f} min)", file=sys.stderr)
    return 0


if __name__ == "__main__":
    sys.exit(main())
