"""Reference checks: the k-independent-groups and k-repeated-conditions statistics of `auditor`
against computations outside the project (scipy, pingouin, statsmodels, pandas, or a closed-form
derivation done here).

Data are open datasets shipped inside installed packages (no network).

k independent groups:
  * pingouin `anova` (pain threshold by hair colour, 4 groups, n = 19), `penguins` (flipper
    length by species, 3 groups, many ties, 2 missing values), `anova3_unbalanced`
    (cholesterol by drug, 3 groups, continuous) and `tips` (total bill by day, 4 groups);
  * statsmodels `grunfeld` (investment by firm, 11 groups of 20, very unequal variances) and
    `anes96` (days watching TV news by education, 7 groups, at most 8 distinct values).

k repeated conditions (one row per participant):
  * pingouin `rm_anova_wide` (4 time points; complete for 9 of 12 participants),
    `mixed_anova` (3 time points, 60 participants), `pairwise_tests` (3 drugs, 11 participants,
    whole numbers), `icc` (4 judges rating 8 wines) and `rm_anova` (the 2 x 2 within cells
    taken as 4 conditions, half-point ratings, 88 complete participants);
  * statsmodels `elnino` (sea-surface temperature in January, April, July, October; 61 years).

The source of each reference value is named in a comment beside the assertion; docs/references.md
lists the same checks with their tolerances and the reason for each tolerance.
"""

from __future__ import annotations

import functools
import itertools
import math

import numpy as np
import pandas as pd
import pingouin as pg
import pytest
import statsmodels.datasets as sm_datasets
from scipy import stats
from statsmodels.stats.anova import AnovaRM
from statsmodels.stats.multitest import multipletests
from statsmodels.stats.oneway import anova_oneway

from auditor import adjust, diagnostics, kgroups
from auditor.pipeline import audit
from tests.references.common import quiet_pingouin as _quiet_pingouin

LEVEL = 0.95


# ================================================================ k independent groups: data


def _split_k(frame, outcome, group):
    """(labels, groups) in order of first appearance, missing values dropped (pandas)."""
    rows = frame.dropna(subset=[outcome, group])
    labels = list(pd.unique(rows[group]))
    return tuple(labels), tuple(rows.loc[rows[group] == lab, outcome].to_numpy(dtype=float)
                                for lab in labels)


INDEPENDENT = {
    # name: (frame loader, outcome, group)
    "anova_pain_by_hair": (lambda: pg.read_dataset("anova"), "Pain threshold", "Hair color"),
    "penguins_flipper_by_species": (lambda: pg.read_dataset("penguins"), "flipper_length_mm",
                                    "species"),
    "cholesterol_by_drug": (lambda: pg.read_dataset("anova3_unbalanced"), "Cholesterol", "Drug"),
    "tips_bill_by_day": (lambda: pg.read_dataset("tips"), "total_bill", "day"),
    "grunfeld_invest_by_firm": (lambda: sm_datasets.grunfeld.load_pandas().data, "invest", "firm"),
    "anes96_tvnews_by_educ": (lambda: sm_datasets.anes96.load_pandas().data, "TVnews", "educ"),
}
IND_NAMES = list(INDEPENDENT)


@functools.lru_cache(maxsize=None)
def frame_of(name):
    loader, outcome, group = INDEPENDENT[name]
    return loader().dropna(subset=[outcome, group]).reset_index(drop=True)


@functools.lru_cache(maxsize=None)
def groups_of(name):
    _, outcome, group = INDEPENDENT[name]
    labels, groups = _split_k(frame_of(name), outcome, group)
    for g in groups:
        g.setflags(write=False)
    return labels, groups


def test_independent_datasets_are_the_intended_splits():
    # Group sizes counted with pandas on the shipped files.
    sizes = {name: [g.size for g in groups_of(name)[1]] for name in IND_NAMES}
    assert sizes["anova_pain_by_hair"] == [5, 5, 4, 5]
    assert sizes["penguins_flipper_by_species"] == [151, 68, 123]
    assert sizes["grunfeld_invest_by_firm"] == [20] * 11
    assert len(sizes["anes96_tvnews_by_educ"]) == 7
    assert np.unique(np.concatenate(groups_of("anes96_tvnews_by_educ")[1])).size == 8


# ------------------------------------------------------------------------ Kruskal-Wallis H


