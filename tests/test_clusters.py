"""Clustered cases (auditor/clusters.py, `--cluster`): the intraclass correlation against
pingouin, scipy's one-way ANOVA and statsmodels' nested ANOVA; the design effect against the
variance of a mean under equal correlation within clusters; the cluster bootstrap against a plain
loop over resampled clusters and against scipy.stats.bootstrap given the clusters' positions
(same seed); invariances (hypothesis); and the audit, the reports and the command line with a
cluster column. Data are invented (pupils in classes, athletes with coaches): the references are
the libraries."""

from __future__ import annotations

import csv
import io
import json
import warnings

import numpy as np
import pandas as pd
import pingouin as pg
import pytest
import scipy.stats as st
from scipy import special
import statsmodels.api as sm
import statsmodels.formula.api as smf
from hypothesis import given, settings
from hypothesis import strategies as hs

from auditor.clusters import (CLUSTER_STREAM, by_cluster, cluster_bootstrap, cluster_replicates,
                              design_effect, intraclass_correlation, leave_one_cluster_out)
from auditor.effects import two_group_effects
from auditor.errors import DesignError
from auditor.pipeline import audit, estimate_all
from auditor.resampling import chunk_size
from cli_checks import one_line_error


def _clusters(rng, count, sizes, shift=0.0, spread=0.8):
    """`count` clusters of sizes drawn from `sizes`, each with its own level."""
    return [shift + spread * rng.normal() + rng.normal(size=int(rng.choice(sizes)))
            for _ in range(count)]


def _frame(parts_a, parts_b):
    rows = [(g, f"{g}{c}", v) for g, parts in (("a", parts_a), ("b", parts_b))
            for c, part in enumerate(parts) for v in part]
    return pd.DataFrame(rows, columns=["g", "c", "y"])


# ------------------------------------------------------------------ intraclass correlation


def test_icc_of_equal_clusters_in_one_stratum_is_pingouins_icc1():
    rng = np.random.default_rng(4)
    parts = _clusters(rng, 9, [6])
    long = pd.DataFrame([(c, k, v) for c, part in enumerate(parts) for k, v in enumerate(part)],
                        columns=["cluster", "position", "y"])
    ref = pg.intraclass_corr(long, targets="cluster", raters="position", ratings="y")
    icc1 = float(ref.iloc[0]["ICC"])  # the first row: one-way random effects, single rating
    assert ref.iloc[0]["Type"] in ("ICC1", "ICC(1,1)")
    ours = intraclass_correlation(long.y, long.cluster)
    assert ours.icc == pytest.approx(icc1, abs=1e-8)
    assert ours.n0 == pytest.approx(6.0, abs=1e-12)


def test_icc_of_unequal_clusters_in_one_stratum_follows_scipys_one_way_anova():
    rng = np.random.default_rng(5)
    parts = _clusters(rng, 11, [2, 3, 5, 8])
    f = st.f_oneway(*parts).statistic
    sizes = np.array([len(p) for p in parts], dtype=float)
    n, k = sizes.sum(), sizes.size
    n0 = (n - np.sum(sizes ** 2) / n) / (k - 1)  # Donner (1986), one-way unbalanced; from memory
    expected = (f - 1) / (f + n0 - 1)
    ours = intraclass_correlation(np.concatenate(parts),
                                  [c for c, p in enumerate(parts) for _ in p])
    assert ours.icc == pytest.approx(expected, abs=1e-8)
    assert ours.ms_between / ours.ms_within == pytest.approx(f, rel=1e-10)


