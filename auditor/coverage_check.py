"""Coverage check: how often an interval method covers its index's population value when the
populations are shaped like the data at hand.

`docs/coverage.md` (written by `tools/coverage_study.py`) measures the coverage of every interval
on five fixed population pairs. This module asks the same question of populations built from the
data being audited: simulate many data sets of the observed sizes from smoothed versions of the
observed groups, compute the interval of one method on each, and count how often it contains the
index's value in those populations.

    >>> import numpy as np
    >>> from auditor.effects import two_group_effects
    >>> spec = {s.name: s for s in two_group_effects()}["mean_difference"]
    >>> rng = np.random.default_rng(7)
    >>> a, b = rng.normal(0.5, 1, 40), rng.normal(0, 1, 40)
    >>> check = coverage_check(spec, (a, b), method="analytic", rng=np.random.default_rng(1))
    >>> check.truth_method, check.usable
    ('exact', 200)

Populations (the shrunk smoothed bootstrap)
-------------------------------------------
Independent groups. Group j, with values x_1..x_n, mean m and variance v (divisor n), becomes
the population of

    Y = m + c (x_I - m + h Z),   I uniform on 1..n,  Z ~ N(0, 1),  c = 1 / sqrt(1 + h^2 / v):

a draw from the Gaussian kernel density estimate with bandwidth h, shrunk towards m so that Y
keeps the data's mean and variance, E Y = m and var Y = c^2 (v + h^2) = v (the shrunk smoothed
bootstrap: Silverman 1986, sec. 6.4.1; Efron & Tibshirani 1993, sec. 16.5; sections from memory).
Y is a mixture of normals with centres mu_i = m + c (x_i - m), all with SD sigma = c h.
Bandwidth: Silverman's rule of thumb h = 0.9 min(s, IQR / 1.34) n^(-1/5) (Silverman 1986,
eq. 3.31), s the SD with divisor n - 1; when the IQR is zero (more than half the values tied) s
is used alone; a constant group gets h = 0 and its population is that value.

Paired and repeated designs. Participants' rows x_i (k conditions) are resampled whole, so a
participant's conditions stay together, and correlated Gaussian noise shaped like the rows'
covariance S (divisor n) is added:

    Y = m + c (x_I - m + h E),   E ~ N(0, S),   c = 1 / sqrt(1 + h^2),

h = (4 / ((k + 2) n))^(1 / (k + 4)), the normal-reference bandwidth for a kernel with covariance
h^2 S (Silverman 1986, eq. 4.14 applied to sphered data; from memory). Y keeps each condition's
mean and variance and the covariances: Cov Y = c^2 (1 + h^2) S = S. The difference of two
conditions is then itself a shrunk smoothed bootstrap of the observed differences, with bandwidth
h SD(d) and the same c. (Noise drawn independently per column would keep the variances but shrink
every correlation by c^2; the kernel shaped like S was chosen to keep them.)

What smoothing changes. The populations are continuous, so ties in discrete data (ratings,
rounded values) are broken: an interval whose behaviour depends on ties is checked on untied
data, and tie-free population values are used (A = P(Y_A > Y_B)). The symmetric noise also
thins the tails and scales the skewness by c^3 (with h from the SD, about 0.63 at n = 10 and
0.87 at n = 200): for methods that suffer from skewness in small samples the check errs on the
optimistic side.
Paired specs round differences to their `digits` before signs and ranks are taken; the draws
are continuous, so give the check a spec built with the default 12 digits.

Population values (the "truth")
-------------------------------
Exact where a closed form exists, in the centres mu and kernel SD sigma above:
- two groups: mean difference m_A - m_B; Cohen's d, Hedges' g, d with unpooled SDs
  (m_A - m_B) / sqrt((v_A + v_B) / 2) (the variances pooled with equal weights, as in
  docs/coverage.md); Glass's delta (m_A - m_B) / sqrt(v_ref); robust d 0.642 (T_A - T_B) /
  sqrt((W_A + W_B) / 2) from the 20% trimmed means T and winsorized variances W of the normal
  mixtures (quantiles by root finding, truncated normal moments in closed form);
  A = P(Y_A > Y_B) = mean over pairs (i, j) of Phi((mu_Ai - mu_Bj) / sqrt(sigma_A^2 + sigma_B^2));
  Cliff's delta and the rank-biserial r 2A - 1; the Hodges-Lehmann shift as the median of
  Y_A - Y_B (root of the mixture distribution function);
- paired (D = Y_1 - Y_2, centres delta_i, SD tau): mean difference mean(d); d_z mean(d) / SD(d);
  d_av mean(d) / sqrt((v_1 + v_2) / 2); d_rm d_z sqrt(2 (1 - rho)); ps_dep P(D > 0) =
  mean_i Phi(delta_i / tau); matched rank-biserial 2 P(D + D' > 0) - 1 and the Hodges-Lehmann
  shift the median of (D + D') / 2, D' an independent copy (the limits of the Walsh-average
  forms);
- k groups (weights w_j = n_j / N): eta^2 and omega^2 sigma_b^2 / (sigma_b^2 + sigma_w^2),
  sigma_b^2 = sum w_j (m_j - m)^2, sigma_w^2 = sum w_j v_j; epsilon^2_H and eta^2_H
  12 sum_j w_j (p_j - 1/2)^2, p_j = sum_l w_l P(Y_j > Y_l) (the limit of H / (N - 1));
- k repeated: Kendall's W 12 sum_j (E r_j - (k + 1)/2)^2 / (k (k^2 - 1)), E r_j = 1 +
  sum_(l != j) P(Y_j > Y_l) within a participant; generalized eta^2 sum_j (m_j - m)^2 /
  (sum_j (m_j - m)^2 + sum_j v_j).
Sums over pairs of values are exact up to EXACT_PAIRS_MAX pairs (EXACT_ROOT_PAIRS_MAX where a
root is sought). Beyond that, and for indices without a closed form here, the value is a Monte
Carlo estimate: the index computed on TRUTH_BATCHES independent large samples drawn from the
populations (each about TRUTH_BATCH_VALUES values, the groups in the observed proportions),
their mean and its standard error (batch means), stated in the result. r = Z / sqrt(N) is not
checked (see NO_POPULATION_VALUE).

Simulations, streams and defaults
---------------------------------
Each simulation draws one data set of the observed sizes and computes the interval of the
method: "analytic" is `spec.estimate(...).interval`; "bca_bootstrap" is the project's BCa interval;
any other name picks the interval of that method among those the index computes (its own and
`Estimate.more`), e.g. "proportional_odds_score"
(`resampling.bca_interval`) over `resamples` stratified resamples (`resampling.resample_units`,
called on blocks of about BOOT_BLOCK_VALUES drawn values, which stay in the processor's cache;
with the draw-count statistic `by_counts` when the index has one; leave-one-out values from
`pipeline.leave_one_out_values`; an index derived from another, such as delta = 2A - 1, maps the
other's replicates as `pipeline.estimate_all` does). Data sets without an interval are counted
apart, never as covered.

Random streams: one 63-bit integer E is drawn from the Generator passed in (recorded as
`seed_entropy`); simulation i draws its data from SeedSequence(E, spawn_key=(0, i)) and its
bootstrap from spawn_key (1, i); a Monte Carlo population value uses spawn_key (2,). A result
therefore depends only on the Generator's state, not on the order or grouping of the work, and
the analytic and BCa checks of one index with the same Generator see the same data sets.

DEFAULT_SIMULATIONS = 200: the Monte Carlo SE of a coverage near 95% is sqrt(.95 x .05 / 200) =
1.5 percentage points, so a shortfall of about 3 points or more is detected, which is the size
that matters for a report (docs/coverage.md calls 92.5% undercoverage); halving the SE takes
four times as many simulations. DEFAULT_RESAMPLES = 2000, the pipeline's own B, so that the check
sees the interval the report quotes. Measured on a shared 2-core machine
(tests/benchmarks/run_coverage_check_benchmark.py): at 2x200 a BCa check of A or d takes 1.4-2 s,
1.2-1.8 times one audit of the same data; at 2x2000 13-18 s, 1.5-2.1 audits; an analytic check
takes about 0.1 s at either size. `resamples=1000` saves a third to a half, at the price of
noisier BCa limits (which makes the check slightly pessimistic about the B = 2000 interval).
"""

