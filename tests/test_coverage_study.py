"""The coverage study script (`tools/coverage_study.py`): its population values against closed
forms and brute-force enumeration, a reduced coverage run through the project's own interval
functions, the near-separation populations and the interval methods found in a quick run, and its
seeding (the same results with one worker process or two).

The reduced run uses normal populations with n = 20 per group and a true d of 0.5 (A = 0.638):
200 replications give a Monte Carlo SE of about 1.5 percentage points at 95%, and the accepted
band [0.90, 0.99] is about three SEs below and two and a half above.
"""

from __future__ import annotations

import importlib.util
import itertools
import math
import sys
from pathlib import Path

import numpy as np
import pytest
from scipy import stats

from auditor.parametric import trimmed_mean_values, winsorized_variance_values

pytestmark = pytest.mark.slow  # `make check` leaves these out: coverage is simulated

ROOT = Path(__file__).resolve().parents[1]


def _load_study():
    name = "coverage_study"
    if name in sys.modules:
        return sys.modules[name]
    spec = importlib.util.spec_from_file_location(name, ROOT / "tools" / "coverage_study.py")
    module = importlib.util.module_from_spec(spec)
    sys.modules[name] = module  # dataclasses and worker processes look the module up by name
    spec.loader.exec_module(module)
    return module


cs = _load_study()
Normal = lambda mean, sd=1.0: cs.Continuous("normal", mean, sd)  # noqa: E731


# ------------------------------------------------------------------ population values


@pytest.mark.parametrize("d", [0.2, 0.5, 1.3])
def test_a_of_a_normal_shift_is_phi_of_d_over_root_two(d):
    assert cs.prob_superiority(Normal(d), Normal(0.0)) == pytest.approx(
        stats.norm.cdf(d / math.sqrt(2)), abs=1e-9)


def test_a_of_normals_with_unequal_sds():
    # X - Y ~ N(0.8, 2^2 + 1^2): A = Phi(0.8 / sqrt(5))
    assert cs.prob_superiority(Normal(0.8, 2.0), Normal(0.0, 1.0)) == pytest.approx(
        stats.norm.cdf(0.8 / math.sqrt(5)), abs=1e-9)


@pytest.mark.parametrize("kind,shape,shift", [("normal", 1.0, 0.5), ("lognormal", 1.0, 0.43),
                                              ("lognormal", 0.5, -1.7), ("t", 3.0, 0.63)])
def test_hodges_lehmann_shift_of_a_pure_location_shift_is_the_shift(kind, shape, shift):
    x, y = cs.Continuous(kind, shift, shape=shape), cs.Continuous(kind, 0.0, shape=shape)
    assert cs.hodges_lehmann_shift(x, y) == pytest.approx(shift, abs=1e-7)


def test_hodges_lehmann_shift_of_normals_is_the_mean_difference():
    assert cs.hodges_lehmann_shift(Normal(0.8, 2.0), Normal(-0.3, 0.5)) == pytest.approx(1.1, abs=1e-7)


def _enumerated(x, y):
    """A and the median of X - Y by listing every pair of values with its probability."""
    pairs = [(vx - vy, px * py) for (vx, px), (vy, py)
             in itertools.product(zip(*x.table()), zip(*y.table()))]
    a = sum(p * (1.0 if d > 0 else 0.5 if d == 0 else 0.0) for d, p in pairs)
    total, median = 0.0, None
    ordered = sorted(pairs)
    for i, (d, p) in enumerate(ordered):
        total += p
        if total >= 0.5 - 1e-12:
            if abs(total - 0.5) < 1e-12:  # the CDF equals 1/2 up to the next value
                nxt = min(e for e, q in ordered[i + 1:] if e > d)
                median = 0.5 * (d + nxt)
            else:
                median = d
            break
    return a, median


def _random_discrete(rng, k):
    values = rng.choice(np.arange(1, 8), size=k, replace=False).astype(float)
    probs = rng.dirichlet(np.ones(k))
    return cs.Discrete(tuple(values), tuple(probs))


@pytest.mark.parametrize("seed", range(6))
def test_discrete_a_and_shift_equal_enumeration(seed):
    rng = np.random.default_rng(seed)
    x, y = _random_discrete(rng, 4), _random_discrete(rng, 5)
    a, median = _enumerated(x, y)
    assert cs.prob_superiority(x, y) == pytest.approx(a, abs=1e-12)
    assert cs.hodges_lehmann_shift(x, y) == pytest.approx(median, abs=1e-12)


def test_discrete_shift_takes_the_midpoint_when_the_cdf_is_one_half_on_an_interval():
    x, y = cs.Discrete((0.0, 1.0), (0.5, 0.5)), cs.Discrete((0.0,), (1.0,))
    assert cs.hodges_lehmann_shift(x, y) == 0.5
    assert _enumerated(x, y)[1] == 0.5