def test_icc_nested_in_groups_follows_statsmodels_anova_of_clusters_after_groups():
    rng = np.random.default_rng(6)
    frame = _frame(_clusters(rng, 10, [3, 4, 7], shift=0.6), _clusters(rng, 8, [2, 5, 6]))
    by_group = smf.ols("y ~ C(g)", frame).fit()
    by_cluster_fit = smf.ols("y ~ C(c)", frame).fit()  # labels are unique: clusters nest in groups
    table = sm.stats.anova_lm(by_group, by_cluster_fit)
    ms_between = table.ss_diff[1] / table.df_diff[1]
    ms_within = by_cluster_fit.mse_resid
    ours = intraclass_correlation(frame.y, frame.c, frame.g)
    assert ours.df_between == int(table.df_diff[1]) == 16
    assert ours.df_within == int(by_cluster_fit.df_resid)
    assert ours.ms_between == pytest.approx(ms_between, rel=1e-10)
    assert ours.ms_within == pytest.approx(ms_within, rel=1e-10)
    sizes = frame.groupby(["g", "c"]).size()
    totals = frame.groupby("g").size()
    n0 = (len(frame) - sum(sizes[g].pow(2).sum() / totals[g] for g in totals.index)) / 16
    f = ms_between / ms_within
    assert ours.icc == pytest.approx((f - 1) / (f + n0 - 1), abs=1e-8)


def test_icc_with_equal_clusters_in_two_groups_is_the_mixed_model_share_of_variance():
    """Balanced data: the ANOVA estimator is the REML estimate (when above 0), here from
    statsmodels' MixedLM with a group fixed effect, to its optimiser's tolerance."""
    rng = np.random.default_rng(7)
    frame = _frame(_clusters(rng, 12, [5], shift=0.5, spread=1.0),
                   _clusters(rng, 12, [5], spread=1.0))
    fit = smf.mixedlm("y ~ C(g)", frame, groups=frame["c"]).fit(reml=True)
    between = float(fit.cov_re.iloc[0, 0])
    reml = between / (between + fit.scale)
    assert intraclass_correlation(frame.y, frame.c, frame.g).icc == pytest.approx(reml, abs=1e-4)


def test_icc_says_why_when_it_cannot_be_estimated():
    one_each = intraclass_correlation([1.0, 2.0, 3.0, 5.0], ["x", "x", "y", "y"], ["a", "a", "b", "b"])
    assert one_each.icc is None and "single cluster" in one_each.reason
    singletons = intraclass_correlation([1.0, 2.0, 3.0, 5.0], ["p", "q", "r", "s"])
    assert singletons.icc is None and "single case" in singletons.reason
    flat = intraclass_correlation([2.0] * 6, list("ppqqrr"))
    assert flat.icc is None and "does not vary" in flat.reason


@settings(max_examples=40, deadline=None)
@given(seed=hs.integers(0, 2**32 - 1), scale=hs.floats(0.01, 100.0), shift=hs.floats(-1e3, 1e3))
def test_icc_is_unchanged_by_location_and_scale_and_by_the_order_of_cases(seed, scale, shift):
    rng = np.random.default_rng(seed)
    frame = _frame(_clusters(rng, 5, [2, 3, 4]), _clusters(rng, 4, [2, 5]))
    base = intraclass_correlation(frame.y, frame.c, frame.g).icc
    moved = intraclass_correlation(shift + scale * frame.y, frame.c, frame.g).icc
    order = rng.permutation(len(frame))
    shuffled = frame.iloc[order]
    assert moved == pytest.approx(base, abs=1e-9)
    assert intraclass_correlation(shuffled.y, shuffled.c, shuffled.g).icc == pytest.approx(
        base, abs=1e-12)
    assert base <= 1.0


@pytest.mark.parametrize("scale", [1e200, 1e-300])
def test_icc_of_huge_or_tiny_values_is_that_of_ordinary_ones(scale):
    rng = np.random.default_rng(16)
    frame = _frame(_clusters(rng, 6, [3, 5]), _clusters(rng, 5, [2, 4]))
    base = intraclass_correlation(frame.y, frame.c, frame.g)
    scaled = intraclass_correlation(frame.y * scale, frame.c, frame.g)
    assert scaled.icc == pytest.approx(base.icc, abs=1e-9)


def test_a_cluster_holding_both_groups_is_one_cell_per_group_in_the_icc():
    """The nested ANOVA with cells group x cluster (statsmodels), where a shared label names
    two cells."""
    rng = np.random.default_rng(17)
    frame = _frame(_clusters(rng, 6, [3, 4]), _clusters(rng, 5, [2, 5]))
    frame["c"] = frame["c"].str[1:]  # clusters 0-4 now hold cases of both groups
    cells = frame.g + ":" + frame.c
    fit_g = smf.ols("y ~ C(g)", frame).fit()
    fit_c = smf.ols("y ~ C(cell)", frame.assign(cell=cells)).fit()
    table = sm.stats.anova_lm(fit_g, fit_c)
    ours = intraclass_correlation(frame.y, frame.c, frame.g)
    assert ours.df_between == int(table.df_diff[1]) == 11 - 2
    assert ours.ms_between == pytest.approx(table.ss_diff[1] / table.df_diff[1], rel=1e-10)
    assert ours.ms_within == pytest.approx(fit_c.mse_resid, rel=1e-10)


