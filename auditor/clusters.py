"""Clustered cases in two independent groups: how alike the cases of one cluster are (the
intraclass correlation), how much that inflates the variance of a group comparison (the design
effect), and intervals for the two-group indices that resample whole clusters.

Pupils taught in the same class, patients treated at the same clinic or athletes coached by the
same coach share more than chance: their outcomes are correlated, and every interval computed as
if the cases were independent is too narrow. When the user names the cluster column
(`audit(..., cluster=COLUMN)`, `auditor check --cluster COLUMN`), the audit adds:

- the intraclass correlation of the outcome within groups (`intraclass_correlation`: the one-way
  analysis-of-variance estimator with clusters nested in groups, so that the difference between
  the groups is not counted as likeness within clusters);
- the design effect of the clustering (`design_effect`) and each group's effective size;
- cluster-bootstrap intervals (`cluster_bootstrap`): each resample draws, within each group, as
  many clusters as the group has, with replacement, and takes every case of each drawn cluster,
  so the groups' sizes vary from resample to resample. BCa limits with the acceleration from
  leaving out one cluster at a time (Davison & Hinkley 1997, sec. 3.8, for resampling clusters;
  Field & Welsh 2007 on its properties; both from memory).

A cluster whose cases fall in both groups (a clinic treating arms of a trial) is split: each
group's part is resampled within that group, and the correlation between its parts is not
carried into the intervals (a note says so).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from auditor.resampling import bca_interval, chunk_size
from auditor.results import Interval, Record, plain

CLUSTER_STREAM = 9  # spawn key of the random stream the cluster bootstrap draws from
FEW_CLUSTERS = 10  # fewer clusters than this in a group: the cluster bootstrap is rough (common practice)
MIN_CLUSTERS = 3  # fewer clusters than this in a group: no cluster-bootstrap interval


@dataclass(frozen=True)
class ClusterGroup(Record):
    """One group's clusters: how many, how many cases, the sizes of its clusters, the design
    effect of its mean (`design_effect` over its own cluster sizes) and its effective size, its
    cases divided by that (None when the intraclass correlation is undefined)."""

    label: str
    clusters: int
    cases: int
    mean_size: float
    smallest: int
    largest: int
    design_effect: float | None
    effective_n: float | None


@dataclass(frozen=True)
class IntraclassCorrelation(Record):
    """The one-way ANOVA estimate of the intraclass correlation and its parts.

    icc = (MSB - MSW) / (MSB + (n0 - 1) MSW), where MSB is the mean square between clusters
    within groups (df_between = clusters - groups), MSW the mean square within clusters
    (df_within = cases - clusters), and n0 the adjusted mean cluster size
    n0 = (N - sum_g sum_c n_gc^2 / N_g) / (clusters - groups). `icc` is None with a `reason`
    when a mean square has no degrees of freedom or both are 0."""

    icc: float | None
    ms_between: float | None
    ms_within: float | None
    df_between: int
    df_within: int
    n0: float | None
    method: str = "one-way ANOVA estimator, clusters nested in groups"
    reason: str | None = None


@dataclass(frozen=True)
class ClusterInterval(Record):
    """An index with its cluster-bootstrap interval, or None with the reason."""

    index: str
    estimate: float | None
    interval: Interval | None
    undefined_resamples: int = 0
    reason: str | None = None


@dataclass(frozen=True)
class Clusters(Record):
    """What the audit found about the clustering of the cases (see the module docstring).

    `design_effect` is that of the difference between the two groups' means
    (`difference_design_effect`): its variance under equal correlation within clusters relative
    to independent cases, from each group's own design effect (`ClusterGroup`). `intervals` has
    one entry per two-group index, in the registry's order."""

    column: str
    groups: tuple[ClusterGroup, ...]
    shared: tuple[str, ...]
    icc: IntraclassCorrelation
    design_effect: float | None
    resamples: int
    intervals: tuple[ClusterInterval, ...]
    notes: tuple[str, ...] = ()

    def interval(self, name: str) -> ClusterInterval | None:
        return next((c for c in self.intervals if c.index == name), None)

    def to_dict(self) -> dict:
        out = plain(self)
        out["intervals"] = {c.index: {k: v for k, v in plain(c).items() if k != "index"}
                            for c in self.intervals}
        return out