@pytest.mark.parametrize("name", IND_NAMES)
def test_kruskal_h_and_rank_effects(name):
    _, groups = groups_of(name)
    n, k = sum(g.size for g in groups), len(groups)
    ref = stats.kruskal(*groups)  # scipy, tie-corrected H
    assert float(kgroups.kruskal_h_values(*groups)) == pytest.approx(ref.statistic, rel=1e-10)
    tests = kgroups.independent_tests(groups)
    assert tests["kruskal_wallis"]["statistic"] == pytest.approx(ref.statistic, rel=1e-12)
    assert tests["kruskal_wallis"]["p"] == pytest.approx(ref.pvalue, rel=1e-9)
    assert tests["kruskal_wallis"]["df"] == k - 1
    # epsilon^2_H = H / (N - 1) and eta^2_H = (H - k + 1) / (N - k) (Tomczak & Tomczak 2014),
    # evaluated with scipy's H
    assert kgroups.epsilon_squared_h(*groups).value == pytest.approx(ref.statistic / (n - 1),
                                                                     rel=1e-10)
    assert kgroups.eta_squared_h(*groups).value == pytest.approx(
        (ref.statistic - k + 1) / (n - k), rel=1e-10, abs=1e-14)
    # pingouin.kruskal reports the same H
    _, outcome, group = INDEPENDENT[name]
    kw = _quiet_pingouin(pg.kruskal, data=frame_of(name), dv=outcome, between=group)
    pg_h = float(kw["H"].iloc[0])
    assert ref.statistic == pytest.approx(pg_h, rel=1e-10)


def test_kruskal_h_on_stacked_resamples():
    # The bootstrap path (resamples stacked along the first axis): scipy.stats.kruskal with axis=-1
    _, groups = groups_of("penguins_flipper_by_species")
    rng = np.random.default_rng(17)
    stacked = [g[rng.integers(0, g.size, (30, g.size))] for g in groups]
    ref = stats.kruskal(*stacked, axis=-1).statistic
    np.testing.assert_allclose(kgroups.kruskal_h_values(*stacked), ref, rtol=1e-10)
    np.testing.assert_allclose(kgroups.epsilon_squared_h_values(*stacked),
                               ref / (sum(g.size for g in groups) - 1), rtol=1e-10)


# ----------------------------------------------------------------- one-way ANOVA effects, F


def _pingouin_anova(name):
    _, outcome, group = INDEPENDENT[name]
    return _quiet_pingouin(pg.anova, data=frame_of(name), dv=outcome, between=group, detailed=True)


@pytest.mark.parametrize("name", IND_NAMES)
def test_eta_and_omega_squared_against_pingouin_anova(name):
    _, groups = groups_of(name)
    n, k = sum(g.size for g in groups), len(groups)
    aov = _pingouin_anova(name)
    # pingouin one-way: np2 = SS_between / (SS_between + SS_within) = eta^2
    assert kgroups.eta_squared(*groups).value == pytest.approx(float(aov["np2"].iloc[0]), rel=1e-10)
    ss_b, ss_w = float(aov["SS"].iloc[0]), float(aov["SS"].iloc[1])
    ms_w = ss_w / (n - k)
    # omega^2 = (SS_b - (k - 1) MS_w) / (SS_t + MS_w) (Hays), with pingouin's sums of squares
    omega = (ss_b - (k - 1) * ms_w) / (ss_b + ss_w + ms_w)
    assert kgroups.omega_squared(*groups).value == pytest.approx(omega, rel=1e-9, abs=1e-12)


@pytest.mark.parametrize("name", IND_NAMES)
def test_one_way_and_welch_anova(name):
    _, groups = groups_of(name)
    _, outcome, group = INDEPENDENT[name]
    n, k = sum(g.size for g in groups), len(groups)
    tests = kgroups.independent_tests(groups)
    f = stats.f_oneway(*groups)  # scipy
    assert tests["anova"]["statistic"] == pytest.approx(f.statistic, rel=1e-10)
    assert tests["anova"]["p"] == pytest.approx(f.pvalue, rel=1e-9)
    assert tests["anova"]["df"] == [k - 1, n - k]
    aov = _pingouin_anova(name)  # pingouin, same F
    assert tests["anova"]["statistic"] == pytest.approx(float(aov["F"].iloc[0]), rel=1e-9)
    welch = tests["welch_anova"]
    ref = _quiet_pingouin(pg.welch_anova, data=frame_of(name), dv=outcome, between=group)
    assert welch["statistic"] == pytest.approx(float(ref["F"].iloc[0]), rel=1e-10)
    assert welch["df"][1] == pytest.approx(float(ref["ddof2"].iloc[0]), rel=1e-10)
    assert welch["p"] == pytest.approx(float(ref["p_unc"].iloc[0]), rel=1e-9)
    # statsmodels anova_oneway(use_var='unequal') is Welch's test too
    sm = anova_oneway(frame_of(name)[outcome], frame_of(name)[group], use_var="unequal")
    assert welch["statistic"] == pytest.approx(sm.statistic, rel=1e-9)
    assert welch["p"] == pytest.approx(sm.pvalue, rel=1e-8)