def test_icc_is_one_when_every_cluster_is_constant():
    values = [1.0, 1.0, 1.0, 4.0, 4.0, 2.5, 2.5, 2.5, 2.5]
    assert intraclass_correlation(values, list("pppqqrrrr")).icc == pytest.approx(1.0, abs=1e-12)


# ------------------------------------------------------------------ design effect


@pytest.mark.parametrize("sizes", [[5, 5, 5, 5], [2, 3, 7, 12, 1], [30, 1, 1]])
@pytest.mark.parametrize("rho", [0.0, 0.05, 0.4])
def test_design_effect_is_the_variance_of_a_mean_under_equal_correlation_within_clusters(sizes,
                                                                                         rho):
    """w' S w / (sigma^2 / N), S = sigma^2 ((1 - rho) I + rho within-cluster blocks), w = 1/N:
    the variance ratio computed with numpy's linear algebra (`_variance_ratio`)."""
    assert design_effect(rho, sizes) == pytest.approx(_variance_ratio(rho, sizes), rel=1e-12)
    if len(set(sizes)) == 1:
        assert design_effect(rho, sizes) == pytest.approx(1 + (sizes[0] - 1) * rho, rel=1e-12)


def _variance_ratio(rho, sizes_a, sizes_b=None):
    """Var(mean of A) (or Var(mean A - mean B)) under equal correlation rho within clusters,
    over its value for independent cases: w' S w / w' w, computed with numpy's linear algebra
    (S = (1 - rho) I + rho within-cluster blocks; w = 1/N_A on A's cases, -1/N_B on B's)."""
    sizes = list(sizes_a) + list(sizes_b or [])
    n = sum(sizes)
    blocks = np.zeros((n, n))
    start = 0
    for m in sizes:
        blocks[start:start + m, start:start + m] = 1.0
        start += m
    cov = (1 - max(rho, 0.0)) * np.eye(n) + max(rho, 0.0) * blocks
    n_a = sum(sizes_a)
    w = np.r_[np.full(n_a, 1.0 / n_a), np.full(n - n_a, -1.0 / max(n - n_a, 1))]
    return float(w @ cov @ w) / float(w @ w)


@pytest.mark.parametrize("rho", [0.0, 0.12, 0.45])
def test_the_difference_s_design_effect_is_its_variance_ratio(rho):
    from auditor.clusters import difference_design_effect

    sizes_a, sizes_b = [20] * 10, [1] * 200  # large clusters against single cases
    effects = [design_effect(rho, sizes_a), design_effect(rho, sizes_b)]
    assert effects[1] == 1.0
    assert difference_design_effect(effects, [200, 200]) == pytest.approx(
        _variance_ratio(rho, sizes_a, sizes_b), rel=1e-12)


def test_clusters_of_single_cases_have_design_effect_one_whatever_the_icc():
    assert design_effect(None, [1, 1, 1, 1]) == 1.0
    assert design_effect(0.7, [1, 1, 1]) == 1.0


def test_a_negative_icc_gives_no_design_effect_below_one():
    assert design_effect(-0.2, [4, 4, 4]) == 1.0
    assert design_effect(None, [4, 4]) is None


# ------------------------------------------------------------------ cluster bootstrap


def _two_groups(seed=8):
    rng = np.random.default_rng(seed)
    return _clusters(rng, 9, [3, 4, 6], shift=0.7), _clusters(rng, 7, [2, 5, 6])