# ------------------------------------------------------------------ likeness within clusters


def intraclass_correlation(values, clusters, strata=None) -> IntraclassCorrelation:
    """The one-way ANOVA intraclass correlation of `values` grouped by `clusters` (labels, one
    per value), with clusters nested in `strata` (the compared groups; None: one stratum).

    The mean squares are those of the nested analysis of variance (cluster within stratum after
    stratum, sums of squares of type I, as `statsmodels.formula.api.ols('y ~ C(g) + C(g):C(c)')`
    gives them); n0 is the adjusted mean cluster size of the unbalanced one-way model (Donner
    1986, Int. Stat. Rev. 54: 67-82, sec. 2, from memory), which is the common size when the
    clusters are equal, where the estimate is pingouin's ICC1 of one stratum. It can fall below
    zero when clusters differ less than chance makes them.
    """
    y = np.asarray(values, dtype=float)
    cells = _cells(clusters, strata, y.size)
    n_total = y.size
    # the sums of squares of y / s, s the largest |y|, so that neither huge nor tiny values
    # overflow or underflow on the way; the mean squares are scaled back (the ratio is exact)
    scale = float(np.max(np.abs(y))) if y.size else 0.0
    if scale > 0 and np.isfinite(scale):
        y = y / scale
    else:
        scale = 1.0
    ss_w = ss_b = 0.0
    n_cells, n_strata, size_term = 0, 0, 0.0
    for members in cells:
        stratum_mean = float(np.mean(y[np.concatenate(members)]))
        stratum_n = sum(m.size for m in members)
        n_strata += 1
        for m in members:
            part = y[m]
            mean = float(np.mean(part))
            ss_w += float(np.sum((part - mean) ** 2))
            ss_b += m.size * (mean - stratum_mean) ** 2
            size_term += m.size ** 2 / stratum_n
            n_cells += 1
    df_b, df_w = n_cells - n_strata, n_total - n_cells
    if df_b < 1:
        return IntraclassCorrelation(None, None, None, df_b, df_w, None,
                                     reason="each group has a single cluster: nothing to compare"
                                            " clusters with")
    n0 = (n_total - size_term) / df_b
    ms_b = ss_b / df_b
    squared = scale * scale  # may overflow (or underflow) for extreme data: the reported MS only
    if df_w < 1:
        return IntraclassCorrelation(None, ms_b * squared, None, df_b, df_w, n0,
                                     reason="every cluster has a single case: no variation"
                                            " within clusters to compare with")
    ms_w = ss_w / df_w
    denominator = ms_b + (n0 - 1.0) * ms_w
    if not denominator > 0:
        return IntraclassCorrelation(None, ms_b * squared, ms_w * squared, df_b, df_w, n0,
                                     reason="the outcome does not vary within groups")
    with np.errstate(over="ignore", under="ignore"):
        return IntraclassCorrelation((ms_b - ms_w) / denominator, float(ms_b * squared),
                                     float(ms_w * squared), df_b, df_w, n0)


def _cells(clusters, strata, n: int) -> list[list[np.ndarray]]:
    """Per stratum (in order of first appearance), the positions of each of its clusters (in
    order of first appearance)."""
    clusters = np.asarray(clusters, dtype=object)
    strata = np.zeros(n, dtype=np.int64) if strata is None else np.asarray(strata, dtype=object)
    if clusters.shape != (n,) or strata.shape != (n,):
        raise ValueError("values, clusters and strata must have the same length")
    by_stratum: dict = {}
    for i, (s, c) in enumerate(zip(strata.tolist(), clusters.tolist())):
        by_stratum.setdefault(s, {}).setdefault(c, []).append(i)
    return [[np.asarray(m, dtype=np.int64) for m in cs.values()] for cs in by_stratum.values()]