def test_anova_published_example():
    # pingouin's documentation of `anova` on the hair colour data (McClave & Dietrich 1991) prints
    # F = 6.791407, p = 0.004114, n2 = 0.575962 (six decimals), and the detailed table
    # SS_between = 1360.726, SS_within = 1001.800 on 3 and 15 df (three decimals).
    _, groups = groups_of("anova_pain_by_hair")
    tests = kgroups.independent_tests(groups)
    assert tests["anova"]["statistic"] == pytest.approx(6.791407, abs=5e-7)
    assert tests["anova"]["p"] == pytest.approx(0.004114, abs=5e-7)
    assert kgroups.eta_squared(*groups).value == pytest.approx(0.575962, abs=5e-7)
    # omega^2 from the printed sums of squares: (1360.726 - 3 * 1001.8/15) / (2362.526 + 1001.8/15)
    omega = (1360.726 - 3 * 1001.8 / 15) / (1360.726 + 1001.8 + 1001.8 / 15)
    assert kgroups.omega_squared(*groups).value == pytest.approx(omega, abs=1e-6)


def test_omega_squared_can_fall_below_zero():
    # Groups differing less than chance alone: the raw value is kept. Reference: the textbook
    # formula with sums of squares from pandas.
    groups = (np.array([1.0, 2.0, 3.0, 4.0]), np.array([1.5, 2.5, 3.5, 2.5]),
              np.array([2.0, 3.0, 2.0, 3.0]))
    s = pd.Series(np.concatenate(groups))
    ss_t = ((s - s.mean()) ** 2).sum()
    ss_w = sum(((pd.Series(g) - g.mean()) ** 2).sum() for g in groups)
    ss_b, ms_w = ss_t - ss_w, ss_w / (12 - 3)
    ref = (ss_b - 2 * ms_w) / (ss_t + ms_w)
    est = kgroups.omega_squared(*groups)
    assert ref < 0
    assert est.value == pytest.approx(ref, rel=1e-12)
    assert est.notes and est.notes[0].startswith("below zero")


# ------------------------------------------------------------------------------ Dunn's test


def _dunn_reference(groups, i, j):
    """Dunn's (1964) z from pooled mid-ranks (scipy.stats.rankdata) with the tie factor from
    scipy.stats.tiecorrect: var = N(N+1)/12 * C * (1/n_i + 1/n_j); this equals
    N(N+1)/12 - sum(t^3 - t)/(12(N - 1)) times (1/n_i + 1/n_j)."""
    pooled = np.concatenate(groups)
    ranks = stats.rankdata(pooled)
    n = pooled.size
    labels = np.repeat(np.arange(len(groups)), [g.size for g in groups])
    mean_rank = pd.Series(ranks).groupby(labels).mean()
    var = n * (n + 1) / 12 * stats.tiecorrect(ranks) * (1 / groups[i].size + 1 / groups[j].size)
    z = (mean_rank[i] - mean_rank[j]) / math.sqrt(var)
    return z, 2 * stats.norm.sf(abs(z))


@pytest.mark.parametrize("name", IND_NAMES)
def test_dunn_z_against_pooled_rank_computation(name):
    _, groups = groups_of(name)
    for i, j in itertools.combinations(range(len(groups)), 2):
        z, p = kgroups.dunn_z(groups, i, j)
        z_ref, p_ref = _dunn_reference(groups, i, j)
        assert z == pytest.approx(z_ref, rel=1e-10, abs=1e-12)
        assert p == pytest.approx(p_ref, rel=1e-9)