def test_ratings_population_matches_its_sampler_and_enumeration():
    ratings = cs.SCENARIO_BY_KEY["ratings"]
    values, probs = ratings.b.table()
    assert probs.sum() == pytest.approx(1.0, abs=1e-12)
    draws = ratings.b.sample(np.random.default_rng(3), 400_000)
    freq = np.array([np.mean(draws == v) for v in values])
    assert np.max(np.abs(freq - probs)) < 0.004  # binomial SE at most 0.0008
    a, median = _enumerated(ratings.a, ratings.b)
    truth = cs.true_values(ratings)
    assert truth["prob_superiority"] == pytest.approx(a, abs=1e-12)
    assert truth["cliff_delta"] == pytest.approx(2 * a - 1, abs=1e-12)
    assert truth["hodges_lehmann"] == median


def test_normal_trimmed_and_winsorized_moments_have_their_closed_forms():
    # N(m, s), gamma = 0.2: trimmed mean m; winsorized variance
    # s^2 [(1 - 2 gamma) - 2 z phi(z) + 2 gamma z^2], z = Phi^-1(1 - gamma)
    pop = Normal(1.5, 2.0)
    z = stats.norm.ppf(0.8)
    closed = 4.0 * ((1 - 0.4) - 2 * z * stats.norm.pdf(z) + 0.4 * z * z)
    assert cs.trimmed_mean(pop) == pytest.approx(1.5, abs=1e-9)
    assert cs.winsorized_variance(pop) == pytest.approx(closed, rel=1e-9)


def test_discrete_trimmed_and_winsorized_moments_equal_the_samples_with_exact_frequencies():
    # a sample of 1000 holding each value exactly 1000 p times is the population itself; the
    # project's sample functions then give the population values (variance with n - 1)
    pop = cs.Discrete((1.0, 2.0, 4.0, 5.0, 7.0), (0.13, 0.22, 0.31, 0.19, 0.15))
    values, probs = pop.table()
    sample = np.repeat(values, np.rint(probs * 1000).astype(int))
    n = sample.size
    assert cs.trimmed_mean(pop) == pytest.approx(float(trimmed_mean_values(sample)), abs=1e-12)
    assert cs.winsorized_variance(pop) * n / (n - 1) == pytest.approx(
        float(winsorized_variance_values(sample)), abs=1e-12)


def test_true_values_of_the_normal_shift():
    truth = cs.true_values(cs.SCENARIO_BY_KEY["normal"])
    for name in ("mean_difference", "cohen_d", "hedges_g", "glass_delta", "d_unpooled",
                 "hodges_lehmann"):
        assert truth[name] == pytest.approx(0.5, abs=1e-9)
    assert truth["prob_superiority"] == pytest.approx(stats.norm.cdf(0.5 / math.sqrt(2)), abs=1e-9)
    assert truth["rank_biserial"] == truth["cliff_delta"] == pytest.approx(
        2 * truth["prob_superiority"] - 1, abs=1e-12)
    # the 0.642 scale makes robust d equal d under normality (to the rounding of 0.642)
    assert truth["robust_d"] == pytest.approx(0.5, abs=2e-4)
    assert "r_from_z" not in truth


def test_true_values_of_unequal_spreads_and_sizes():
    scenario = cs.SCENARIO_BY_KEY["unequal"]
    truth = cs.true_values(scenario)
    assert truth["cohen_d"] == pytest.approx(0.8 / math.sqrt(2.5), abs=1e-9)
    assert truth["d_unpooled"] == truth["cohen_d"]
    assert truth["glass_delta"] == pytest.approx(0.8, abs=1e-9)
    weighted = cs.size_weighted_values(scenario, 10)  # n_A = 10 with SD 2, n_B = 20 with SD 1
    assert weighted["cohen_d"] == pytest.approx(0.8 / math.sqrt((9 * 4 + 19 * 1) / 28), abs=1e-9)