def _by_hand(name, x, y):
    """Each index from outside the project: numpy, scipy and pingouin."""
    if name == "mean_difference":
        return float(np.mean(x) - np.mean(y))
    if name == "cohen_d":
        return float(pg.compute_effsize(x, y, paired=False, eftype="cohen"))
    if name == "hedges_g":  # the exact small-sample factor (Hedges 1981), with scipy's gamma
        df = len(x) + len(y) - 2
        j = np.exp(special.gammaln(df / 2) - special.gammaln((df - 1) / 2)) / np.sqrt(df / 2)
        return float(j * pg.compute_effsize(x, y, paired=False, eftype="cohen"))
    u = st.mannwhitneyu(x, y, alternative="two-sided").statistic
    if name == "prob_superiority":
        return float(u / (len(x) * len(y)))
    if name == "cliff_delta":
        return float(2 * u / (len(x) * len(y)) - 1)
    if name == "hodges_lehmann":
        return float(np.median(np.subtract.outer(x, y)))
    raise KeyError(name)


CHECKED = ("mean_difference", "cohen_d", "hedges_g", "prob_superiority", "cliff_delta",
           "hodges_lehmann")


def test_cluster_replicates_are_a_plain_loop_over_resampled_clusters_with_the_same_seed():
    parts_a, parts_b = _two_groups()
    specs = [s for s in two_group_effects() if s.name in CHECKED]
    resamples = 300
    ours = cluster_replicates(specs, parts_a, parts_b, resamples, np.random.default_rng(21))
    rng = np.random.default_rng(21)
    # the same draws, each resample's clusters taken in increasing order (a reordering within
    # the resample: the same multiset of clusters)
    picks_a = np.sort(rng.integers(0, len(parts_a), (resamples, len(parts_a))), axis=1)
    picks_b = np.sort(rng.integers(0, len(parts_b), (resamples, len(parts_b))), axis=1)
    for r in range(resamples):
        x = np.concatenate([parts_a[c] for c in picks_a[r]])
        y = np.concatenate([parts_b[c] for c in picks_b[r]])
        for name in CHECKED:
            assert ours[name][r] == pytest.approx(_by_hand(name, x, y), rel=1e-12, abs=1e-12)


@pytest.mark.parametrize("name", CHECKED)
@pytest.mark.slow
def test_cluster_bootstrap_interval_is_scipys_bca_over_the_clusters_positions(name):
    parts_a, parts_b = _two_groups(9)
    spec = next(s for s in two_group_effects() if s.name == name)
    a, b = np.concatenate(parts_a), np.concatenate(parts_b)
    estimate = spec.estimate(a, b, 0.9).value
    (found,) = cluster_bootstrap([spec], {name: estimate}, parts_a, parts_b, 0.9, 999,
                                 np.random.default_rng(33))

    def statistic(ia, ib):
        return _by_hand(name, np.concatenate([parts_a[i] for i in ia]),
                        np.concatenate([parts_b[i] for i in ib]))

    ref = st.bootstrap((np.arange(len(parts_a)), np.arange(len(parts_b))), statistic,
                       vectorized=False, method="BCa", n_resamples=999, confidence_level=0.9,
                       batch=chunk_size(a.size, b.size, 999), rng=np.random.default_rng(33))
    assert found.interval.method == "cluster_bca_bootstrap"
    assert found.interval.low == pytest.approx(ref.confidence_interval.low, abs=1e-12)
    assert found.interval.high == pytest.approx(ref.confidence_interval.high, abs=1e-12)


def test_clusters_of_one_case_give_the_ordinary_bootstrap_intervals():
    """Each case its own cluster: resampling clusters is the stratified case bootstrap, so the
    intervals are the audit's own BCa intervals from the same generator."""
    rng = np.random.default_rng(10)
    a, b = np.sort(rng.normal(0.4, 1, 25)), np.sort(rng.gamma(2.0, 1.0, 31) - 1.5)
    specs = two_group_effects()
    effects, _, _ = estimate_all(specs, (a, b), 0.95, 500, np.random.default_rng(44))
    found = cluster_bootstrap(specs, {e.name: e.estimate for e in effects},
                              [np.array([v]) for v in a], [np.array([v]) for v in b], 0.95, 500,
                              np.random.default_rng(44))
    for effect, cluster in zip(effects, found):
        ordinary = effect.interval("bca_bootstrap")
        assert (ordinary is None) == (cluster.interval is None), effect.name
        if ordinary is not None:
            assert cluster.interval.low == pytest.approx(ordinary.low, abs=1e-9), effect.name
            assert cluster.interval.high == pytest.approx(ordinary.high, abs=1e-9), effect.name


