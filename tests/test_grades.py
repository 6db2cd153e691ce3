"""Grades: how a tolerance becomes a distribution, the built-in catalog, grade validation.

References are named beside each check. tests/REFERENCES.md tags: [C] confirmed in a stored copy
of the published document, [M] from memory (not confirmed), [D] derived by computation.
Statistical checks use fixed seeds and a stated bound of 5 standard errors.
"""
from __future__ import annotations

import json
import math

import numpy as np
import pytest
from scipy import stats

from tolspread.errors import InputError, ValidationError
from tolspread.grades import Catalog, Grade, builtin_catalog, load_catalog, scaled
from tolspread.sampling import draw_scores, part_values, relative_deviation

N_BIG = 200_000
NOMINAL = 1000.0


def _deviations(grade: Grade, n: int = N_BIG, seed: int = 11) -> np.ndarray:
    """Relative deviations of n sampled parts of ``grade`` (one part, fixed seed)."""
    z = draw_scores(seed, 1, 0, n)
    values = part_values([NOMINAL], [grade], z)[:, 0]
    return values / NOMINAL - 1.0


# --- tolerance to standard deviation ------------------------------------------------------

def test_coverage_factor_for_95_percent_matches_normal_quantile():
    # JCGM 100:2008 (GUM) Table G.1, via NIST TN 1297 section 6: 95 % -> k = 1.960
    # (tests/REFERENCES.md section 4, [C]). Reference library: scipy.stats.norm.ppf.
    assert abs(stats.norm.ppf(0.975) - 1.96) < 1e-3
    # Same table [C]: 95.45 % -> k = 2, 99.73 % -> k = 3.
    assert abs(2 * stats.norm.cdf(2.0) - 1 - 0.9545) < 1e-4
    assert abs(2 * stats.norm.cdf(3.0) - 1 - 0.9973) < 1e-4


@pytest.mark.parametrize("coverage, inside", [(1.96, 0.95), (2.0, 0.9545), (1.0, 0.6827)])
def test_untruncated_normal_grade_puts_the_table_fraction_inside_the_tolerance(coverage, inside):
    # GUM Table G.1 via NIST TN 1297 (tests/REFERENCES.md section 4, [C]): coverage factor k
    # encloses the tabulated fraction of a normal distribution.
    g = Grade("T", "R", 5.0, coverage=coverage, truncate=False)
    dev = _deviations(g)
    frac = np.mean(np.abs(dev) <= 0.05)
    se = math.sqrt(inside * (1 - inside) / dev.size)  # binomial standard error
    assert abs(frac - inside) < 5 * se + 1e-4  # 1e-4: the table's rounding


def test_five_percent_part_at_k2_has_about_2_5_percent_std():
    # Fact of the trade (common practice, tests/REFERENCES.md section 4): a tolerance read as two
    # standard deviations, so a +-5 % part has a standard deviation of about 2.5 %.
    g = Grade("R5", "R", 5.0, truncate=False)
    dev = _deviations(g)
    assert abs(dev.std() / 0.025 - 1) < 0.03
    assert g.sigma == pytest.approx(0.025, rel=1e-12)


def test_grade_defaults_normal_coverage_2_truncated():
    # The documented default (filters/grades.py docstring; README "Grades").
    g = Grade("X", "R", 1.0)
    assert (g.distribution, g.coverage, g.truncate) == ("normal", 2.0, True)


def test_truncated_normal_stays_inside_and_has_truncnorm_std():
    # Reference library: scipy.stats.truncnorm(-2, 2) is the standard normal cut at +-2.
    g = Grade("R5", "R", 5.0)  # default: coverage 2, truncated at the limits
    dev = _deviations(g)
    assert np.all(np.abs(dev) <= 0.05 * (1 + 1e-12))
    expected = stats.truncnorm(-2, 2).std() * 0.025
    # std of a sample std is about sigma/sqrt(2N) for a normal (less for a truncated
    # one, whose kurtosis is lower); 5 of those.
    assert abs(dev.std() - expected) < 5 * expected / math.sqrt(2 * dev.size)
    # and it is really narrower than the untruncated 2.5 % (guards against no truncation)
    assert dev.std() < 0.025 * 0.93
    # mean 0 by symmetry, 5 standard errors
    assert abs(dev.mean()) < 5 * expected / math.sqrt(dev.size)