from __future__ import annotations

import functools
import math
import warnings
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np
from scipy import optimize, special

from auditor.effects import (EffectSpec, k_independent_effects, k_repeated_effects,
                             paired_effects, two_group_effects)
from auditor.moments import mean_var
from auditor.parametric import ROBUST_SCALE, ROBUST_TRIM
from auditor.ranks import pairwise_median
from auditor.resampling import bca_interval, resample_units
from auditor.results import Record

METHODS = ("analytic", "bca_bootstrap")
DESIGNS = ("two_independent", "paired", "k_independent", "k_repeated")
DEFAULT_SIMULATIONS = 200
DEFAULT_RESAMPLES = 2000
DEFAULT_LEVEL = 0.95
MIN_SIMULATIONS = 10
MIN_RESAMPLES = 100  # as `pipeline.audit`
MARGIN_SES = 2.0  # a shortfall counts when it exceeds two Monte Carlo SEs

SILVERMAN_FACTOR = 0.9  # h = 0.9 min(s, IQR / 1.34) n^(-1/5) (Silverman 1986, eq. 3.31)
IQR_PER_SD = 1.34  # the IQR of a normal distribution in SDs (1.349, as Silverman rounds it)

EXACT_PAIRS_MAX = 25_000_000  # pairs of values summed exactly for one population value
EXACT_ROOT_PAIRS_MAX = 4_000_000  # ... when a root is sought (each step sums over every pair)
PAIR_CHUNK = 2_000_000  # pair terms held in memory at once
TRUTH_BATCHES = 20
TRUTH_BATCH_VALUES = 200_000

BOOT_BLOCK_VALUES = 200_000  # values drawn per call of resample_units in a BCa simulation
DATA_STREAM, BOOTSTRAP_STREAM, TRUTH_STREAM = 0, 1, 2  # first spawn-key element of each stream

NO_POPULATION_VALUE = {
    "r_from_z": ("no check: r = Z / sqrt(N) is a test statistic rescaled by the sample size, and "
                 "the project gives it no population value of its own (docs/coverage.md), so "
                 "there is no fixed target for an interval to cover"),
}

Progress = Callable[[int, int], None] | None


# ------------------------------------------------------------------ results


@dataclass(frozen=True)
class PopulationValue(Record):
    """The value of an index in the smoothed populations, how it was obtained, or why it is not
    available. `method` is "exact" or "monte carlo (<draws> draws, SE <se>)"; `se` and `draws`
    are set for Monte Carlo values only."""

    index: str
    value: float | None
    method: str | None
    formula: str | None
    se: float | None = None
    draws: int | None = None
    reason: str | None = None


@dataclass(frozen=True)
class CoverageCheck(Record):
    """Estimated coverage of one interval method for one index, in populations built from the
    data (see the module docstring).

    coverage = covered / usable, with usable = simulations - undefined (data sets where the method
    gave no interval are left out and counted in `undefined`); mc_se = sqrt(c (1 - c) / usable).
    The verdict is "holds" when the coverage is at least level - 2 mc_se, otherwise "falls short
    by X points" with X = 100 (level - coverage) (also in `shortfall_points`, unrounded).
    `below` and `above` count intervals lying wholly below or above the truth. When no check is
    possible, `reason` says why; the counts stay zero unless simulations ran (then every one is
    in `undefined`).
    """

    index: str
    method: str
    design: str
    level: float
    simulations: int
    resamples: int | None
    sizes: tuple[int, ...]
    seed_entropy: int
    usable: int = 0
    undefined: int = 0
    covered: int = 0
    below: int = 0
    above: int = 0
    coverage: float | None = None
    mc_se: float | None = None
    mean_width: float | None = None
    truth: float | None = None
    truth_method: str | None = None
    truth_formula: str | None = None
    truth_se: float | None = None
    population: str | None = None
    bandwidths: tuple[float, ...] = ()
    shrinks: tuple[float, ...] = ()
    shortfall_points: float | None = None
    verdict: str | None = None
    reason: str | None = None
    notes: tuple[str, ...] = ()

    @property
    def computed(self) -> bool:
        return self.reason is None


