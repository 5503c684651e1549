"""The team's written reporting policy: reading, checking, fingerprinting, explaining, comparing.

A policy is a TOML file (`default_policy.toml` is the built-in one, commented line by line). It
sets the screening thresholds, the interval and bootstrap settings, the magnitude benchmarks, and
for each design which index is primary, which are reported beside it and which test is run when
the assumptions hold and when each kind of check fails. `decide.py` applies it.

Every key is checked: an unknown key, a wrong type, a value out of range, an index or a test that
does not exist for the design, or a test that does not compare what its primary index compares,
gives one `PolicyError` naming the key path and the allowed values. The fingerprint is the SHA-256
of the canonical JSON form (keys sorted, no whitespace), so it does not change with key order,
comments or spacing.
"""

from __future__ import annotations

import difflib
import hashlib
import json
import tomllib
from dataclasses import dataclass
from importlib import resources
from pathlib import Path
from typing import Any

from auditor.catalogue import Design, compares
from auditor.errors import AuditError
from auditor.magnitude import Benchmarks

DESIGNS = {d.policy_table: d.value for d in Design}  # policy table -> audit design

CHECKS = {  # the kinds of failed check each design can branch on
    "two_groups": ("small_sample", "heavy_ties", "outliers", "non_normal", "unequal_spread"),
    "paired": ("small_sample", "many_zeros", "heavy_ties", "outliers", "non_normal"),
    "k_groups": ("small_sample", "heavy_ties", "outliers", "non_normal", "unequal_spread"),
    "k_repeated": ("small_sample", "heavy_ties", "outliers", "non_normal"),
}

INDICES = compares()  # policy table -> index -> what it compares (catalogue.py)

TESTS = {  # design -> test -> what it compares
    "two_groups": {"student_t": "means", "welch_t": "means", "permutation_mean": "means",
                   "mann_whitney": "ranks", "brunner_munzel": "ranks"},
    "paired": {"paired_t": "means", "permutation_mean": "means", "wilcoxon": "ranks",
               "sign_test": "signs"},
    "k_groups": {"anova": "means", "welch_anova": "means", "kruskal_wallis": "ranks"},
    "k_repeated": {"rm_anova": "means", "friedman": "ranks"},
}

OUTLIER_RULES = ("beyond_3_iqr", "beyond_1_5_iqr", "modified_z")
# keys added after the first policies were written: a policy without them gets these values, so
# that it still reads (its fingerprint covers the filled-in values)
OPTIONAL = {("intervals", "match_test"): True, ("intervals", "coverage_check"): False,
            ("intervals", "coverage_simulations"): 200}
INTERVAL_METHODS = ("analytic", "bootstrap")


class PolicyError(AuditError, ValueError):
    """The policy file cannot be read or breaks a rule; the message names the key path."""


@dataclass(frozen=True)
class Branch:
    primary: str
    also: tuple[str, ...]
    test: str


@dataclass(frozen=True)
class Policy:
    """A checked policy. `settings` holds the plain data (as parsed, defaults filled in);
    the properties give typed views of it."""

    settings: dict
    source: str

    @property
    def name(self) -> str:
        return self.settings["name"]

    @property
    def version(self) -> str:
        return self.settings["version"]

    def value(self, section: str, key: str):
        return self.settings[section][key]

    def branch(self, design: str, check: str) -> Branch | None:
        table = self.settings[design].get(check)
        if table is None:
            return None
        return Branch(table["primary"], tuple(table["also"]), table["test"])

    def precedence(self, design: str) -> tuple[str, ...]:
        return tuple(self.settings[design]["precedence"])

    def benchmarks(self) -> dict[str, Benchmarks]:
        null = {"prob_superiority": 0.5, "ps_dep": 0.5}
        return {name: Benchmarks(b["small"], b["medium"], b["large"], null.get(name, 0.0),
                                 b["source"])
                for name, b in self.settings["magnitude"].items()}

    @property
    def canonical(self) -> str:
        return json.dumps(self.settings, sort_keys=True, separators=(",", ":"), ensure_ascii=True)

    @property
    def sha256(self) -> str:
        return hashlib.sha256(self.canonical.encode("ascii")).hexdigest()

    def stamp(self) -> dict:
        return {"name": self.name, "version": self.version, "sha256": self.sha256,
                "source": self.source}


# ------------------------------------------------------------------ reading and checking