@pytest.mark.parametrize("a_value", [0.90, 0.95, 0.99])
def test_near_separation_populations_have_their_exact_values(a_value):
    # X_A ~ N(delta, 1), X_B ~ N(0, 1): X_A - X_B ~ N(delta, 2), so A = Phi(delta / sqrt 2)
    # (e.g. Vargha & Delaney 2000, for normal populations) and delta = sqrt(2) Phi^-1(A)
    scenario = cs.SCENARIO_BY_KEY[f"sep{round(100 * a_value)}"]
    delta = math.sqrt(2) * stats.norm.ppf(a_value)
    assert scenario.group == "near" and scenario.b_size_factor == 1
    assert scenario.a.loc == pytest.approx(delta, abs=1e-12) and scenario.b.loc == 0.0
    truth = cs.true_values(scenario)
    assert truth["prob_superiority"] == pytest.approx(a_value, abs=1e-12)
    assert truth["cliff_delta"] == truth["rank_biserial"] == pytest.approx(2 * a_value - 1,
                                                                           abs=1e-12)
    for name in ("mean_difference", "cohen_d", "hedges_g", "glass_delta", "d_unpooled",
                 "hodges_lehmann"):
        assert truth[name] == pytest.approx(delta, abs=1e-12)
    # 0.642 is the rounded constant that makes robust d equal d under normality
    assert truth["robust_d"] == pytest.approx(delta, rel=5e-4)


@pytest.mark.parametrize("a_value", [0.90, 0.99])
def test_closed_forms_of_normal_pairs_agree_with_the_integrals(a_value):
    scenario = cs.SCENARIO_BY_KEY[f"sep{round(100 * a_value)}"]
    x, y = scenario.a, scenario.b
    assert cs.prob_superiority(x, y) == pytest.approx(a_value, abs=1e-9)
    assert cs.hodges_lehmann_shift(x, y) == pytest.approx(x.loc, abs=1e-7)
    mean, var = cs.normal_trimmed_moments(x)
    assert cs.trimmed_mean(x) == pytest.approx(mean, abs=1e-9)
    assert cs.winsorized_variance(x) == pytest.approx(var, rel=1e-9)


def test_each_population_group_has_its_own_sizes_and_replications():
    plan = cs.study_plan(["normal", "sep95"], reps=30, near_reps=12)
    assert plan == [("normal", 10, 30), ("normal", 20, 30), ("normal", 50, 30),
                    ("sep95", 5, 12), ("sep95", 10, 12), ("sep95", 20, 12)]
    assert cs.study_plan(["sep90"], {"near": [7]}, reps=3) == [("sep90", 7, 3)]
    # the medium-effect populations keep their positions in SCENARIOS (their seeds)
    assert [s.key for s in cs.SCENARIOS[:5]] == ["normal", "lognormal", "t3", "unequal", "ratings"]


def test_monte_carlo_check_agrees_with_the_integral():
    scenario = cs.SCENARIO_BY_KEY["lognormal"]
    check = cs.monte_carlo_check(scenario, 200_000, 5, 1)
    truth = cs.true_values(scenario)
    assert abs(check["prob_superiority"] - truth["prob_superiority"]) < 4 * check["prob_superiority_se"]
    assert check["hodges_lehmann"] == pytest.approx(truth["hodges_lehmann"], abs=0.02)


# ------------------------------------------------------------------ reduced coverage run


REPS, RESAMPLES, N = 200, 300, 20
NORMAL_TRUTH = {"cohen_d": 0.5, "prob_superiority": stats.norm.cdf(0.5 / math.sqrt(2))}


@pytest.fixture(scope="module")
def normal_run():
    return cs.simulate([("normal", N, REPS)], RESAMPLES, seed=20240917, workers=1)


@pytest.mark.parametrize("name,method", [("cohen_d", "noncentral_t"),
                                         ("prob_superiority", "brunner_munzel")])
@pytest.mark.parametrize("kind", ["analytic", "bca"])
def test_reduced_coverage_under_normality(normal_run, name, method, kind):
    cell = normal_run[("normal", N)]
    names = cs.index_names()
    j = names.index(name)
    # the own interval is the promised one, and it is what is reported in every data set
    assert cs.own_methods(normal_run, names)[name] == method
    assert np.all(cell.reported_method[:, j] == method)
    intervals = cell.intervals[(name, method if kind == "analytic" else cs.BCA)]
    truth = NORMAL_TRUTH[name]
    cov, width, undefined = cs.coverage(intervals, truth)
    assert undefined == 0
    assert 0.90 <= cov <= 0.99, f"{name} {kind}: coverage {cov:.3f}"
    assert 0 < width < (1.5 if name == "cohen_d" else 0.5)


def test_reduced_coverage_of_the_reported_interval_equals_the_own_one_without_fallbacks(
        normal_run):
    cell = normal_run[("normal", N)]
    j = cs.index_names().index("prob_superiority")
    np.testing.assert_array_equal(cell.reported[:, j],
                                  cell.intervals[("prob_superiority", "brunner_munzel")])


def _same_cells(one, two):
    assert one.keys() == two.keys()
    for key in one:
        a, b = one[key], two[key]
        for field in ("est", "reported", "reported_method", "withheld"):
            np.testing.assert_array_equal(getattr(a, field), getattr(b, field))
        assert list(a.intervals) == list(b.intervals)
        for k in a.intervals:
            np.testing.assert_array_equal(a.intervals[k], b.intervals[k])