def test_truncated_normal_matches_truncnorm_distribution():
    # Reference library: compare the whole distribution with scipy.stats.truncnorm via a
    # Kolmogorov-Smirnov statistic. Critical value at alpha = 0.001 is about
    # 1.95/sqrt(n) (Smirnov's asymptotic distribution, from memory).
    g = Grade("C2", "C", 2.0)
    n = 50_000
    dev = _deviations(g, n=n, seed=5)
    d = stats.kstest(dev / g.sigma, stats.truncnorm(-2, 2).cdf).statistic
    assert d < 1.95 / math.sqrt(n)


def test_uniform_grade_std_is_half_width_over_sqrt3():
    # GUM 4.3.7 (tests/REFERENCES.md section 4, [M] from memory): rectangular distribution of
    # half-width a has u = a/sqrt(3). Cross-checked with scipy.stats.uniform.
    a = 0.05
    ref = stats.uniform(loc=-a, scale=2 * a)
    assert ref.std() == pytest.approx(a / math.sqrt(3), rel=1e-12)
    g = Grade("U5", "opamp", 5.0, distribution="uniform")
    dev = _deviations(g)
    assert np.all(np.abs(dev) <= a)
    # std of the sample std of a uniform: sigma*sqrt((kurtosis - 1)/(4N)), kurtosis 1.8
    se = ref.std() * math.sqrt(0.8 / (4 * dev.size))
    assert abs(dev.std() - ref.std()) < 5 * se
    d = stats.kstest(dev, ref.cdf).statistic
    assert d < 1.95 / math.sqrt(dev.size)  # KS at alpha 0.001 (from memory)


def test_binned_grade_has_no_value_in_the_removed_centre():
    # A 5 % grade whose centre +-2 % was sold as a tighter grade (filters/grades.py).
    g = Grade("B5", "R", 5.0, distribution="binned", bin_inner_pct=2.0)
    dev = _deviations(g)
    assert np.all(np.abs(dev) >= 0.02 * (1 - 1e-9))
    assert np.all(np.abs(dev) <= 0.05 * (1 + 1e-9))
    # both humps present, about half each (binomial, 5 standard errors)
    frac_low = np.mean(dev < 0)
    assert abs(frac_low - 0.5) < 5 * math.sqrt(0.25 / dev.size)
    # Reference library: one hump is the normal (sigma = 2.5 %) cut to [0.8, 2] sigma, so
    # the second moment equals truncnorm(0.8, 2)'s (the two humps are mirror images).
    ref = stats.truncnorm(0.8, 2.0)
    m2 = ref.moment(2) * 0.025 ** 2
    m4 = ref.moment(4) * 0.025 ** 4
    se = math.sqrt((m4 - m2 ** 2) / dev.size)
    assert abs(np.mean(dev ** 2) - m2) < 5 * se
    d = stats.kstest(np.abs(dev) / 0.025, ref.cdf).statistic
    assert d < 1.95 / math.sqrt(dev.size)  # KS at alpha 0.001 (from memory)


def test_zero_tolerance_grade_is_exact():
    g = Grade("E", "any", 0.0)
    dev = relative_deviation(g, np.linspace(-5, 5, 101))
    assert np.all(dev == 0.0)


def test_scaled_grade_changes_only_the_tolerance():
    g = builtin_catalog()["R-thick-5"]
    s = scaled(g, 1.0)
    assert s.tolerance_pct == 1.0
    assert (s.distribution, s.coverage, s.truncate, s.tempco_spread_ppm) == (
        g.distribution, g.coverage, g.truncate, g.tempco_spread_ppm)
    assert s.name != g.name