def default_text() -> str:
    """The built-in policy, with its comments."""
    return resources.files("auditor").joinpath("default_policy.toml").read_text("utf-8")


def default_policy() -> Policy:
    return parse_policy(default_text(), "built-in default")


def load_policy(path: str | Path | None) -> Policy:
    """The policy in `path`, or the built-in default when `path` is None."""
    if path is None:
        return default_policy()
    path = Path(path)
    try:
        text = path.read_text("utf-8")
    except FileNotFoundError:
        raise PolicyError(f"{path}: policy file not found") from None
    except IsADirectoryError:
        raise PolicyError(f"{path}: is a folder, not a policy file") from None
    except PermissionError:
        raise PolicyError(f"{path}: no permission to read the policy file") from None
    except UnicodeDecodeError:
        raise PolicyError(f"{path}: not UTF-8 text; save the policy as UTF-8") from None
    return parse_policy(text, str(path))


def parse_policy(text: str, source: str = "policy") -> Policy:
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise PolicyError(f"{source}: not valid TOML ({exc})") from None
    return Policy(_check(data, source), source)


_NUMBER = (int, float)


def _schema() -> dict:
    """Key -> (types, check, allowed text) for the scalar sections."""
    def between(lo, hi, lo_open=False, hi_open=False):
        def ok(v):
            return (v > lo if lo_open else v >= lo) and (v < hi if hi_open else v <= hi)
        text = f"{'(' if lo_open else '['}{lo}, {hi}{')' if hi_open else ']'}"
        return ok, f"a number in {text}"

    def whole(lo, hi):
        return (lambda v: lo <= v <= hi), f"a whole number from {lo} to {hi}"

    probability = between(0, 1, True, True)
    return {
        "normality": {
            "test_p": (_NUMBER, *probability),
            "skewness": (_NUMBER, *between(0, 10, True)),
            "excess_kurtosis": (_NUMBER, *between(0, 50, True)),
            "small_n": (int, *whole(3, 100_000)),
            "small_n_factor": (_NUMBER, *between(0, 1, True)),
            "large_n": (int, *whole(3, 10_000_000)),
        },
        "spread": {
            "sd_ratio": (_NUMBER, *between(1, 100, True)),
            "sd_ratio_when_smaller_group_wider": (_NUMBER, *between(1, 100, True)),
            "unequal_n_ratio": (_NUMBER, *between(1, 100)),
        },
        "ties": {
            "tie_fraction": (_NUMBER, *between(0, 1, True)),
            "few_distinct_values": (int, *whole(1, 1000)),
        },
        "outliers": {
            "rule": (str, lambda v: v in OUTLIER_RULES, "one of " + ", ".join(OUTLIER_RULES)),
            "influence_in_se": (_NUMBER, *between(0, 100, True)),
            "any_sign_or_interval_flip": (bool, lambda v: True, "true or false"),
        },
        "influence": {"fragile_at_most": (int, *whole(0, 1000))},
        "sample_size": {"minimum_n": (int, *whole(2, 100_000))},
        "intervals": {
            "level": (_NUMBER, *between(0.5, 1, False, True)),
            "method": (str, lambda v: v in INTERVAL_METHODS, "one of " + ", ".join(INTERVAL_METHODS)),
            "match_test": (bool, lambda v: True, "true or false"),
            "coverage_check": (bool, lambda v: True, "true or false"),
            "coverage_simulations": (int, *whole(20, 100_000)),
        },
        "bootstrap": {
            "resamples": (int, *whole(100, 10_000_000)),
            "seed": (int, *whole(0, 2**63 - 1)),
        },
        "report": {"decimals": (int, *whole(0, 10))},
    }


def _fail(source: str, path: str, message: str):
    raise PolicyError(f"{source}: {path}: {message}")


def _unknown(source: str, prefix: str, key: str, allowed) -> None:
    near = difflib.get_close_matches(key, list(allowed), n=1)
    hint = f" (did you mean '{near[0]}'?)" if near else ""
    _fail(source, f"{prefix}{key}", f"unknown key{hint}; allowed: {', '.join(allowed)}")


def _type_name(types) -> str:
    types = types if isinstance(types, tuple) else (types,)
    if set(types) == {int, float}:
        return "a number"
    names = {int: "a whole number", float: "a number", str: "text", bool: "true or false"}
    return " or ".join(dict.fromkeys(names[t] for t in types))