# ------------------------------------------------------------------ populations


def silverman_bandwidth(x: np.ndarray) -> float:
    """h = 0.9 min(s, IQR / 1.34) n^(-1/5) (Silverman 1986, eq. 3.31), s the SD (n - 1).

    Special case: a zero IQR (more than half the values equal) with s > 0 uses s alone; a
    constant sample gets h = 0."""
    n = x.size
    s = float(np.sqrt(mean_var(x)[1])) if n > 1 else 0.0
    q25, q75 = np.percentile(x, [25, 75])
    spread = min(s, float(q75 - q25) / IQR_PER_SD)
    if not spread > 0:
        spread = s
    return SILVERMAN_FACTOR * spread * n ** -0.2


def normal_reference_bandwidth(n: int, k: int) -> float:
    """h = (4 / ((k + 2) n))^(1 / (k + 4)) for a Gaussian kernel with covariance h^2 S in k
    dimensions (Silverman 1986, eq. 4.14, for data sphered by S; from memory). For k = 1 it is
    1.06 n^(-1/5), the normal-reference rule."""
    return (4.0 / ((k + 2) * n)) ** (1.0 / (k + 4))


@dataclass(frozen=True, eq=False)
class GroupPopulations:
    """Independent groups: group j is a mixture of normals with centres `centres[j]` (the shrunk
    values m_j + c_j (x - m_j)) and common SD `noise_sds[j]` = c_j h_j."""

    design: str
    centres: tuple[np.ndarray, ...]
    noise_sds: tuple[float, ...]
    means: tuple[float, ...]
    variances: tuple[float, ...]  # divisor n: the population variances
    bandwidths: tuple[float, ...]
    shrinks: tuple[float, ...]

    def draw(self, rng: np.random.Generator, sizes: Sequence[int]) -> tuple[np.ndarray, ...]:
        """One sample per group, sorted (no index depends on the order; the pipeline sorts too).
        Per group: the picked values, then the normal noise."""
        out = []
        for mu, sd, n in zip(self.centres, self.noise_sds, sizes):
            pick = rng.integers(0, mu.size, n)
            noise = rng.standard_normal(n)
            out.append(np.sort(mu[pick] + sd * noise))
        return tuple(out)

    def describe(self) -> str:
        hs = ", ".join(f"{h:.3g}" for h in self.bandwidths)
        cs = ", ".join(f"{c:.3f}" for c in self.shrinks)
        return (f"each group smoothed with a Gaussian kernel, Silverman bandwidths h = {hs} "
                f"(0.9 min(SD, IQR/1.34) n^-1/5), shrunk by c = {cs} to keep its mean and "
                "variance; ties broken")


@dataclass(frozen=True, eq=False)
class RowPopulation:
    """Paired or repeated conditions: participants' rows resampled whole plus correlated normal
    noise; centres m + c (x_i - m), noise = Z @ noise_factor.T with covariance c^2 h^2 S."""

    design: str
    centres: np.ndarray  # (n, k)
    noise_factor: np.ndarray  # (k, k)
    means: np.ndarray
    covariance: np.ndarray  # S, divisor n
    bandwidth: float
    shrink: float

    def draw(self, rng: np.random.Generator, sizes: Sequence[int]) -> tuple[np.ndarray]:
        """One sample of rows: the picked rows, then the noise (rows x conditions)."""
        n = int(sizes[0])
        pick = rng.integers(0, self.centres.shape[0], n)
        noise = rng.standard_normal((n, self.centres.shape[1]))
        return (self.centres[pick] + noise @ self.noise_factor.T,)

    def difference_noise_sd(self, j: int, l: int) -> float:
        """SD of the kernel noise of Y_j - Y_l: c h sqrt(S_jj + S_ll - 2 S_jl)."""
        s = self.covariance
        return self.shrink * self.bandwidth * math.sqrt(max(s[j, j] + s[l, l] - 2 * s[j, l], 0.0))

    @property
    def bandwidths(self) -> tuple[float, ...]:
        return (self.bandwidth,)

    @property
    def shrinks(self) -> tuple[float, ...]:
        return (self.shrink,)

    def describe(self) -> str:
        k = self.centres.shape[1]
        return (f"participants' rows resampled whole plus Gaussian kernel noise N(0, h^2 S), S the "
                f"rows' covariance, h = {self.bandwidth:.3g} ((4/(({k}+2) n))^(1/{k + 4})), shrunk"
                f" by c = {self.shrink:.3f} to keep the means, variances and covariances; ties "
                "broken")


def design_of(samples: Sequence[np.ndarray]) -> str:
    """The design the samples form, as the pipeline passes them: two or more 1-D arrays
    (independent groups), or one (n, 2) / (n, k) array of participants' rows."""
    if len(samples) == 1 and np.ndim(samples[0]) == 2:
        k = np.shape(samples[0])[1]
        if k < 2:
            raise ValueError(f"the rows have {k} column: paired or repeated data need a column per"
                             " condition; pass one (n, k) array with k >= 2")
        return "paired" if k == 2 else "k_repeated"
    if len(samples) >= 2 and all(np.ndim(s) == 1 for s in samples):
        return "two_independent" if len(samples) == 2 else "k_independent"
    shapes = ", ".join(str(np.shape(s)) for s in samples)
    raise ValueError(f"samples of shapes ({shapes}) form no design: pass two or more 1-D arrays "
                     "(independent groups) or one (n, k) array of participants' rows")