# --- the built-in catalog -----------------------------------------------------------------

def _tolerances(cat: Catalog, kind: str, tech: str) -> set[float]:
    return {g.tolerance_pct for g in cat.grades if g.kind == kind and tech.lower() in g.technology.lower()}


def test_builtin_catalog_has_the_common_grades():
    # Typical purchasable grades, common practice (tests/REFERENCES.md section 9).
    cat = builtin_catalog()
    resistors = {g.tolerance_pct for g in cat.grades if g.kind == "R"}
    assert {0.1, 0.5, 1.0, 2.0, 5.0} <= resistors
    assert {1.0, 2.0, 5.0} <= _tolerances(cat, "C", "C0G")
    assert {5.0, 10.0, 20.0} <= _tolerances(cat, "C", "X7R")
    assert {1.0, 2.0, 5.0} <= _tolerances(cat, "C", "film")
    assert {2.0, 5.0, 10.0, 20.0} <= {g.tolerance_pct for g in cat.grades if g.kind == "L"}
    # every grade fits its own kind, and the names are unique
    assert all(g.fits(g.kind) for g in cat.grades)
    assert len(set(cat.names())) == len(cat.grades)


def test_builtin_catalog_temperature_coefficients_follow_the_codes():
    cat = builtin_catalog()
    # EIA-198-1-F (tests/REFERENCES.md section 3, [C]): C0G (NP0) = 0 +- 30 ppm/K.
    for g in cat.grades:
        if "C0G" in g.technology:
            assert (g.tempco_ppm, g.tempco_spread_ppm) == (0.0, 30.0), g.name
    # EIA-198-1-F [C]: X7R = -55..+125 deg C with at most +-15 % change: a curve, not a
    # coefficient (tests/test_temperature.py checks sampled parts against the limit).
    x7r = [g for g in cat.grades if "X7R" in g.technology]
    assert x7r
    for g in x7r:
        assert g.temp_curve_pct and g.temp_limit_pct == 15.0, g.name
        assert max(abs(c) for _, c in g.temp_curve_pct) * (1 + g.temp_curve_spread) <= 15.0 + 1e-12, g.name
    # Vendor pages (tests/REFERENCES.md section 9, [C]): thick film +-100/+-200 ppm/K (and by
    # value +-400 below 10 ohm, section 10 [C]); thin film +-25/+-50 ppm/K, 5 to 25 ppm/K for
    # precision classes (section 10 [C]).
    for g in cat.grades:
        if "thick-film" in g.technology:
            assert g.tempco_spread_ppm in (100.0, 200.0), g.name
            assert {r[2] for r in g.tempco_by_value} <= {100.0, 200.0, 400.0}, g.name
        if "thin-film" in g.technology:
            assert g.tempco_spread_ppm in (10.0, 25.0, 50.0), g.name


def test_catalog_lookup_and_for_kind():
    cat = builtin_catalog()
    assert "R-thick-5" in cat
    with pytest.raises(InputError) as e:
        cat["no-such-grade"]
    assert e.value.path == "grade"
    for_r = cat.for_kind("R")
    assert for_r and all(g.kind in ("R", "any") for g in for_r)
    assert [g.cost for g in for_r] == sorted(g.cost for g in for_r)


def test_catalog_refuses_repeated_names():
    g = Grade("A", "R", 1.0)
    with pytest.raises(InputError) as e:
        Catalog((g, g))
    assert e.value.path == "grades"


def test_catalog_with_grade_adds_and_replaces():
    cat = builtin_catalog()
    new = Grade("R-custom", "R", 3.0)
    assert "R-custom" in cat.with_grade(new)
    replaced = cat.with_grade(Grade("R-thick-5", "R", 4.0))
    assert replaced["R-thick-5"].tolerance_pct == 4.0
    assert len(replaced.grades) == len(cat.grades)