@pytest.mark.parametrize("name", IND_NAMES)
def test_dunn_z_with_two_groups_is_the_kruskal_and_mann_whitney_z(name):
    # With only the two groups pooled, Dunn's z^2 is the Kruskal-Wallis H (scipy) and |z| is the
    # tie-corrected Mann-Whitney z without continuity correction (scipy, asymptotic).
    _, groups = groups_of(name)
    pair = (groups[0], groups[1])
    z, p = kgroups.dunn_z(pair, 0, 1)
    assert z * z == pytest.approx(stats.kruskal(*pair).statistic, rel=1e-10)
    mw = stats.mannwhitneyu(*pair, method="asymptotic", use_continuity=False)
    assert p == pytest.approx(mw.pvalue, rel=1e-9)
    # sign: positive when the first group ranks higher (U_1 above n1 n2 / 2)
    assert np.sign(z) == np.sign(mw.statistic - pair[0].size * pair[1].size / 2)


# ------------------------------------------------------------------------------------ Holm


@pytest.mark.parametrize("name", IND_NAMES)
def test_holm_on_dunn_p_values_against_statsmodels(name):
    _, groups = groups_of(name)
    ps = [kgroups.dunn_z(groups, i, j)[1] for i, j in itertools.combinations(range(len(groups)), 2)]
    ref = multipletests(ps, method="holm")[1]  # statsmodels
    np.testing.assert_allclose(adjust.holm(ps), ref, rtol=1e-12)


@pytest.mark.slow
def test_holm_with_missing_and_tied_p_values():
    # None entries are skipped (m counts only the present p-values); ties keep their order.
    rng = np.random.default_rng(8)
    for _ in range(20):
        ps = list(rng.uniform(0, 0.2, 7)) + [0.03, 0.03, 1.0]
        with_none = ps[:3] + [None] + ps[3:] + [None]
        got = adjust.holm(with_none)
        ref = multipletests(ps, method="holm")[1]  # statsmodels
        assert got[3] is None and got[-1] is None
        np.testing.assert_allclose([g for g in got if g is not None], ref, rtol=1e-12)


# ------------------------------------------------------------------------- spread, screening


@pytest.mark.parametrize("name", IND_NAMES)
def test_k_spread_against_scipy_and_pandas(name):
    labels, groups = groups_of(name)
    res = diagnostics.k_spread(labels, groups)
    lev = stats.levene(*groups, center="mean")  # scipy
    bf = stats.levene(*groups, center="median")
    fl = stats.fligner(*groups)
    assert res.levene_w == pytest.approx(lev.statistic, rel=1e-10)
    assert res.levene_p == pytest.approx(lev.pvalue, rel=1e-9)
    assert res.brown_forsythe_w == pytest.approx(bf.statistic, rel=1e-10)
    assert res.brown_forsythe_p == pytest.approx(bf.pvalue, rel=1e-9)
    assert res.fligner_x2 == pytest.approx(fl.statistic, rel=1e-10)
    assert res.fligner_p == pytest.approx(fl.pvalue, rel=1e-9)
    _, outcome, group = INDEPENDENT[name]
    sds = frame_of(name).groupby(group, sort=False)[outcome].std()  # pandas, ddof = 1
    assert res.sd_ratio == pytest.approx(sds.max() / sds.min(), rel=1e-12)
    assert res.largest_sd_group == sds.idxmax() and res.smallest_sd_group == sds.idxmin()
    counts = frame_of(name)[group].value_counts()
    assert res.n_ratio == pytest.approx(counts.max() / counts.min(), rel=1e-12)


# ======================================================================= k repeated: data


def _wide(frame, columns):
    return frame[columns].dropna()


def _long(frame, outcome, within, subject, levels=None):
    piv = frame.pivot(index=subject, columns=within, values=outcome)
    return piv[levels if levels else list(pd.unique(frame[within]))].dropna()


def _rm_anova_cells():
    frame = pg.read_dataset("rm_anova")
    frame["cell"] = frame["Disgustingness"] + "/" + frame["Frighteningness"]
    return frame