def design_effect(icc: float | None, sizes: Sequence[int]) -> float | None:
    """1 + (sum n_c^2 / N - 1) max(icc, 0) for clusters of sizes n_c and N cases in all.

    Var(mean of all cases) = sigma^2 / N * (1 + (sum n_c^2 / N - 1) rho) when every pair of
    cases in one cluster has correlation rho and cases of different clusters none; for equal
    sizes m it is Kish's (1965) 1 + (m - 1) rho, and it is Eldridge, Ashby & Kerry's (2006,
    Int. J. Epidemiol. 35: 1292-1300) 1 + ((cv^2 + 1) m - 1) rho with cv the coefficient of
    variation of the sizes taken with the population SD (from memory). A negative estimate of
    rho is taken as 0 (clustering cannot make cases more informative than independent ones in
    this model)."""
    sizes = np.asarray(sizes, dtype=float)
    weighted = float(np.sum(sizes ** 2) / np.sum(sizes))
    if weighted == 1.0:  # every cluster a single case: nothing is shared, whatever rho is
        return 1.0
    if icc is None:
        return None
    return 1.0 + (weighted - 1.0) * max(float(icc), 0.0)


def difference_design_effect(effects: Sequence[float | None],
                             cases: Sequence[int]) -> float | None:
    """The design effect of the difference between two groups' means from each group's own,
    (deff_A / N_A + deff_B / N_B) / (1 / N_A + 1 / N_B): the two means' variances add when no
    cluster holds cases of both groups (with shared clusters the covariance between the parts
    is left out)."""
    if any(e is None for e in effects):
        return None
    return (sum(e / n for e, n in zip(effects, cases))
            / sum(1.0 / n for n in cases))


# ------------------------------------------------------------------ resampling clusters


def _members(cluster_values: Sequence[np.ndarray]) -> tuple[np.ndarray, np.ndarray, list]:
    """Flat values of one group in cluster order, each cluster's size, and each cluster's
    positions in the flat array."""
    flat = pooled(cluster_values)
    sizes = np.array([len(v) for v in cluster_values], dtype=np.int64)
    starts = np.concatenate([[0], np.cumsum(sizes)[:-1]])
    return flat, sizes, [np.arange(s, s + k) for s, k in zip(starts, sizes)]


def _draw(flat, positions, picks) -> np.ndarray:
    """The cases of the clusters `picks`, in the order drawn."""
    return flat[np.concatenate([positions[c] for c in picks])]


def cluster_replicates(specs, clusters_a: Sequence[np.ndarray], clusters_b: Sequence[np.ndarray],
                       resamples: int, rng: np.random.Generator,
                       progress=None) -> dict[str, np.ndarray]:
    """Every index's value on `resamples` cluster resamples of the two groups.

    `clusters_a`, `clusters_b`: each group's clusters, one array of values per cluster. Per
    chunk of m resamples, `rng.integers(0, G_A, (m, G_A))` picks A's clusters and then
    `rng.integers(0, G_B, (m, G_B))` B's (the order `scipy.stats.bootstrap` draws in when given
    the clusters' positions as its two samples and `batch` = the chunk); resample r is the
    cases of A's picked clusters in the order picked, and B's likewise. Resamples whose groups
    have the same sizes are evaluated together with each index's vectorised `values`, which
    gives the same numbers as evaluating them one at a time. Each resample's picks are taken
    in increasing order (see the loop). `progress(done, resamples)` is called as resamples are
    evaluated."""
    flat_a, sizes_a, pos_a = _members(clusters_a)
    flat_b, sizes_b, pos_b = _members(clusters_b)
    g_a, g_b = len(clusters_a), len(clusters_b)
    out = {s.name: np.empty(resamples) for s in specs}
    step = chunk_size(int(sizes_a.sum()), int(sizes_b.sum()), resamples)
    done = evaluated = 0
    while done < resamples:
        m = min(step, resamples - done)
        # each resample's clusters in increasing order: the same multiset of clusters (the
        # resampling distribution is unchanged), so that resamples drawing the same clusters
        # give the very same value and the count of distinct values is not inflated by rounding
        picks_a = np.sort(rng.integers(0, g_a, (m, g_a)), axis=1)
        picks_b = np.sort(rng.integers(0, g_b, (m, g_b)), axis=1)
        n_a, n_b = sizes_a[picks_a].sum(axis=1), sizes_b[picks_b].sum(axis=1)
        shapes = np.stack([n_a, n_b], axis=1)
        for shape in np.unique(shapes, axis=0):
            rows = np.flatnonzero((shapes == shape).all(axis=1))
            stacked_a = np.stack([_draw(flat_a, pos_a, picks_a[r]) for r in rows])
            stacked_b = np.stack([_draw(flat_b, pos_b, picks_b[r]) for r in rows])
            with np.errstate(all="ignore"):
                for spec in specs:
                    out[spec.name][done + rows] = spec.values(stacked_a, stacked_b)
            evaluated += rows.size
            if progress is not None:
                progress(evaluated, resamples)
        done += m
    return out