def test_leave_one_cluster_out_drops_whole_clusters():
    parts_a, parts_b = _two_groups(11)
    spec = next(s for s in two_group_effects() if s.name == "mean_difference")
    loo_a, loo_b = leave_one_cluster_out(spec, parts_a, parts_b)
    b = np.concatenate(parts_b)
    for j in range(len(parts_a)):
        rest = np.concatenate([p for i, p in enumerate(parts_a) if i != j])
        assert loo_a[j] == pytest.approx(rest.mean() - b.mean(), abs=1e-12)
    assert loo_b.size == len(parts_b)


def test_a_group_with_one_cluster_has_no_cluster_interval():
    spec = two_group_effects()[0]
    (found,) = cluster_bootstrap([spec], {spec.name: 0.3}, [np.arange(5.0)],
                                 [np.arange(3.0), np.arange(4.0)], 0.95, 200,
                                 np.random.default_rng(1))
    assert found.interval is None and "single cluster" in found.reason


def test_two_clusters_in_a_group_give_no_cluster_interval():
    parts_a, parts_b = _two_groups(13)
    spec = two_group_effects()[0]
    (found,) = cluster_bootstrap([spec], {spec.name: 0.3}, parts_a[:2], parts_b, 0.95, 300,
                                 np.random.default_rng(2))
    assert found.interval is None and "only 2 clusters" in found.reason


def test_resamples_of_the_same_clusters_give_the_same_value():
    """Each resample's clusters are taken in increasing order, so two resamples drawing the
    same clusters in another order give one value, not two that differ by rounding."""
    rng = np.random.default_rng(14)
    parts_a = [rng.normal(0.3, 1, 4) for _ in range(3)]
    parts_b = [rng.normal(0.0, 1, 5) for _ in range(3)]
    spec = two_group_effects()[0]
    values = cluster_replicates([spec], parts_a, parts_b, 2000, np.random.default_rng(3))
    multisets = 10 * 10  # C(3 + 3 - 1, 3) ways to draw three of three clusters, per group
    assert np.unique(values[spec.name]).size <= multisets


def test_cluster_bootstrap_over_several_chunks_is_scipys_too(monkeypatch):
    import auditor.resampling as resampling

    monkeypatch.setattr(resampling, "CHUNK_VALUES", 2_000)
    parts_a, parts_b = _two_groups(15)
    a, b = np.concatenate(parts_a), np.concatenate(parts_b)
    step = chunk_size(a.size, b.size, 700)
    assert step < 700  # several chunks
    spec = next(s for s in two_group_effects() if s.name == "mean_difference")
    (found,) = cluster_bootstrap([spec], {spec.name: spec.estimate(a, b, 0.95).value}, parts_a,
                                 parts_b, 0.95, 700, np.random.default_rng(8))
    ref = st.bootstrap((np.arange(len(parts_a)), np.arange(len(parts_b))),
                       lambda ia, ib: _by_hand("mean_difference",
                                               np.concatenate([parts_a[i] for i in ia]),
                                               np.concatenate([parts_b[i] for i in ib])),
                       vectorized=False, method="BCa", n_resamples=700, batch=step,
                       rng=np.random.default_rng(8))
    assert found.interval.low == pytest.approx(ref.confidence_interval.low, abs=1e-12)
    assert found.interval.high == pytest.approx(ref.confidence_interval.high, abs=1e-12)


def test_by_cluster_keeps_first_appearance_and_file_order():
    names, parts = by_cluster(np.array([1.0, 2.0, 3.0, 4.0]), ["q", "p", "q", "p"])
    assert names == ["q", "p"]
    assert [p.tolist() for p in parts] == [[1.0, 3.0], [2.0, 4.0]]


# ------------------------------------------------------------------ the audit