REPEATED = {
    # name: loader returning a wide DataFrame (participants x conditions), complete rows only
    "rm_anova_wide_time": lambda: _wide(pg.read_dataset("rm_anova_wide"),
                                        ["Before", "1 week", "2 week", "3 week"]),
    "mixed_anova_time": lambda: _long(pg.read_dataset("mixed_anova"), "Scores", "Time", "Subject"),
    "pairwise_tests_drug": lambda: _long(pg.read_dataset("pairwise_tests"), "Scores", "Drug",
                                         "Subject"),
    "icc_judges": lambda: _long(pg.read_dataset("icc"), "Scores", "Judge", "Wine"),
    "rm_anova_cells": lambda: _long(_rm_anova_cells(), "DesireToKill", "cell", "Subject"),
    "elnino_seasons": lambda: _wide(sm_datasets.elnino.load_pandas().data,
                                    ["JAN", "APR", "JUL", "OCT"]),
}
REP_NAMES = list(REPEATED)


@functools.lru_cache(maxsize=None)
def wide_of(name):
    wide = REPEATED[name]().astype(float)
    wide.columns = [str(c) for c in wide.columns]
    return wide


def matrix_of(name):
    x = wide_of(name).to_numpy()
    x.setflags(write=False)
    return x


def test_repeated_datasets_are_the_intended_designs():
    shapes = {name: wide_of(name).shape for name in REP_NAMES}
    assert shapes == {"rm_anova_wide_time": (9, 4), "mixed_anova_time": (60, 3),
                      "pairwise_tests_drug": (11, 3), "icc_judges": (8, 4),
                      "rm_anova_cells": (88, 4), "elnino_seasons": (61, 4)}


# --------------------------------------------------------------------- Friedman, Kendall's W


@pytest.mark.parametrize("name", REP_NAMES)
def test_friedman_and_kendall_w(name):
    x = matrix_of(name)
    n, k = x.shape
    ref = stats.friedmanchisquare(*x.T)  # scipy, tie-corrected
    tests = kgroups.repeated_tests(x, list(wide_of(name).columns))
    assert float(kgroups.friedman_values(x)) == pytest.approx(ref.statistic, rel=1e-10)
    assert tests["friedman"]["statistic"] == pytest.approx(ref.statistic, rel=1e-10)
    assert tests["friedman"]["p"] == pytest.approx(ref.pvalue, rel=1e-8)
    assert tests["friedman"]["df"] == k - 1
    fr = _quiet_pingouin(pg.friedman, wide_of(name).copy(), method="chisq")  # pingouin: W and Q
    assert kgroups.kendall_w(x).value == pytest.approx(float(fr["W"].iloc[0]), rel=1e-10)
    assert float(fr["Q"].iloc[0]) == pytest.approx(ref.statistic, rel=1e-10)


def test_friedman_on_stacked_resamples():
    # Bootstrap path: participants' rows resampled, stacked (m, n, k). Reference: scipy per row.
    x = matrix_of("rm_anova_cells")
    rng = np.random.default_rng(23)
    stacked = x[rng.integers(0, x.shape[0], (20, x.shape[0]))]
    ref = stats.friedmanchisquare(*[stacked[..., j] for j in range(x.shape[1])], axis=-1).statistic
    np.testing.assert_allclose(kgroups.friedman_values(stacked), ref, rtol=1e-10)
    np.testing.assert_allclose(kgroups.kendall_w_values(stacked),
                               ref / (x.shape[0] * (x.shape[1] - 1)), rtol=1e-10)


# ------------------------------------------------------------ repeated-measures ANOVA, sphericity


@pytest.mark.parametrize("name", REP_NAMES)
def test_rm_anova_against_pingouin_and_statsmodels(name):
    x = matrix_of(name)
    n, k = x.shape
    tests = kgroups.repeated_tests(x, list(wide_of(name).columns))["rm_anova"]
    ref = _quiet_pingouin(pg.rm_anova, wide_of(name).copy(), correction=True)  # pingouin
    assert tests["statistic"] == pytest.approx(float(ref["F"].iloc[0]), rel=1e-9)
    assert tests["p"] == pytest.approx(float(ref["p_unc"].iloc[0]), rel=1e-8)
    assert tests["df"] == [k - 1, (n - 1) * (k - 1)]
    assert tests["p_greenhouse_geisser"] == pytest.approx(float(ref["p_GG_corr"].iloc[0]), rel=1e-8)
    assert tests["epsilon_gg"] == pytest.approx(float(ref["eps"].iloc[0]), rel=1e-10)
    # generalized eta^2 (one within factor): pingouin's ng2
    assert kgroups.generalized_eta_squared(x).value == pytest.approx(float(ref["ng2"].iloc[0]),
                                                                     rel=1e-9)
    # statsmodels AnovaRM: the same F and p
    long = wide_of(name).reset_index(drop=True).reset_index().melt(
        id_vars="index", var_name="condition", value_name="y")
    table = AnovaRM(long, "y", "index", within=["condition"]).fit().anova_table
    assert tests["statistic"] == pytest.approx(float(table["F Value"].iloc[0]), rel=1e-9)
    assert tests["p"] == pytest.approx(float(table["Pr > F"].iloc[0]), rel=1e-8)