def _check(data: dict, source: str) -> dict:
    """Validate a parsed policy and return it with nothing missing (see module docstring)."""
    schema = _schema()
    sections = ["name", "version", *schema, *DESIGNS, "magnitude", "margins"]
    for key in data:
        if key not in sections:
            _unknown(source, "", key, sections)
    out: dict[str, Any] = {}
    for key in ("name", "version"):
        value = data.get(key)
        if not isinstance(value, str) or not value.strip():
            _fail(source, key, "required text (for example name = \"our lab policy\")")
        out[key] = value.strip()
    for section, keys in schema.items():
        table = data.get(section)
        if not isinstance(table, dict):
            _fail(source, section, f"required table [{section}] with keys: {', '.join(keys)}")
        for key in table:
            if key not in keys:
                _unknown(source, f"{section}.", key, keys)
        out[section] = {}
        for key, (types, ok, allowed) in keys.items():
            if key not in table and (section, key) in OPTIONAL:
                out[section][key] = OPTIONAL[section, key]
                continue
            if key not in table:
                _fail(source, f"{section}.{key}", f"missing; give {allowed}")
            value = table[key]
            wrong_type = (not isinstance(value, types) or
                          (isinstance(value, bool) and bool not in (types if isinstance(types, tuple) else (types,))))
            if wrong_type:
                _fail(source, f"{section}.{key}", f"{value!r} is not {_type_name(types)}; give {allowed}")
            if not ok(value):
                _fail(source, f"{section}.{key}", f"{value!r} is out of range; give {allowed}")
            out[section][key] = float(value) if isinstance(value, float) else value
    if out["normality"]["small_n"] > out["normality"]["large_n"]:
        _fail(source, "normality.small_n", "must not exceed normality.large_n")
    for design in DESIGNS:
        out[design] = _check_design(data.get(design), design, source)
    out["magnitude"] = _check_magnitude(data.get("magnitude"), source)
    out["margins"] = _check_margins(data.get("margins", {}), source)
    return out


MARGIN_FAMILIES = ("mean", "standardized_mean", "dominance", "shift", "variance_explained",
                   "agreement")


def _check_margins(table, source: str) -> dict:
    """[margins]: the smallest effect size of interest, by index name (any design) or by family,
    each a positive number on the index's own scale (A: the distance from 0.5; a `dominance`
    family margin is on A's scale and doubled for Cliff's delta and the rank-biserial
    correlations, `margins.margins_for`), and an optional
    `justification` text that the methods sentence quotes. Optional: a policy without it asks no
    question of size."""
    if not isinstance(table, dict):
        _fail(source, "margins", "a table of INDEX = margin (e.g. cohen_d = 0.3)")
    names = sorted({i for d in INDICES.values() for i in d}) + list(MARGIN_FAMILIES)
    out: dict[str, Any] = {}
    for key, value in table.items():
        if key == "justification":
            if not isinstance(value, str) or not value.strip():
                _fail(source, "margins.justification", "text saying why these margins")
            out[key] = value.strip()
            continue
        if key not in names:
            _unknown(source, "margins.", key, names + ["justification"])
        if isinstance(value, bool) or not isinstance(value, (int, float)) or not value > 0:
            _fail(source, f"margins.{key}", f"{value!r} is not a positive number; give the"
                  " smallest effect of interest on the index's own scale, e.g. 0.3")
        out[key] = float(value)
    return out


def _check_design(table, design: str, source: str) -> dict:
    checks = CHECKS[design]
    extra = ("many_zero_share",) if design == "paired" else ()
    allowed = ("precedence", "assumptions_hold", *checks, *extra)
    if not isinstance(table, dict):
        _fail(source, design, f"required table [{design}] with keys: {', '.join(allowed)}")
    for key in table:
        if key not in allowed:
            _unknown(source, f"{design}.", key, allowed)
    out: dict[str, Any] = {}
    order = table.get("precedence")
    if (not isinstance(order, list) or not all(isinstance(c, str) for c in order)):
        _fail(source, f"{design}.precedence", "a list of check names; allowed: " + ", ".join(checks))
    for check in order:
        if check not in checks:
            _unknown(source, f"{design}.precedence: ", check, checks)
        if check not in table:
            _fail(source, f"{design}.{check}", "listed in precedence but not given")
    if len(set(order)) != len(order):
        _fail(source, f"{design}.precedence", "a check is listed twice")
    out["precedence"] = list(order)
    if "assumptions_hold" not in table:
        _fail(source, f"{design}.assumptions_hold", "required: { primary = ..., also = [...], test = ... }")
    for key in ("assumptions_hold", *checks):
        if key in table:
            if key != "assumptions_hold" and key not in order:
                _fail(source, f"{design}.{key}", "given but not listed in precedence")
            out[key] = _check_branch(table[key], design, f"{design}.{key}", source)
    if design == "paired":
        share = table.get("many_zero_share")
        if not isinstance(share, _NUMBER) or isinstance(share, bool) or not 0 < share <= 1:
            _fail(source, "paired.many_zero_share", f"{share!r}: give a number in (0, 1]")
        out["many_zero_share"] = float(share)
    return out