def pooled(clusters, leave_out: int | None = None) -> np.ndarray:
    """A group's cases, cluster after cluster, without cluster `leave_out` when given."""
    return np.concatenate([np.asarray(v, dtype=float)
                           for i, v in enumerate(clusters) if i != leave_out])


def leave_one_cluster_out(spec, clusters_a, clusters_b) -> tuple[np.ndarray, np.ndarray]:
    """The index with each cluster of A left out in turn, then each cluster of B (the
    jackknife over clusters that gives the BCa acceleration)."""
    def without(clusters, j):
        return pooled(clusters, j)[None, :]

    a, b = pooled(clusters_a)[None, :], pooled(clusters_b)[None, :]
    with np.errstate(all="ignore"):
        loo_a = np.array([spec.values(without(clusters_a, j), b)[0]
                          for j in range(len(clusters_a))], dtype=float)
        loo_b = np.array([spec.values(a, without(clusters_b, j))[0]
                          for j in range(len(clusters_b))], dtype=float)
    return loo_a, loo_b


def cluster_bootstrap(specs, estimates: dict[str, float | None], clusters_a, clusters_b,
                      level: float, resamples: int, rng: np.random.Generator,
                      progress=None) -> tuple[ClusterInterval, ...]:
    """Cluster-bootstrap BCa interval of every index in `specs` (`resampling.bca_interval` on
    `cluster_replicates`, the acceleration from `leave_one_cluster_out`); `estimates` holds each
    index's estimate on the data (None: undefined, no interval)."""
    fewest = min(len(clusters_a), len(clusters_b))
    if fewest < MIN_CLUSTERS:
        reason = ("a group has a single cluster: resampling clusters cannot vary it" if fewest < 2
                  else f"a group has only {fewest} clusters: resamples of so few take a handful"
                       f" of values (at least {MIN_CLUSTERS} clusters per group are needed)")
        return tuple(ClusterInterval(s.name, estimates.get(s.name), None, 0, reason)
                     for s in specs)
    defined = [s for s in specs if estimates.get(s.name) is not None]
    replicates = cluster_replicates(defined, clusters_a, clusters_b, resamples, rng, progress)
    a, b = pooled(clusters_a), pooled(clusters_b)
    out = []
    for spec in specs:
        theta = estimates.get(spec.name)
        if theta is None:
            out.append(ClusterInterval(spec.name, None, None, 0,
                                       "the index is undefined for these data"))
            continue
        degenerate = None if spec.degenerate is None else spec.degenerate(a, b)
        boot = bca_interval(theta, replicates[spec.name],
                            leave_one_cluster_out(spec, clusters_a, clusters_b), level,
                            spec.bounds, degenerate)
        interval = (None if boot.interval is None else
                    Interval("cluster_bca_bootstrap", boot.interval.low, boot.interval.high,
                             level, boot.interval.note))
        out.append(ClusterInterval(spec.name, theta, interval, boot.undefined_resamples,
                                   boot.reason))
    return tuple(out)


# ------------------------------------------------------------------ the audit's block


def by_cluster(values: np.ndarray, labels: Sequence[str]) -> tuple[list[str], list[np.ndarray]]:
    """One group's values split by cluster label, clusters in order of first appearance and each
    cluster's values in file order."""
    found: dict[str, list[int]] = {}
    for i, lab in enumerate(labels):
        found.setdefault(lab, []).append(i)
    values = np.asarray(values, dtype=float)
    return list(found), [values[np.asarray(m, dtype=np.int64)] for m in found.values()]