@pytest.mark.parametrize("name", REP_NAMES)
def test_mauchly_and_greenhouse_geisser_against_pingouin(name):
    x = matrix_of(name)
    res = kgroups.mauchly(x)
    spher = _quiet_pingouin(pg.sphericity, wide_of(name).copy())  # pingouin (as R mauchly.test)
    assert res["w"] == pytest.approx(float(spher.W), rel=1e-9)
    assert res["chi2"] == pytest.approx(float(spher.chi2), rel=1e-9)
    assert res["df"] == spher.dof
    assert res["p"] == pytest.approx(float(spher.pval), rel=1e-8)
    eps = _quiet_pingouin(pg.epsilon, wide_of(name).copy(), correction="gg")  # pingouin
    assert kgroups.greenhouse_geisser(x) == pytest.approx(eps, rel=1e-10)
    assert res["epsilon_gg"] == pytest.approx(eps, rel=1e-10)


def test_rm_anova_published_example():
    # pingouin's documentation of `rm_anova` on its rm_anova_wide data (complete rows) prints
    # F = 5.200652, p = 0.006557, ng2 = 0.346392, eps = 0.694329 (six decimals as printed).
    x = matrix_of("rm_anova_wide_time")
    tests = kgroups.repeated_tests(x, ["Before", "1 week", "2 week", "3 week"])["rm_anova"]
    assert tests["statistic"] == pytest.approx(5.200652, abs=5e-7)
    assert tests["p"] == pytest.approx(0.006557, abs=5e-7)
    assert tests["epsilon_gg"] == pytest.approx(0.694329, abs=5e-7)
    assert kgroups.generalized_eta_squared(x).value == pytest.approx(0.346392, abs=5e-7)


# ================================================================================ end to end


def _signed_rank_p(d):
    """Two-sided signed-rank p on rounded differences, zeros dropped: for N <= 13 by enumerating
    all 2^N sign patterns of the mid-ranks (what scipy's default does then), otherwise the
    tie-corrected normal approximation without continuity correction written out here."""
    d = d[d != 0]
    ranks = stats.rankdata(np.abs(d))
    obs = float(np.sum(ranks[d > 0]))
    n = d.size
    if n <= 13:
        sums = np.array([np.dot(ranks, signs) for signs in itertools.product((0, 1), repeat=n)])
        return min(1.0, 2 * min(np.mean(sums <= obs + 1e-9), np.mean(sums >= obs - 1e-9)))
    _, t = np.unique(np.abs(d), return_counts=True)
    var = n * (n + 1) * (2 * n + 1) / 24 - np.sum(t**3 - t) / 48
    return 2 * stats.norm.sf(abs(obs - n * (n + 1) / 4) / math.sqrt(var))