def _check_branch(table, design: str, path: str, source: str) -> dict:
    indices, tests = INDICES[design], TESTS[design]
    if not isinstance(table, dict) or set(table) != {"primary", "also", "test"}:
        _fail(source, path, "give exactly { primary = INDEX, also = [INDEX, ...], test = TEST }")
    primary, also, test = table["primary"], table["also"], table["test"]
    if primary not in indices:
        _unknown(source, f"{path}.primary: ", str(primary), indices)
    if not isinstance(also, list) or any(a not in indices for a in also):
        bad = [a for a in also if a not in indices] if isinstance(also, list) else [also]
        _fail(source, f"{path}.also", f"{bad[0]!r} is not an index of this design; allowed: "
              + ", ".join(indices))
    if primary in also or len(set(also)) != len(also):
        _fail(source, f"{path}.also", "repeats an index (the primary one or another)")
    if test not in tests:
        _unknown(source, f"{path}.test: ", str(test), tests)
    if indices[primary] != tests[test]:
        fitting = [t for t, what in tests.items() if what == indices[primary]]
        hint = ("; tests that do: " + ", ".join(fitting)) if fitting else \
            "; no test here compares that, so choose another primary index"
        _fail(source, f"{path}.test", f"{test} compares {tests[test]} but {primary} compares"
              f" {indices[primary]}{hint}")
    return {"primary": primary, "also": list(also), "test": test}


def _check_magnitude(table, source: str) -> dict:
    known = sorted({name for d in INDICES.values() for name in d
                    if name not in ("mean_difference", "hodges_lehmann")})
    if table is None:
        return {}
    if not isinstance(table, dict):
        _fail(source, "magnitude", "a table of [magnitude.INDEX] tables")
    out = {}
    for name, b in table.items():
        path = f"magnitude.{name}"
        if name not in known:
            _unknown(source, "magnitude.", name, known)
        if not isinstance(b, dict) or set(b) != {"small", "medium", "large", "source"}:
            _fail(source, path, "give small, medium, large (numbers) and source (text)")
        values = [b["small"], b["medium"], b["large"]]
        if not all(isinstance(v, _NUMBER) and not isinstance(v, bool) for v in values):
            _fail(source, path, "small, medium and large must be numbers")
        if not 0 < values[0] < values[1] < values[2]:
            _fail(source, path, f"{values}: need 0 < small < medium < large")
        if not isinstance(b["source"], str) or not b["source"].strip():
            _fail(source, f"{path}.source", "say where the thresholds come from, or 'common practice'")
        out[name] = {"small": float(values[0]), "medium": float(values[1]),
                     "large": float(values[2]), "source": b["source"].strip()}
    return out


# ------------------------------------------------------------------ explaining and comparing

_CHECK_WORDS = {
    "assumptions_hold": "when every check passes",
    "small_sample": "when a group has fewer values than the minimum",
    "heavy_ties": "when ties are heavy or the scale has few distinct values",
    "outliers": "when an extreme case alone moves Cohen's d",
    "non_normal": "when the data are clearly non-normal",
    "unequal_spread": "when the spreads differ",
    "many_zeros": "when many differences are zero",
}

_DESIGN_WORDS = {"two_groups": "Two independent groups", "paired": "Paired data",
                 "k_groups": "Three or more independent groups",
                 "k_repeated": "Three or more repeated conditions"}