def test_catalog_round_trip_through_dict(tmp_path):
    cat = builtin_catalog()
    p = tmp_path / "cat.json"
    p.write_text(json.dumps(cat.to_dict()), encoding="utf-8")
    assert load_catalog(p) == cat


def test_load_catalog_errors_name_the_file(tmp_path):
    missing = tmp_path / "none.json"
    with pytest.raises(InputError) as e:
        load_catalog(missing)
    assert e.value.path == str(missing)
    bad = tmp_path / "bad.json"
    bad.write_text("{not json", encoding="utf-8")
    with pytest.raises(InputError) as e:
        load_catalog(bad)
    assert e.value.path == str(bad)


# --- grade validation ---------------------------------------------------------------------

GOOD = {"name": "G", "kind": "R", "tolerance_pct": 1.0}


def _paths(exc: InputError) -> set[str]:
    return {p.path for p in exc.problems} if isinstance(exc, ValidationError) else {exc.path}


@pytest.mark.parametrize("field, bad", [
    ("tolerance_pct", 100),
    ("tolerance_pct", 150),
    ("tolerance_pct", -1),
    ("tolerance_pct", float("nan")),
    ("tolerance_pct", float("inf")),
    ("tolerance_pct", "5"),
    ("tolerance_pct", True),
    ("coverage", 0),
    ("coverage", float("nan")),
    ("cost", -0.5),
    ("cost", float("nan")),
    ("distribution", "lognormal"),
    ("kind", "Q"),
    ("name", ""),
    ("truncate", "yes"),
    ("drift_pct", 100),
    ("tempco_spread_ppm", -10),
    # issue 11 #1: a technology that is not text broke recommend (unhashable) and the report
    ("technology", ["thick film"]),
    ("technology", 5),
    ("technology", None),
    # issue 11 #1: a coverage factor of 1e-320 made sigma infinite (LinAlgError, NaN margins)
    ("coverage", 1e-320),
    ("coverage", 1e300),
    # issue 11 #1: a cost of 1e308 overflowed the sum of a set's costs
    ("cost", 1e308),
    ("tempco_ppm", 1e300),
    ("tempco_spread_ppm", 1e300),
])
def test_grade_from_dict_rejects_bad_field_with_its_path(field, bad):
    with pytest.raises(InputError) as e:
        Grade.from_dict({**GOOD, field: bad}, "grades[3]")
    assert f"grades[3].{field}" in _paths(e.value)


def test_grade_from_dict_rejects_unknown_and_missing_fields():
    with pytest.raises(ValidationError) as e:
        Grade.from_dict({"name": "G", "kind": "R", "colour": "blue"}, "g")
    assert {"g.colour", "g.tolerance_pct"} <= _paths(e.value)


def test_grade_from_dict_binned_needs_a_centre():
    with pytest.raises(ValidationError) as e:
        Grade.from_dict({**GOOD, "tolerance_pct": 5, "distribution": "binned"}, "g")
    assert "g.bin_inner_pct" in _paths(e.value)
    with pytest.raises(ValidationError) as e:
        Grade.from_dict({**GOOD, "tolerance_pct": 5, "distribution": "binned", "bin_inner_pct": 5}, "g")
    assert "g.bin_inner_pct" in _paths(e.value)


def test_grade_from_dict_reports_every_problem_at_once():
    # filters/grades.py: "every problem is reported with its field path". An unknown
    # distribution and a negative cost in one grade must both be reported.
    with pytest.raises(ValidationError) as e:
        Grade.from_dict({**GOOD, "distribution": "lognormal", "cost": -1}, "g")
    assert {"g.distribution", "g.cost"} <= _paths(e.value)