def test_audit_end_to_end_k_repeated_long_with_exclusions():
    # pingouin rm_anova: the four within cells as conditions, three of them chosen (the fourth is
    # "not selected"). Five participants have a missing rating; participant 1 also loses a row
    # here, so six participants are left out whole.
    frame = _rm_anova_cells()
    frame = frame.drop(index=frame.index[(frame["Subject"] == 1) & (frame["cell"] == "High/Low")])
    frame = frame.reset_index(drop=True)
    chosen = ["High/High", "High/Low", "Low/High"]
    result = audit(frame, outcome="DesireToKill", group="cell", subject="Subject", groups=chosen,
                   resamples=200, seed=11)
    assert result.design == "k_repeated"
    acc = result.data

    # Accounting against pandas
    in_chosen = frame[frame["cell"].isin(chosen)]
    piv = in_chosen.pivot(index="Subject", columns="cell", values="DesireToKill")[chosen]
    complete = piv.dropna()
    assert acc.rows_read == len(frame) == 371
    assert acc.not_selected == {"Low/Low": int((frame["cell"] == "Low/Low").sum())}
    assert acc.rows_used == complete.size == 87 * 3
    assert len(acc.excluded) == len(in_chosen) - complete.size == 17
    assert acc.rows_read == acc.rows_used + len(acc.excluded) + sum(acc.not_selected.values())
    lines_of_1 = [int(i) + 2 for i in in_chosen.index[in_chosen["Subject"] == 1]]
    reasons = {e.row: e.reason for e in acc.excluded}
    for line in lines_of_1:
        assert "participant '1' left out" in reasons[line]
        assert "no row for 'High/Low'" in reasons[line]

    x = complete.to_numpy(dtype=float)
    wide = complete.copy()
    # Omnibus effects and tests: scipy Friedman, pingouin friedman W, rm_anova, sphericity
    eff = {e.name: e for e in result.effects}
    fr = _quiet_pingouin(pg.friedman, wide.copy())
    assert eff["kendall_w"].estimate == pytest.approx(float(fr["W"].iloc[0]), rel=1e-10)
    aov = _quiet_pingouin(pg.rm_anova, data=in_chosen, dv="DesireToKill", within="cell",
                          subject="Subject", correction=True)
    assert eff["generalized_eta_squared"].estimate == pytest.approx(float(aov["ng2"].iloc[0]),
                                                                    rel=1e-9)
    assert result.tests["rm_anova"]["statistic"] == pytest.approx(float(aov["F"].iloc[0]), rel=1e-9)
    assert result.tests["rm_anova"]["p_greenhouse_geisser"] == pytest.approx(
        float(aov["p_GG_corr"].iloc[0]), rel=1e-8)
    f = stats.friedmanchisquare(*x.T)
    assert result.tests["friedman"]["statistic"] == pytest.approx(f.statistic, rel=1e-10)
    spher = _quiet_pingouin(pg.sphericity, wide.copy())
    assert result.diagnostics.sphericity["w"] == pytest.approx(float(spher.W), rel=1e-9)
    assert result.diagnostics.sphericity["p"] == pytest.approx(float(spher.pval), rel=1e-8)

    # Pairwise follow-ups: order and direction (first minus second), Wilcoxon p on differences
    # rounded to the data's one decimal, Holm across the three pairs (statsmodels).
    pairs = list(itertools.combinations(range(3), 2))
    assert [(p.first, p.second) for p in result.pairwise] == [(chosen[i], chosen[j])
                                                              for i, j in pairs]
    ps = []
    for comp, (i, j) in zip(result.pairwise, pairs):
        d = np.round(x[:, i] - x[:, j], 1)
        ref = stats.wilcoxon(d, zero_method="wilcox", method="asymptotic")  # scipy
        assert comp.test == "wilcoxon_signed_rank"
        assert comp.p == pytest.approx(ref.pvalue, rel=1e-9)
        assert comp.p == pytest.approx(_signed_rank_p(d), rel=1e-9)
        ps.append(ref.pvalue)
        peff = {e.name: e.estimate for e in comp.effects}
        assert peff["d_z"] == pytest.approx(_quiet_pingouin(
            pg.compute_effsize, x[:, i], x[:, j], paired=True, eftype="cohen_dz"), rel=1e-10)
        assert peff["matched_rank_biserial"] == pytest.approx(
            float(_quiet_pingouin(pg.wilcoxon, d)["RBC"].iloc[0]), rel=1e-12, abs=1e-15)
    np.testing.assert_allclose([p.p_holm for p in result.pairwise],
                               multipletests(ps, method="holm")[1], rtol=1e-12)