def describe(policy: Policy) -> str:
    """The policy in sentences."""
    s = policy.settings
    nm, sp, ti, ou = s["normality"], s["spread"], s["ties"], s["outliers"]
    lines = [
        f"Policy '{policy.name}', version {policy.version} (SHA-256 {policy.sha256[:12]}...,"
        f" from {policy.source}).",
        "",
        "Screening:",
        f"- Non-normal: |skewness| >= {nm['skewness']:g} or |excess kurtosis| >="
        f" {nm['excess_kurtosis']:g} at any n (limits times {nm['small_n_factor']:g} below"
        f" n = {nm['small_n']}), or a Shapiro-Wilk p below {nm['test_p']:g} when n <"
        f" {nm['large_n']} (at n >= {nm['large_n']} the p-value alone never decides).",
        f"- Unequal spread: SD ratio >= {sp['sd_ratio']:g}, or >="
        f" {sp['sd_ratio_when_smaller_group_wider']:g} when the smaller group (n ratio >="
        f" {sp['unequal_n_ratio']:g}) has the larger SD.",
        f"- Heavy ties: at least {ti['tie_fraction']:.0%} of values tied, or"
        f" {ti['few_distinct_values']} distinct values or fewer.",
        f"- Outliers: a case {ou['rule'].replace('_', ' ')} whose removal moves Cohen's d by at"
        f" least {ou['influence_in_se']:g} jackknife SE"
        + (" or flips its sign or interval." if ou["any_sign_or_interval_flip"] else "."),
        f"- Small sample: fewer than {s['sample_size']['minimum_n']} values in a group (or pairs).",
        f"- Fragile: the no-effect value enters the primary index's interval after removing"
        f" {s['influence']['fragile_at_most']} cases or fewer.",
        f"- Paired data: many zeros when at least {s['paired']['many_zero_share']:.0%} of the"
        " differences are zero.",
        "",
        f"Intervals: {s['intervals']['level']:.0%}, {s['intervals']['method']}"
        + ("; the primary index quotes the interval that agrees with the reported test where it"
           " has one" if s["intervals"]["match_test"] else "")
        + (f"; coverage checked on the data's own shape ({s['intervals']['coverage_simulations']}"
           " simulations)" if s["intervals"]["coverage_check"] else "")
        + "; bootstrap"
        f" {s['bootstrap']['resamples']} resamples, seed {s['bootstrap']['seed']};"
        f" texts round to {s['report']['decimals']} decimals.",
    ]
    for design in DESIGNS:
        lines += ["", f"{_DESIGN_WORDS[design]} (checks in order: "
                  + ", ".join(c.replace('_', ' ') for c in policy.precedence(design)) + "):"]
        for check in ("assumptions_hold", *policy.precedence(design)):
            b = policy.branch(design, check)
            also = ", ".join(b.also) if b.also else "nothing else"
            lines.append(f"- {_CHECK_WORDS[check]}: report {b.primary} (beside it {also}),"
                         f" test {b.test}.")
    if s["magnitude"]:
        lines += ["", "Magnitude labels (distance from no effect: small / medium / large):"]
        for name, b in sorted(s["magnitude"].items()):
            lines.append(f"- {name}: {b['small']:g} / {b['medium']:g} / {b['large']:g}"
                         f" ({b['source']})")
    margins = {k: v for k, v in s.get("margins", {}).items() if k != "justification"}
    if margins:
        why = s["margins"].get("justification")
        lines += ["", "Smallest effects of interest (two one-sided tests and a verdict at each):"
                  + (f" {why}." if why else "")]
        lines += [f"- {name}: {value:g}" for name, value in sorted(margins.items())]
    return "\n".join(lines) + "\n"


def differences(first: Policy, second: Policy) -> list[str]:
    """One line per setting that the two policies set differently, as key path: A -> B."""
    out: list[str] = []

    def walk(a, b, path):
        if isinstance(a, dict) and isinstance(b, dict):
            for key in sorted(set(a) | set(b)):
                if key not in a:
                    out.append(f"{path}{key}: only in the second ({_show(b[key])})")
                elif key not in b:
                    out.append(f"{path}{key}: only in the first ({_show(a[key])})")
                else:
                    walk(a[key], b[key], f"{path}{key}.")
        elif a != b:
            out.append(f"{path.rstrip('.')}: {_show(a)} -> {_show(b)}")

    first_settings = {k: v for k, v in first.settings.items()}
    second_settings = {k: v for k, v in second.settings.items()}
    walk(first_settings, second_settings, "")
    return out


def _show(value) -> str:
    return json.dumps(value, ensure_ascii=False)