def _pupils(shared=False, blank_line=None, groups=("tutored", "usual")):
    """Pupils' scores in classes under two (or more) teaching approaches."""
    rng = np.random.default_rng(12)
    rows = []
    for k, approach in enumerate(groups):
        for c in range(6):
            room = f"room {c}" if shared and c < 2 else f"{approach[:3]}-{c}"
            level = rng.normal(0, 4)
            rows += [(approach, room, f"{60 + 5 * (k == 0) + level + rng.normal(0, 8):.1f}")
                     for _ in range(int(rng.integers(3, 7)))]
    if blank_line is not None:
        rows[blank_line - 2] = (rows[blank_line - 2][0], "", rows[blank_line - 2][2])
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(("approach", "class", "score"))
    writer.writerows(rows)
    return buffer.getvalue()


@pytest.fixture
def pupils(write_file):
    return write_file("pupils.csv", _pupils())


def _quiet_audit(path, **options):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return audit(path, outcome="score", group="approach", resamples=400, **options)


def test_audit_with_a_cluster_column_reports_icc_design_effect_and_cluster_intervals(pupils):
    result = _quiet_audit(pupils, cluster="class")
    block = result.clusters
    frame = pd.read_csv(pupils)
    assert [g.clusters for g in block.groups] == [6, 6]
    assert [g.cases for g in block.groups] == [g.n for g in result.groups]
    assert block.icc.icc == pytest.approx(
        intraclass_correlation(frame.score, frame["class"], frame.approach).icc, abs=1e-12)
    sizes = {g: frame[frame.approach == g].groupby("class").size().tolist()
             for g in ("tutored", "usual")}
    for g in block.groups:
        assert g.design_effect == pytest.approx(_variance_ratio(block.icc.icc, sizes[g.label]),
                                                rel=1e-12)
        assert g.effective_n == pytest.approx(g.cases / g.design_effect, rel=1e-12)
    assert block.design_effect == pytest.approx(
        _variance_ratio(block.icc.icc, sizes["tutored"], sizes["usual"]), rel=1e-12)
    assert [c.index for c in block.intervals] == [e.name for e in result.effects]
    for e in result.effects:
        assert block.interval(e.name).estimate == e.estimate
    assert any("clustered in 'class'" in w for w in result.warnings)
    assert "clustered in 'class'" in result.decision.reviewer_note
    assert "whole clusters of 'class'" in result.decision.methods_sentence
    document = result.to_dict()
    assert set(document["clusters"]["intervals"]) == {e.name for e in result.effects}


def test_the_cluster_bootstrap_draws_its_own_stream_of_the_seed(pupils):
    """Reproducible from the seed, and the case-level results are those of an audit without
    clusters: naming the clusters adds, and changes nothing else that was computed."""
    first, again = _quiet_audit(pupils, cluster="class"), _quiet_audit(pupils, cluster="class")
    plain = _quiet_audit(pupils)
    assert first.clusters == again.clusters
    assert [e.to_dict() for e in first.effects] == [e.to_dict() for e in plain.effects]
    assert first.influence.to_dict() == plain.influence.to_dict()
    parts = [by_cluster(v, labs)[1] for v, labs in zip(
        [np.array(pd.read_csv(pupils).query("approach == @g").score) for g in ("tutored", "usual")],
        [list(pd.read_csv(pupils).query("approach == @g")["class"]) for g in ("tutored", "usual")])]
    specs = two_group_effects()
    rng = np.random.default_rng(np.random.SeedSequence(first.settings.seed,
                                                       spawn_key=(CLUSTER_STREAM,)))
    direct = cluster_bootstrap(specs, {e.name: e.estimate for e in first.effects}, parts[0],
                               parts[1], first.settings.level, 400, rng)
    assert direct == first.clusters.intervals


def test_huge_values_with_clusters_give_a_document_not_a_crash(write_file, tmp_path, run_cli):
    text = _pupils()
    lines = text.splitlines()
    scaled = [lines[0]] + [",".join(r.split(",")[:2] + [f"{float(r.split(',')[2]) * 1e200:.6g}"])
                           for r in lines[1:]]
    path = write_file("huge.csv", "\n".join(scaled) + "\n")
    res = run_cli("check", path, "--outcome", "score", "--group", "approach", "--cluster",
                  "class", "--boot", "200", "--json", tmp_path / "huge.json", "--quiet")
    assert res.code == 0, res.err
    document = json.loads((tmp_path / "huge.json").read_text())
    assert document["clusters"]["icc"]["icc"] is not None