def test_audit_end_to_end_k_repeated_wide():
    # pingouin rm_anova_wide through paired_columns: lines 4, 8 and 12 each lack a value and are
    # left out; the rest must reproduce pingouin's rm_anova and sphericity on the complete rows.
    frame = pg.read_dataset("rm_anova_wide")
    columns = ["Before", "1 week", "2 week", "3 week"]
    result = audit(frame, paired_columns=columns, resamples=200, seed=2)
    acc = result.data
    incomplete = frame.index[frame[columns].isna().any(axis=1)]  # pandas
    assert [e.row for e in acc.excluded] == [int(i) + 2 for i in incomplete] == [4, 8, 12]
    assert acc.rows_read == acc.rows_used + len(acc.excluded) + sum(acc.not_selected.values())
    wide = frame[columns].dropna()
    x = wide.to_numpy()
    aov = _quiet_pingouin(pg.rm_anova, wide.copy(), correction=True)
    assert result.tests["rm_anova"]["statistic"] == pytest.approx(float(aov["F"].iloc[0]), rel=1e-9)
    assert result.tests["rm_anova"]["p_greenhouse_geisser"] == pytest.approx(
        float(aov["p_GG_corr"].iloc[0]), rel=1e-8)
    assert result.effect("generalized_eta_squared").estimate == pytest.approx(
        float(aov["ng2"].iloc[0]), rel=1e-9)
    assert result.diagnostics.sphericity["chi2"] == pytest.approx(
        float(_quiet_pingouin(pg.sphericity, wide.copy()).chi2), rel=1e-9)
    ps = []
    for comp, (i, j) in zip(result.pairwise, itertools.combinations(range(4), 2)):
        d = np.round(x[:, i] - x[:, j], 1)
        # n = 9 <= 13: exact distribution (no ties) or exact permutation (ties), by enumeration
        assert comp.p == pytest.approx(_signed_rank_p(d), rel=1e-9)
        assert comp.p == pytest.approx(stats.wilcoxon(d, zero_method="wilcox").pvalue, rel=1e-12)
        ps.append(comp.p)
    np.testing.assert_allclose([p.p_holm for p in result.pairwise],
                               multipletests(ps, method="holm")[1], rtol=1e-12)


def test_audit_end_to_end_k_independent_with_missing_values():
    # pingouin penguins: flipper length by species; two rows lack the flipper length.
    frame = pg.read_dataset("penguins")
    result = audit(frame, outcome="flipper_length_mm", group="species", resamples=200, seed=4)
    assert result.design == "k_independent"
    acc = result.data
    assert acc.rows_read == len(frame) == 344
    assert len(acc.excluded) == int(frame["flipper_length_mm"].isna().sum()) == 2
    assert acc.rows_read == acc.rows_used + len(acc.excluded) + sum(acc.not_selected.values())
    labels, groups = groups_of("penguins_flipper_by_species")
    assert tuple(g.label for g in result.groups) == labels
    for summary, g in zip(result.groups, groups):
        assert summary.n == g.size and summary.mean == pytest.approx(g.mean(), rel=1e-12)

    eff = {e.name: e.estimate for e in result.effects}
    h = stats.kruskal(*groups).statistic  # scipy
    n = sum(g.size for g in groups)
    assert eff["epsilon_squared_h"] == pytest.approx(h / (n - 1), rel=1e-10)
    aov = _pingouin_anova("penguins_flipper_by_species")
    assert eff["eta_squared"] == pytest.approx(float(aov["np2"].iloc[0]), rel=1e-10)
    assert result.tests["welch_anova"]["statistic"] == pytest.approx(float(_quiet_pingouin(
        pg.welch_anova, data=frame, dv="flipper_length_mm", between="species")["F"].iloc[0]),
        rel=1e-10)
    assert result.diagnostics.spread.levene_w == pytest.approx(
        stats.levene(*groups, center="mean").statistic, rel=1e-10)  # scipy, mean-centred
    for norm, g in zip(result.diagnostics.normality, groups):
        assert norm.shapiro_w == pytest.approx(stats.shapiro(g).statistic, rel=1e-12)  # scipy
    assert result.diagnostics.ties.tie_correction == pytest.approx(
        stats.tiecorrect(np.concatenate(groups)), rel=1e-12)  # scipy

    pairs = list(itertools.combinations(range(3), 2))
    ps = []
    for comp, (i, j) in zip(result.pairwise, pairs):
        z_ref, p_ref = _dunn_reference(groups, i, j)
        assert (comp.first, comp.second, comp.test) == (labels[i], labels[j], "dunn_z")
        assert comp.statistic == pytest.approx(z_ref, rel=1e-10)
        assert comp.p == pytest.approx(p_ref, rel=1e-9)
        ps.append(p_ref)
        peff = {e.name: e.estimate for e in comp.effects}
        # two-group effects, first relative to second: pingouin Cohen d
        assert peff["cohen_d"] == pytest.approx(
            _quiet_pingouin(pg.compute_effsize, groups[i], groups[j], eftype="cohen"), rel=1e-12)
    np.testing.assert_allclose([p.p_holm for p in result.pairwise],
                               multipletests(ps, method="holm")[1], rtol=1e-12)