def clustering(column: str, group_labels: Sequence[str], values: Sequence[np.ndarray],
               cluster_labels: Sequence[Sequence[str]], specs, estimates: dict[str, float | None],
               level: float, resamples: int, seed: int, progress=None) -> Clusters:
    """The `Clusters` block of a two-group audit: each group's values with their cluster labels,
    the registry's two-group `specs` and their estimates on the data; the bootstrap draws from
    SeedSequence(seed, spawn_key=(CLUSTER_STREAM,))."""
    names, parts = zip(*(by_cluster(v, labs) for v, labs in zip(values, cluster_labels)))
    y = pooled(values)
    icc = intraclass_correlation(
        y, [c for labs in cluster_labels for c in labs],
        [g for g, v in zip(group_labels, values) for _ in range(len(v))])
    groups = []
    for lab, p in zip(group_labels, parts):
        sizes = [len(x) for x in p]
        effect = design_effect(icc.icc, sizes)
        groups.append(ClusterGroup(lab, len(p), int(sum(sizes)), float(np.mean(sizes)),
                                   int(min(sizes)), int(max(sizes)), effect,
                                   None if effect is None else sum(sizes) / effect))
    groups = tuple(groups)
    difference = difference_design_effect([g.design_effect for g in groups],
                                          [g.cases for g in groups])
    shared = tuple(sorted(set(names[0]) & set(names[1])))
    rng = np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(CLUSTER_STREAM,)))
    intervals = cluster_bootstrap(specs, estimates, parts[0], parts[1], level, resamples, rng,
                                  progress)
    notes = []
    if shared:
        listed = ", ".join(f"'{s}'" for s in shared[:5]) + (" ..." if len(shared) > 5 else "")
        notes.append(f"{len(shared)} cluster(s) of '{column}' hold cases of both groups"
                     f" ({listed}): each group's part is resampled within its group, and the"
                     " design effects describe each group's mean; the covariance between the"
                     " parts of one cluster is carried into neither, so the intervals for the"
                     " difference may be too wide or too narrow; where most clusters hold both"
                     " groups, an analysis with the clusters as blocks fits the design")
    small = [g for g in groups if g.clusters < FEW_CLUSTERS]
    if small:
        which = ", ".join(f"'{g.label}' {g.clusters}" for g in small)
        notes.append(f"few clusters ({which}; fewer than {FEW_CLUSTERS} per group): cluster-"
                     "bootstrap intervals are rough and tend to be too narrow with so few"
                     " (common practice)")
    if icc.icc is not None and icc.icc < 0:
        notes.append(f"the intraclass correlation estimate is below 0 ({icc.icc:.3g}): the"
                     " clusters differ less than chance makes them; the design effect takes it"
                     " as 0")
    return Clusters(column, groups, shared, icc, difference, resamples, intervals, tuple(notes))


def clustering_warning(block: Clusters) -> str:
    """The one warning an audit with named clusters carries."""
    icc = "undefined" if block.icc.icc is None else f"{block.icc.icc:.3g}"
    effect = "undefined" if block.design_effect is None else f"{block.design_effect:.3g}"
    counts = " and ".join(f"{g.clusters}" for g in block.groups)
    few = any(g.clusters < FEW_CLUSTERS for g in block.groups)
    advice = ("the cluster-bootstrap intervals (clusters.intervals) are the ones to quote, and"
              " with so few clusters they too are rough" if few else
              "quote the cluster-bootstrap intervals (clusters.intervals)")
    reading = ("may be too wide or too narrow, as clusters hold cases of both groups"
               if block.shared else "are too narrow when the correlation is above 0")
    return (f"cases are clustered in '{block.column}' ({counts} clusters; intraclass correlation"
            f" {icc}, design effect of the difference {effect}): every interval except the"
            f" cluster-bootstrap ones, and the test's p-value, assume independent cases and"
            f" {reading}; {advice}")