def smoothed_population(samples: Sequence[np.ndarray]) -> GroupPopulations | RowPopulation:
    """The smoothed populations of the samples (module docstring: 'Populations')."""
    design = design_of(samples)
    if design in ("paired", "k_repeated"):
        return _rows(np.asarray(samples[0], dtype=float), design)
    centres, sds, means, variances, hs, cs = [], [], [], [], [], []
    for x in samples:
        x = np.asarray(x, dtype=float)
        m, var, n = mean_var(x)
        m, v = float(m), float(var) * (n - 1) / n
        h = silverman_bandwidth(x)
        c = 1.0 / math.sqrt(1.0 + h * h / v) if v > 0 else 1.0
        centres.append(m + c * (x - m))
        sds.append(c * h)
        means.append(m)
        variances.append(v)
        hs.append(h)
        cs.append(c)
    return GroupPopulations(design, tuple(centres), tuple(sds), tuple(means), tuple(variances),
                            tuple(hs), tuple(cs))


def _rows(x: np.ndarray, design: str) -> RowPopulation:
    n, k = x.shape
    means = np.array([float(mean_var(x[:, j])[0]) for j in range(k)])
    centred = x - means
    s = centred.T @ centred / n
    h = normal_reference_bandwidth(n, k)
    c = 1.0 / math.sqrt(1.0 + h * h)
    values, vectors = np.linalg.eigh(s)
    root = vectors * np.sqrt(np.clip(values, 0.0, None))  # root @ root.T = S
    return RowPopulation(design, means + c * centred, c * h * root, means, s, h, c)


# ------------------------------------------------------------------ exact population values


def _normal_cdf(z_num: np.ndarray, sd: float) -> np.ndarray:
    """Phi(z_num / sd); for sd = 0 the step 1{z > 0} + 1{z = 0} / 2 (point masses)."""
    if sd > 0:
        return special.ndtr(z_num / sd)
    return (z_num > 0) + 0.5 * (z_num == 0)