def test_grade_from_dict_accepts_a_full_grade():
    g = Grade.from_dict({"name": "F", "kind": "C", "tolerance_pct": 2, "distribution": "uniform",
                         "tempco_ppm": -200, "tempco_spread_ppm": 50, "cost": 7, "truncate": False})
    assert g == Grade("F", "C", 2.0, distribution="uniform", truncate=False, tempco_ppm=-200.0,
                      tempco_spread_ppm=50.0, cost=7.0)
    assert Grade.from_dict(g.to_dict()) == g


# --- issue 11: every rule runs whether or not the field is written ----------------------------

def test_a_grade_without_coverage_is_checked_with_the_default_coverage():
    # issue 11 #2: tolerance 30 %, truncate false and no coverage loaded (the rule ran only
    # when coverage was written); save() then wrote "coverage": 2.0 and reloading refused
    # it. 30 % / 2 * 8 = 120 % would reach negative values (filters/grades.py's own rule).
    raw = {"name": "R-wide", "kind": "R", "tolerance_pct": 30, "truncate": False}
    with pytest.raises(ValidationError) as e:
        Grade.from_dict(raw, "g")
    assert "g.coverage" in _paths(e.value)
    with pytest.raises(ValidationError):
        Grade.from_dict(dict(raw, coverage=2.0), "g")  # what save() would have written


def test_every_valid_grade_reloads_from_what_it_saves():
    # issue 11 #2: for each rule, a grade that loads writes a dict that loads to itself.
    for raw in ({"name": "a", "kind": "R", "tolerance_pct": 10, "truncate": False},
                {"name": "b", "kind": "C", "tolerance_pct": 5, "distribution": "binned", "bin_inner_pct": 2},
                {"name": "c", "kind": "any", "tolerance_pct": 0},
                {"name": "d", "kind": "L", "tolerance_pct": 99, "distribution": "uniform", "coverage": 0.1}):
        g = Grade.from_dict(raw, "g")
        assert Grade.from_dict(g.to_dict(), "g") == g


# --- issue 11 #5: catalog files get the design files' guards -----------------------------------

@pytest.mark.parametrize("case", ["deep", "deep_moderate", "huge_int", "surrogate", "binary", "folder"])
def test_hostile_catalog_files_are_input_errors(case, tmp_path):
    p = tmp_path / "cat.json"
    if case == "deep":  # RecursionError before
        p.write_text("[" * 100000 + "]" * 100000, encoding="utf-8")
    elif case == "deep_moderate":
        p.write_text('{"grades": ' + "[" * 50 + "]" * 50 + "}", encoding="utf-8")
    elif case == "huge_int":  # ValueError (int digit limit) before
        p.write_text('{"grades": [{"name": "G", "kind": "R", "tolerance_pct": ' + "9" * 5000 + "}]}",
                     encoding="utf-8")
    elif case == "surrogate":
        p.write_text('{"grades": [{"name": "\\ud800", "kind": "R", "tolerance_pct": 1}]}', encoding="utf-8")
    elif case == "binary":
        p.write_bytes(b"\xff\xfe{")
    else:
        p.mkdir()
    with pytest.raises(InputError) as e:
        load_catalog(p)
    assert e.value.path == str(p)


def test_special_files_as_a_catalog_are_refused_without_reading_them(tmp_path):
    # issue 11 #5: /dev/zero ran out of memory (MemoryError) and a FIFO hung. A special
    # file is refused before a byte is read (a thread bounds the test if it would hang).
    import os
    import threading

    fifo = tmp_path / "pipe.json"
    os.mkfifo(fifo)
    for path in ("/dev/zero", str(fifo)):
        got: list = []
        t = threading.Thread(target=lambda: got.append(_catch(load_catalog, path)), daemon=True)
        t.start()
        t.join(10)
        assert got, f"load_catalog({path}) did not return within 10 s"
        assert isinstance(got[0], InputError) and "regular file" in got[0].reason, got[0]
        assert got[0].path == path


def _catch(fn, *args):
    try:
        return fn(*args)
    except Exception as exc:  # noqa: BLE001 - the test inspects what was raised
        return exc