def test_results_do_not_depend_on_the_number_of_workers():
    plan = [("ratings", 10, 30), ("sep99", 5, 30)]
    _same_cells(cs.simulate(plan, 200, seed=7, workers=1), cs.simulate(plan, 200, seed=7, workers=2))


@pytest.fixture(scope="module")
def separation_run():
    # A = 0.99 at n = 5: about three data sets in four have no overlap between the groups
    return cs.simulate([("sep99", 5, 40), ("normal", 10, 10)], 200, seed=11, workers=1)


def test_a_quick_run_finds_the_new_interval_methods(separation_run):
    found = {key for cell in separation_run.values() for key in cell.intervals}
    for key in [("mean_difference", "welch_t"), ("mean_difference", "student_t"),
                ("d_unpooled", "bonett_normal"), ("d_unpooled", "noncentral_t_welch"),
                ("prob_superiority", "brunner_munzel"),
                ("prob_superiority", "proportional_odds_score"),
                ("cliff_delta", "proportional_odds_score_via_A"),
                ("rank_biserial", "proportional_odds_score_via_A"),
                ("robust_d", cs.BCA)]:
        assert key in found, key
    assert not any(name == "r_from_z" for name, _ in found)


def test_under_complete_separation_the_fallback_is_reported_and_counted(separation_run):
    cell = separation_run[("sep99", 5)]
    names = cs.index_names()
    j = names.index("prob_superiority")
    separated = cell.withheld[:, j] == "complete separation"
    assert 10 <= np.count_nonzero(separated) < cell.reps
    # separated: A-hat = 1, no Brunner-Munzel and no BCa interval; the reported one is the score
    # interval, which reaches 1 and is not a single point
    assert np.all(cell.est[separated, j] == 1.0)
    for method in ("brunner_munzel", cs.BCA):
        assert np.all(np.isnan(cell.intervals[("prob_superiority", method)][separated]))
    assert np.all(cell.reported_method[separated, j] == "proportional_odds_score")
    np.testing.assert_array_equal(cell.reported[separated, j],
                                  cell.intervals[("prob_superiority", "proportional_odds_score")]
                                  [separated])
    assert np.all(cell.reported[separated, j, 1] == 1.0)
    assert np.all(cell.reported[separated, j, 0] < 1.0)
    # the composites: what is reported, and the BCa interval else the reported one
    sets = cs.interval_sets(cell, names)
    np.testing.assert_array_equal(sets[("prob_superiority", cs.BCA_ELSE)][separated],
                                  cell.reported[separated, j])
    truth = cs.true_values(cs.SCENARIO_BY_KEY["sep99"])["prob_superiority"]
    _, _, missing = cs.coverage(sets[("prob_superiority", "brunner_munzel")], truth)
    assert missing >= np.count_nonzero(separated)
    assert cs.coverage(sets[("prob_superiority", cs.REPORTED)], truth)[2] == 0


def test_command_line_writes_the_tables(tmp_path):
    out = tmp_path / "coverage.md"
    code = cs.main(["--quick", "--reps", "4", "--near-reps", "12", "--resamples", "100",
                    "--sizes", "10", "--near-sizes", "5", "--check-pairs", "100000",
                    "--populations", "normal,unequal,sep99", "--workers", "1", "--out", str(out),
                    "--save-raw", str(tmp_path / "raw.pkl")])
    assert code == 0
    text = out.read_text(encoding="utf-8")
    assert "## Coverage % (mean width)" in text
    assert "### Medium effect" in text and "### Near separation" in text
    assert "| Cohen's d | noncentral_t | own |" in text
    assert "| robust d | BCa bootstrap | bootstrap |" in text
    for row in ("| mean difference | student_t | more |",
                "| d, unpooled SDs | noncentral_t_welch | more |",
                "| A (prob. of superiority) | proportional_odds_score | more |",
                "| Cliff's delta | proportional_odds_score_via_A | more |",
                "| A (prob. of superiority) | reported interval | policy |"):
        assert row in text, row
    assert "### A near separation and at small n" in text
    assert "| complete separation |" in text  # the withheld BCa intervals, counted
    assert "r = Z / sqrt(N)" in text and "| r_from_z" not in text
    assert "size-weighted target" in text
    assert "B = 100" in text and "seed 20240917" in text
    assert "--sizes 10 --near-sizes 5 --near-reps 12" in text
    assert "## Recommendation for the default policy" in text
    # the report can be rewritten from the kept intervals, to the byte
    again = tmp_path / "again.md"
    assert cs.main(["--from-raw", str(tmp_path / "raw.pkl"), "--out", str(again)]) == 0
    assert again.read_text(encoding="utf-8") == text