def _pair_mean(x: np.ndarray, y: np.ndarray, fn: Callable[[np.ndarray], np.ndarray]) -> float:
    """mean over all (i, j) of fn(x_i - y_j), PAIR_CHUNK terms at a time."""
    step = max(1, PAIR_CHUNK // max(1, y.size))
    total = 0.0
    for start in range(0, x.size, step):
        total += float(np.sum(fn(x[start:start + step, None] - y[None, :])))
    return total / (x.size * y.size)


def _superiority(mu_x, sd_x, mu_y, sd_y) -> float:
    """P(X > Y) + P(X = Y)/2 for independent normal mixtures (centres mu, common SDs sd):
    mean over pairs of Phi((mu_xi - mu_yj) / sqrt(sd_x^2 + sd_y^2))."""
    s = math.hypot(sd_x, sd_y)
    return _pair_mean(mu_x, mu_y, lambda d: _normal_cdf(d, s))


def _median_of_pair_mixture(mu_x: np.ndarray, mu_y: np.ndarray, s: float) -> float:
    """The median t of X - Y whose distribution is mean over pairs of N(mu_xi - mu_yj, s^2):
    the root of mean Phi((t - mu_xi + mu_yj) / s) = 1/2 (Brent's method), bracketed from the
    median of the centre differences."""
    start = pairwise_median(np.sort(mu_x), np.sort(mu_y))
    if s == 0:  # both groups constant: every difference is the same
        return float(start)

    def excess(t):
        return _pair_mean(mu_x, mu_y, lambda d: special.ndtr((t - d) / s)) - 0.5

    width = s
    lo, hi = start - width, start + width
    while excess(lo) > 0:
        width *= 4
        lo = start - width
    while excess(hi) < 0:
        width *= 4
        hi = start + width
    return float(optimize.brentq(excess, lo, hi, xtol=1e-12 * s, rtol=4 * np.finfo(float).eps))


def _normal_pdf(z: np.ndarray) -> np.ndarray:
    return np.exp(-0.5 * z * z) / math.sqrt(2 * math.pi)


def _mixture_quantile(mu: np.ndarray, sd: float, p: float) -> float:
    """Q(p) of the equal-weight normal mixture with centres mu and SD sd > 0."""
    def excess(y):
        return float(np.mean(special.ndtr((y - mu) / sd))) - p
    lo, hi = float(mu.min()) - 10 * sd, float(mu.max()) + 10 * sd
    return float(optimize.brentq(excess, lo, hi, xtol=1e-12 * sd, rtol=4 * np.finfo(float).eps))


def trimmed_moments(mu: np.ndarray, sd: float, gamma: float = ROBUST_TRIM) -> tuple[float, float]:
    """(gamma-trimmed mean, gamma-winsorized variance) of the normal mixture with centres mu and
    SD sd, the population versions of `parametric.trimmed_mean_values` and
    `winsorized_variance_values` (as `tools/coverage_study.py` defines them):
    T = int_l^u y dF / (1 - 2 gamma), W = var of min(max(Y, l), u), l = Q(gamma), u = Q(1 - gamma).
    For one component N(m, sd^2), with a = (l - m)/sd, b = (u - m)/sd (truncated normal moments):
    int_l^u y dF = m [Phi(b) - Phi(a)] + sd [phi(a) - phi(b)],
    int_l^u y^2 dF = (m^2 + sd^2) [Phi(b) - Phi(a)] + sd [(l + m) phi(a) - (u + m) phi(b)]."""
    centre = float(np.mean(mu))
    z = mu - centre  # centred for precision
    if sd == 0:
        return centre + float(np.median(z)), 0.0  # only a constant group has sd = 0
    lo, hi = _mixture_quantile(z, sd, gamma), _mixture_quantile(z, sd, 1 - gamma)
    a, b = (lo - z) / sd, (hi - z) / sd
    mass = special.ndtr(b) - special.ndtr(a)
    pa, pb = _normal_pdf(a), _normal_pdf(b)
    first = float(np.mean(z * mass + sd * (pa - pb)))
    second = float(np.mean((z * z + sd * sd) * mass + sd * ((lo + z) * pa - (hi + z) * pb)))
    trimmed = first / (1 - 2 * gamma)
    mean_w = gamma * (lo + hi) + first
    var_w = (gamma * ((lo - mean_w) ** 2 + (hi - mean_w) ** 2)
             + second - 2 * mean_w * first + mean_w * mean_w * (1 - 2 * gamma))
    return centre + trimmed, max(var_w, 0.0)


def _glass_reference(spec: EffectSpec) -> int | None:
    """Which group's SD scales this Glass's delta (1 = B, 0 = A), read from the index itself on
    a probe: A = (0, 2) (SD sqrt 2), B = (0, 4) (SD sqrt 8), difference -1."""
    with np.errstate(all="ignore"):
        value = float(spec.values(np.array([0.0, 2.0]), np.array([0.0, 4.0])))
    for reference, sd in ((1, math.sqrt(8.0)), (0, math.sqrt(2.0))):
        if math.isclose(value, -1.0 / sd, rel_tol=1e-9):
            return reference
    return None


def _two_group_value(name: str, pop: GroupPopulations, spec: EffectSpec):
    (ma, mb), (va, vb) = pop.means, pop.variances
    (mu_a, mu_b), (sa, sb) = pop.centres, pop.noise_sds
    diff = ma - mb
    rms = math.sqrt((va + vb) / 2)
    pairs = mu_a.size * mu_b.size
    with np.errstate(divide="ignore", invalid="ignore"):
        if name == "mean_difference":
            return diff, "mean_A - mean_B"
        if name in ("cohen_d", "hedges_g", "d_unpooled"):
            return _ratio(diff, rms), "(mean_A - mean_B) / sqrt((var_A + var_B) / 2)"
        if name == "glass_delta":
            ref = _glass_reference(spec)
            if ref is None:
                return None
            label = "B" if ref == 1 else "A"
            return (_ratio(diff, math.sqrt(vb if ref == 1 else va)),
                    f"(mean_A - mean_B) / SD_{label}")
        if name == "robust_d":
            (ta, wa), (tb, wb) = trimmed_moments(mu_a, sa), trimmed_moments(mu_b, sb)
            return (_ratio(ROBUST_SCALE * (ta - tb), math.sqrt((wa + wb) / 2)),
                    "0.642 (20% trimmed mean_A - trimmed mean_B) / sqrt of the average 20%"
                    " winsorized variance")
        if name in ("prob_superiority", "cliff_delta", "rank_biserial"):
            if pairs > EXACT_PAIRS_MAX:
                return None
            a = _superiority(mu_a, sa, mu_b, sb)
            if name == "prob_superiority":
                return a, "A = P(Y_A > Y_B) = mean over pairs of Phi((mu_Ai - mu_Bj) / s)"
            return 2 * a - 1, "2 P(Y_A > Y_B) - 1"
        if name == "hodges_lehmann":
            if pairs > EXACT_ROOT_PAIRS_MAX:
                return None
            return (_median_of_pair_mixture(mu_a, mu_b, math.hypot(sa, sb)),
                    "median of Y_A - Y_B")
    return None


def _ratio(num: float, den: float) -> float:
    return num / den if den > 0 else math.nan


def _paired_value(name: str, pop: RowPopulation, spec: EffectSpec):
    s = pop.covariance
    delta = pop.centres[:, 0] - pop.centres[:, 1]
    tau = pop.difference_noise_sd(0, 1)
    md = float(pop.means[0] - pop.means[1])
    var_d = max(s[0, 0] + s[1, 1] - 2 * s[0, 1], 0.0)
    n = delta.size
    if name == "mean_difference":
        return md, "mean_1 - mean_2"
    if name == "d_z":
        return _ratio(md, math.sqrt(var_d)), "mean(D) / SD(D)"
    if name == "d_av":
        return _ratio(md, math.sqrt((s[0, 0] + s[1, 1]) / 2)), "mean(D) / sqrt((var_1 + var_2) / 2)"
    if name == "d_rm":
        rho = _ratio(s[0, 1], math.sqrt(s[0, 0] * s[1, 1]))
        return (_ratio(md, math.sqrt(var_d)) * math.sqrt(max(2 * (1 - rho), 0.0)),
                "mean(D) / SD(D) sqrt(2 (1 - rho))")
    if name == "ps_dep":
        return float(np.mean(_normal_cdf(delta, tau))), "P(D > 0) = mean_i Phi(delta_i / tau)"
    if name == "matched_rank_biserial":
        if n * n > EXACT_PAIRS_MAX:
            return None
        p = _pair_mean(delta, -delta, lambda u: _normal_cdf(u, math.sqrt(2) * tau))
        return 2 * p - 1, "2 P(D + D' > 0) - 1, D' an independent copy of D"
    if name == "hodges_lehmann":
        if n * n > EXACT_ROOT_PAIRS_MAX:
            return None
        return (_median_of_pair_mixture(delta, -delta, math.sqrt(2) * tau) / 2,
                "median of (D + D') / 2, D' an independent copy of D")
    return None


def _k_group_value(name: str, pop: GroupPopulations, spec: EffectSpec):
    sizes = np.array([mu.size for mu in pop.centres], dtype=float)
    w = sizes / sizes.sum()
    means, variances = np.array(pop.means), np.array(pop.variances)
    if name in ("eta_squared", "omega_squared"):
        grand = float(w @ means)
        between = float(w @ (means - grand) ** 2)
        within = float(w @ variances)
        return (_ratio(between, between + within),
                "sigma_b^2 / (sigma_b^2 + sigma_w^2), groups weighted by n_j / N")
    if name in ("epsilon_squared_h", "eta_squared_h"):
        k = len(pop.centres)
        pairs = sum(pop.centres[j].size * pop.centres[l].size
                    for j in range(k) for l in range(j + 1, k))
        if pairs > EXACT_PAIRS_MAX:
            return None
        sup = np.full((k, k), 0.5)
        for j in range(k):
            for l in range(j + 1, k):
                sup[j, l] = _superiority(pop.centres[j], pop.noise_sds[j],
                                         pop.centres[l], pop.noise_sds[l])
                sup[l, j] = 1.0 - sup[j, l]
        p = sup @ w
        return (float(12.0 * w @ (p - 0.5) ** 2),
                "12 sum_j w_j (p_j - 1/2)^2, p_j = sum_l w_l P(Y_j > Y_l), w_j = n_j / N")
    return None


def _repeated_value(name: str, pop: RowPopulation, spec: EffectSpec):
    k = pop.centres.shape[1]
    if name == "kendall_w":
        expected = np.ones(k)
        for j in range(k):
            for l in range(k):
                if l != j:
                    u = pop.centres[:, j] - pop.centres[:, l]
                    expected[j] += float(np.mean(_normal_cdf(u, pop.difference_noise_sd(j, l))))
        return (float(12.0 * np.sum((expected - (k + 1) / 2) ** 2) / (k * (k * k - 1))),
                "12 sum_j (E r_j - (k+1)/2)^2 / (k (k^2 - 1)), r_j the rank within a participant")
    if name == "generalized_eta_squared":
        spread = float(np.sum((pop.means - pop.means.mean()) ** 2))
        return (_ratio(spread, spread + float(np.trace(pop.covariance))),
                "sum_j (mean_j - mean)^2 / (sum_j (mean_j - mean)^2 + sum_j var_j)")
    return None


# design -> function(index name, population, spec) -> (value, formula), or None when there is no
# closed form here or the pair sums would exceed the limits (then: Monte Carlo)
_EXACT = {"two_independent": _two_group_value, "paired": _paired_value,
          "k_independent": _k_group_value, "k_repeated": _repeated_value}


def population_value(spec: EffectSpec, population: GroupPopulations | RowPopulation,
                     rng: np.random.Generator) -> PopulationValue:
    """The index's value in the populations: exact when a closed form exists and the pair sums
    are within EXACT_PAIRS_MAX, otherwise `monte_carlo_value` (drawing from `rng`). Not
    available (value None, with the reason) for NO_POPULATION_VALUE indices, and when the value
    is not finite (e.g. no spread)."""
    if spec.name in NO_POPULATION_VALUE:
        return PopulationValue(spec.name, None, None, None, reason=NO_POPULATION_VALUE[spec.name])
    exact = _EXACT[population.design](spec.name, population, spec)
    if exact is not None:
        value, formula = exact
        result = PopulationValue(spec.name, float(value), "exact", formula)
    else:
        result = monte_carlo_value(spec, population, rng)
    if result.value is None or not math.isfinite(result.value):
        return PopulationValue(spec.name, None, result.method, result.formula, result.se,
                               result.draws, "the index has no finite value in these populations"
                               " (a group or the differences have no spread)")
    return result


def monte_carlo_value(spec: EffectSpec, population: GroupPopulations | RowPopulation,
                      rng: np.random.Generator, *, batches: int = TRUTH_BATCHES,
                      values_per_batch: int = TRUTH_BATCH_VALUES) -> PopulationValue:
    """The index computed on `batches` independent samples drawn from the populations, each of
    about `values_per_batch` values with the groups in the observed proportions (never fewer than
    observed): value = mean of the batch values, se = their SD / sqrt(batches) (batch means).
    This is the population value for an index that converges to one as the sample grows; the
    bias of the index at this size is taken to be negligible beside the SE."""
    sizes = _large_sizes(population, values_per_batch)
    found = np.empty(batches)
    with np.errstate(all="ignore"):
        for i in range(batches):
            samples = population.draw(rng, sizes)
            found[i] = float(np.asarray(spec.values(*(s[None] for s in samples))).reshape(-1)[0])
    per_unit = population.centres.shape[1] if isinstance(population, RowPopulation) else 1
    draws = batches * per_unit * sum(sizes)
    value = float(np.mean(found))
    se = float(np.std(found, ddof=1) / math.sqrt(batches))
    method = f"monte carlo ({draws} draws, SE {se:.2g})"
    return PopulationValue(spec.name, value if math.isfinite(value) else None, method,
                           f"{spec.name} computed on {batches} samples of sizes "
                           f"{'/'.join(str(s) for s in sizes)} from the populations", se, draws)


def _large_sizes(population, values_per_batch: int) -> tuple[int, ...]:
    if isinstance(population, RowPopulation):
        n, k = population.centres.shape
        return (max(n, values_per_batch // k),)
    sizes = [mu.size for mu in population.centres]
    factor = max(1.0, values_per_batch / sum(sizes))
    return tuple(max(n, int(round(n * factor))) for n in sizes)


# ------------------------------------------------------------------ simulation


def _stream(entropy: int, *key: int) -> np.random.Generator:
    return np.random.default_rng(np.random.SeedSequence(entropy, spawn_key=key))


def _registry(design: str) -> tuple[EffectSpec, ...]:
    return {"two_independent": two_group_effects, "paired": paired_effects,
            "k_independent": k_independent_effects, "k_repeated": k_repeated_effects}[design]()


def bootstrap_source(spec: EffectSpec, design: str):
    """(source spec, map) for an index derived from another (delta = 2A - 1), found in the
    design's registry; None when it is not derived or its source is not registered (then the
    index is resampled itself)."""
    if spec.derived_from is None:
        return None
    name, mapping = spec.derived_from
    for other in _registry(design):
        if other.name == name:
            return other, mapping
    return None


def _analytic_limits(spec, samples, level, rng, resamples, source):
    est = spec.estimate(*samples, level)
    iv = est.interval
    if est.value is None or iv is None or iv.low is None or iv.high is None:
        return None
    return float(iv.low), float(iv.high)


def _replicates(spec: EffectSpec, samples, resamples: int, rng: np.random.Generator) -> np.ndarray:
    """`resamples` bootstrap replicates from `resampling.resample_units` (the draw-count statistic
    when the index has one), drawn in blocks of about BOOT_BLOCK_VALUES values, one call per
    block, from the same stream. Any split is an equally valid bootstrap; small blocks stay in
    the processor's cache (at 2x200, 4 blocks of 500 resamples ran about 3 times faster than one
    of 2000)."""
    per_block = max(1, BOOT_BLOCK_VALUES // max(1, sum(s.size for s in samples)))
    values = {} if spec.by_counts is not None else {"x": spec.values}
    counts = {"x": spec.by_counts(*samples)} if spec.by_counts is not None else None
    blocks = [resample_units(values, samples, min(per_block, resamples - done), rng,
                             count_statistics=counts)["x"]
              for done in range(0, resamples, per_block)]
    return np.concatenate(blocks)


def _bca_limits(spec, samples, level, rng, resamples, source):
    """The BCa interval of one data set as `pipeline.estimate_all` computes it for one index
    (its resamples drawn in blocks: `_replicates`)."""
    from auditor.pipeline import leave_one_out_values  # here: the pipeline imports this module

    est = spec.estimate(*samples, level)
    if est.value is None or not math.isfinite(est.value):
        return None
    boot, mapping = (spec, None) if source is None else source
    reps = _replicates(boot, samples, resamples, rng)
    loo = leave_one_out_values(boot, samples)
    if mapping is not None:
        reps, loo = mapping(reps), tuple(mapping(v) for v in loo)
    # a reason every resample inherits (complete separation, ...), as `estimate_all` passes it
    degenerate = getattr(spec, "degenerate", None)
    extra = () if degenerate is None else (degenerate(*samples),)
    iv = bca_interval(float(est.value), reps, loo, level, spec.bounds, *extra).interval
    if iv is None:
        return None
    return float(iv.low), float(iv.high)


def _named_limits(name, spec, samples, level, rng, resamples, source):
    """The interval of method `name` among those the index computes (its own analytic one and
    those beside it, `Estimate.more`: test-matched and boundary-valid intervals)."""
    est = spec.estimate(*samples, level)
    if est.value is None:
        return None
    for iv in (est.interval, *est.more):
        if iv is not None and iv.method == name and iv.low is not None and iv.high is not None:
            return float(iv.low), float(iv.high)
    return None


_LIMITS = {"analytic": _analytic_limits, "bca_bootstrap": _bca_limits}


def _limits_of(method: str):
    return _LIMITS.get(method) or functools.partial(_named_limits, method)


def simulate_intervals(spec: EffectSpec, population: GroupPopulations | RowPopulation,
                       sizes: Sequence[int], *, method: str, level: float, simulations: int,
                       resamples: int, entropy: int, source=None,
                       progress: Progress = None) -> np.ndarray:
    """(simulations, 2) interval limits, NaN where the method gave no interval. Simulation i
    draws its data from SeedSequence(entropy, spawn_key=(0, i)) and its resamples from
    spawn_key (1, i), so row i does not depend on how many simulations run or in which order."""
    limits = np.full((simulations, 2), np.nan)
    find = _limits_of(method)
    for i in range(simulations):
        samples = population.draw(_stream(entropy, DATA_STREAM, i), sizes)
        rng = _stream(entropy, BOOTSTRAP_STREAM, i) if method == "bca_bootstrap" else None
        with np.errstate(all="ignore"), warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)  # numerical chatter of one data set
            try:
                found = find(spec, samples, level, rng, resamples, source)
            except (OverflowError, FloatingPointError):
                found = None
        if found is not None and math.isfinite(found[0]) and math.isfinite(found[1]):
            limits[i] = found
        if progress is not None:
            progress(i + 1, simulations)
    return limits


# ------------------------------------------------------------------ the check


def verdict(coverage: float, mc_se: float, level: float) -> tuple[float | None, str]:
    """(shortfall in percentage points or None, verdict text): "falls short by X points" when
    level - coverage exceeds MARGIN_SES Monte Carlo SEs, else "holds"."""
    gap = level - coverage
    if gap > MARGIN_SES * mc_se:
        points = 100.0 * gap
        return points, f"falls short by {points:.1f} points"
    return None, "holds"


def coverage_check(spec: EffectSpec, samples: Sequence[np.ndarray], *, method: str,
                   level: float = DEFAULT_LEVEL, simulations: int = DEFAULT_SIMULATIONS,
                   resamples: int = DEFAULT_RESAMPLES, rng,
                   progress: Progress = None) -> CoverageCheck:
    """Estimate how often `method`'s interval for `spec` covers the index's population value, in
    smoothed populations built from `samples` (see the module docstring for the populations, the
    population values, the streams and the defaults).

    `samples` are as the pipeline passes them: (A, B) for two groups, k arrays for k groups, one
    (n, 2) or (n, k) array of participants' rows. `method` is "analytic" (the index's own
    interval) or "bca_bootstrap" (BCa over `resamples` resamples; `resamples` is ignored for
    "analytic" and recorded as None). `rng` is a numpy Generator (or a seed for
    `numpy.random.default_rng`); the same Generator state gives the same result.
    `progress(done, total)` is called as each simulation finishes.

    Bad arguments raise (TypeError, ValueError); conditions of the data (too few values, no
    spread, an index without a population value) give a result with `reason` set.
    """
    samples, design, level, simulations, resamples = _checked(spec, samples, method, level,
                                                              simulations, resamples)
    rng = np.random.default_rng(rng)
    entropy = int(rng.integers(0, 2**63))
    sizes = tuple(int(np.shape(s)[0]) for s in samples)
    base = dict(index=spec.name, method=method, design=design, level=level,
                simulations=simulations,
                resamples=resamples if method == "bca_bootstrap" else None, sizes=sizes,
                seed_entropy=entropy)
    if spec.name in NO_POPULATION_VALUE:
        return CoverageCheck(**base, reason=NO_POPULATION_VALUE[spec.name])
    if min(sizes) < 2:
        unit = "rows" if design in ("paired", "k_repeated") else "values in a group"
        return CoverageCheck(**base, reason=f"{min(sizes)} {unit}: at least 2 are needed to build"
                                            " a population from the data")
    population = smoothed_population(samples)
    described = dict(population=population.describe(), bandwidths=population.bandwidths,
                     shrinks=population.shrinks)
    truth = population_value(spec, population, _stream(entropy, TRUTH_STREAM))
    if truth.value is None:
        return CoverageCheck(**base, **described, reason=truth.reason)
    limits = simulate_intervals(spec, population, sizes, method=method, level=level,
                                simulations=simulations, resamples=resamples, entropy=entropy,
                                source=bootstrap_source(spec, design), progress=progress)
    return _summary(base, described, truth, limits, spec)


def _summary(base, described, truth: PopulationValue, limits: np.ndarray,
             spec: EffectSpec) -> CoverageCheck:
    ok = np.all(np.isfinite(limits), axis=1)
    usable = int(np.count_nonzero(ok))
    undefined = int(limits.shape[0] - usable)
    shared = dict(**base, **described, usable=usable, undefined=undefined, truth=truth.value,
                  truth_method=truth.method, truth_formula=truth.formula, truth_se=truth.se)
    notes = list(_notes(spec, base))
    if usable == 0:
        return CoverageCheck(**shared, notes=tuple(notes),
                             reason=f"no simulated data set gave an interval by {base['method']} "
                                    "(the index may have none of this kind)")
    low, high = limits[ok, 0], limits[ok, 1]
    t = truth.value
    covered = int(np.count_nonzero((low <= t) & (t <= high)))
    coverage = covered / usable
    mc_se = math.sqrt(coverage * (1 - coverage) / usable)
    shortfall, text = verdict(coverage, mc_se, base["level"])
    if undefined:
        notes.append(f"{undefined} of {limits.shape[0]} simulated data sets gave no interval; the"
                     " coverage is over the others")
    if coverage - base["level"] > MARGIN_SES * mc_se:
        notes.append(f"conservative: covers {100 * (coverage - base['level']):.1f} points more "
                     "than promised")
    return CoverageCheck(**shared, covered=covered, below=int(np.count_nonzero(high < t)),
                         above=int(np.count_nonzero(low > t)), coverage=coverage, mc_se=mc_se,
                         mean_width=float(np.mean(high - low)), shortfall_points=shortfall,
                         verdict=text, notes=tuple(notes))


def _notes(spec: EffectSpec, base) -> tuple[str, ...]:
    sizes = base["sizes"]
    notes = []
    if base["design"] == "two_independent" and spec.name in ("cohen_d", "hedges_g", "robust_d") \
            and sizes[0] != sizes[1]:
        notes.append("the population value pools the two variances with equal weights; with "
                     "unequal group sizes and spreads the index pools them by n - 1, so it "
                     "estimates a slightly different value")
    # paired specs wrap their values as functools.partial(..., digits=digits)
    digits = getattr(spec.values, "keywords", {}).get("digits")
    if isinstance(digits, int) and digits < 12:
        notes.append(f"this spec rounds differences to {digits} decimal places, so the continuous "
                     "draws are rounded too and may tie; build the spec with the default digits "
                     "for a tie-free check")
    return tuple(notes)


def _checked(spec, samples, method, level, simulations, resamples):
    """Validate and normalise the arguments of `coverage_check`."""
    if not isinstance(spec, EffectSpec):
        raise TypeError(f"spec is a {type(spec).__name__}: pass an EffectSpec from "
                        "auditor.effects (e.g. two_group_effects()[0])")
    if not isinstance(method, str) or not method:
        raise ValueError(f"method {method!r} is not known: use one of {', '.join(METHODS)} or"
                         " the name of an interval the index computes (e.g. 'noncentral_t')")
    level = float(level)
    if not 0.5 <= level < 1.0:
        raise ValueError(f"level {level} is out of range: use a value in [0.5, 1), e.g. 0.95")
    if isinstance(simulations, bool) or int(simulations) != simulations \
            or simulations < MIN_SIMULATIONS:
        raise ValueError(f"simulations {simulations}: use a whole number of at least "
                         f"{MIN_SIMULATIONS} (e.g. {DEFAULT_SIMULATIONS})")
    if isinstance(resamples, bool) or int(resamples) != resamples or resamples < MIN_RESAMPLES:
        raise ValueError(f"resamples {resamples}: use a whole number of at least {MIN_RESAMPLES}"
                         f" (e.g. {DEFAULT_RESAMPLES})")
    if isinstance(samples, np.ndarray):
        raise TypeError("samples is one array: pass a tuple, (a, b) for two groups or (rows,) "
                        "for paired and repeated data")
    samples = tuple(np.asarray(s, dtype=float) for s in samples)
    design = design_of(samples)
    for j, s in enumerate(samples):
        if not np.all(np.isfinite(s)):
            raise ValueError(f"sample {j + 1} holds missing or infinite values: the check needs "
                             "the finite values the audit uses; drop the others first")
    others = {d for d in DESIGNS if d != design and spec.name in {s.name for s in _registry(d)}}
    if others and spec.name not in {s.name for s in _registry(design)}:
        raise ValueError(f"index {spec.name!r} belongs to the {', '.join(sorted(others))} design "
                         f"but the samples form {design}: pass the spec of the samples' design")
    if method not in METHODS:
        with np.errstate(all="ignore"):
            est = spec.estimate(*samples, level)
        names = [iv.method for iv in (est.interval, *est.more) if iv is not None]
        if method not in names:
            raise ValueError(f"method {method!r} is not an interval of {spec.name} on these"
                             f" data: use one of {', '.join(METHODS + tuple(names))}")
    return samples, design, level, int(simulations), int(resamples)