def test_a_missing_value_marker_in_the_cluster_column_is_named(run_cli, write_file, tmp_path):
    text = _pupils().splitlines()
    first = text[5].split(",")
    text[5] = ",".join([first[0], "NA", first[2]])
    path = write_file("marker.csv", "\n".join(text) + "\n")
    res = run_cli("check", path, "--outcome", "score", "--group", "approach", "--cluster",
                  "class", "--boot", "200")
    one_line_error(res, "line 6", "missing-value marker 'NA'")


def test_a_cluster_holding_both_groups_is_noted(write_file):
    result = _quiet_audit(write_file("shared.csv", _pupils(shared=True)), cluster="class")
    assert result.clusters.shared == ("room 0", "room 1")
    assert any("hold cases of both groups" in w for w in result.warnings)


def test_few_clusters_are_noted(pupils):
    result = _quiet_audit(pupils, cluster="class")
    assert any("few clusters" in n for n in result.clusters.notes)


@pytest.mark.parametrize("options, needle", [
    (dict(cluster="score"), "also named as the outcome or the group"),
    (dict(cluster="class", subject="class"), "participant is already the unit"),
])
def test_cluster_options_that_cannot_name_clusters_are_refused(pupils, options, needle):
    with pytest.raises(DesignError, match=needle):
        _quiet_audit(pupils, **options)


def test_k_groups_with_a_cluster_column_are_refused(write_file):
    path = write_file("three.csv", _pupils(groups=("tutored", "usual", "peer")))
    with pytest.raises(DesignError, match="two independent groups; 'approach' has 3"):
        _quiet_audit(path, cluster="class")


# ------------------------------------------------------------------ command line and reports


@pytest.mark.slow
def test_check_with_cluster_writes_the_block_and_the_reports(run_cli, pupils, tmp_path):
    out, doc = tmp_path / "report", tmp_path / "audit.json"
    res = run_cli("check", pupils, "--outcome", "score", "--group", "approach", "--cluster",
                  "class", "--boot", "300", "--out", out, "--json", doc, "--quiet")
    assert res.code == 0, res.err
    document = json.loads(doc.read_text())
    assert document["clusters"]["column"] == "class"
    markdown = (out / "report.md").read_text()
    assert "Cases are clustered in class" in markdown and "cluster bootstrap \\[" in markdown
    assert "cluster bootstrap [" in (out / "report.html").read_text()


def test_an_empty_cluster_cell_stops_in_one_line_naming_the_line(run_cli, write_file, tmp_path):
    path = write_file("gap.csv", _pupils(blank_line=7))
    res = run_cli("check", path, "--outcome", "score", "--group", "approach", "--cluster",
                  "class", "--boot", "200", "--json", tmp_path / "a.json")
    one_line_error(res, "gap.csv", "line 7", "'class' is empty")
    assert not (tmp_path / "a.json").exists()


def test_an_unknown_cluster_column_stops_in_one_line(run_cli, pupils):
    res = run_cli("check", pupils, "--outcome", "score", "--group", "approach", "--cluster",
                  "classroom", "--boot", "200")
    one_line_error(res, "classroom")


@pytest.mark.slow
def test_cluster_column_names_are_escaped_in_html(write_file, tmp_path, run_cli):
    text = _pupils().replace("approach,class,score", "approach,<b>room</b>,score", 1)
    path = write_file("escape.csv", text)
    out = tmp_path / "report"
    res = run_cli("check", path, "--outcome", "score", "--group", "approach", "--cluster",
                  "<b>room</b>", "--boot", "200", "--out", out, "--quiet")
    assert res.code == 0, res.err
    page = (out / "report.html").read_text()
    assert "<b>room</b>" not in page and "&lt;b&gt;room&lt;/b&gt;" in page


def test_k_groups_are_refused_before_the_cluster_cells_are_read(write_file):
    text = _pupils(groups=("tutored", "usual", "peer")).splitlines()
    first = text[3].split(",")
    text[3] = ",".join([first[0], "", first[2]])
    path = write_file("three_gap.csv", "\n".join(text) + "\n")
    with pytest.raises(DesignError, match="two independent groups; 'approach' has 3"):
        _quiet_audit(path, cluster="class")
