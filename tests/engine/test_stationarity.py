"""Stationarity checks against the analytic cases of CHECKS.md ("Stationarity") and, for false
alarms, stationary Gaussian fields from synthetic_holes (invented Tarn Hill programs)."""

import math

import numpy as np
import pytest
from scipy import stats

from engine.stationarity import (StationarityOptions, class_sums, diagnose, domain_summary, fit_trend,
                                 gaussian_mixture, mixture_check, proportional_effect_check, sill_check,
                                 trend_check, trend_values)
from engine.variogram import LagBins, Sets, experimental_variograms
from synthetic_holes.program import FieldSpec, Structure, generate_program
from synthetic_holes.recovery import composites_of, recovery_spec
from tests.reference import stationarity_reference as reference

STATIONARY_SEEDS = range(10)


def line_series(b, s, n=2000, seed=0):
    """z = b x + noise of variance s^2 on a line, 1 m apart (CHECKS.md: analytic)."""
    rng = np.random.default_rng(seed)
    x = np.arange(n, dtype=float)
    xyz = np.c_[x, np.zeros(n), np.zeros(n)]
    return xyz, b * x + rng.normal(0.0, s, n)


def field(**changes):
    base = dict(nugget=0.1, structures=[Structure("spherical", 0.9, 120.0, 60.0, 25.0)],
                mean={"OXIDE": 5.0, "FRESH": 5.0})
    base.update(changes)
    return FieldSpec(**base)


@pytest.fixture(scope="module")
def stationary_runs():
    out = []
    for seed in STATIONARY_SEEDS:
        xyz, values, hole, _, _ = composites_of(generate_program(recovery_spec(), seed=seed))
        out.append((xyz, values, hole, diagnose(xyz, values, hole)))
    return out


# ---------------------------------------------------------------------------------------------
# the pair-sum kernel against its reference
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize("n", [0, 1, 2, 57, 400])
def test_class_sums_equal_the_pdist_reference(n):
    rng = np.random.default_rng(n)
    xyz = rng.uniform(0, 50, (n, 3))
    if n > 10:
        xyz[5] = xyz[4]  # a duplicate point: distance 0, class 0
    values = rng.normal(size=(n, 2))
    coords = rng.normal(size=(n, 3))
    got = class_sums(xyz, values, coords, 7.5, 8)
    want = reference.class_sums(xyz, values, coords, 7.5, 8)
    assert np.array_equal(got[:, 0], want[:, 0])
    assert np.allclose(got, want, rtol=1e-12, atol=1e-9)
    assert np.array_equal(got, class_sums(xyz, values, coords, 7.5, 8, threads=1))  # any thread count


# ---------------------------------------------------------------------------------------------
# trend (CHECKS.md: z = b x + noise; analytic)
# ---------------------------------------------------------------------------------------------


def test_linear_trend_in_a_1d_series_is_flagged_with_its_slope():
    # analytic: E[gamma(h)] = s^2 + b^2 h^2 / 2 (no sill); window means follow slope b
    b, s = 0.004, 1.0
    xyz, z = line_series(b, s)
    check = trend_check(xyz, z)
    east = check["axes"][0]
    assert check["flag"] and east["flag"]
    assert east["slope_per_100m"] == pytest.approx(100 * b, abs=3 * east["slope_standard_error_per_100m"])
    slices = [x for x in east["slices"] if x["count"]]
    slope_of_means = np.polyfit([x["centre"] for x in slices], [x["mean"] for x in slices], 1)[0]
    assert slope_of_means == pytest.approx(b, rel=0.1)
    table = experimental_variograms(xyz, z, Sets(omni=LagBins(50.0, 12)))
    h = table["distance"].to_numpy()
    expected = s ** 2 + b ** 2 * h ** 2 / 2
    assert np.allclose(table["gamma"], expected, rtol=0.1)
    sill = sill_check(xyz, z)
    assert sill["flag"] and sill["sets"][0]["name"] == "omni" and sill["sets"][0]["flag"]


def test_no_trend_in_a_1d_series_of_independent_noise():
    xyz, z = line_series(0.0, 1.0, seed=3)
    assert not trend_check(xyz, z)["flag"]
    assert not sill_check(xyz, z)["flag"]


def test_trend_in_a_synthetic_program_is_flagged_along_east():
    # invented Tarn Hill program with a known trend of +0.5 per 100 m east over a correlated field
    xyz, values, hole, _, _ = composites_of(generate_program(recovery_spec(field=field(trend_per_100m=(0.5, 0, 0))),
                                                             seed=1))
    report = diagnose(xyz, values, hole)
    assert "trend" in report["flags"]
    east = report["checks"]["trend"]["axes"][0]
    assert east["name"] == "east" and east["flag"]
    assert east["slope_per_100m"] == pytest.approx(0.5, abs=3 * east["slope_standard_error_per_100m"])
    # detrending removes it: the residuals show no trend and the trend is recovered
    trend = fit_trend(xyz, values, "linear")
    assert trend["coefficients"][1] == pytest.approx(0.5, abs=0.15)  # per 100 m east
    residual = values - trend_values(trend, xyz)
    assert not trend_check(xyz, residual)["flag"]


@pytest.mark.slow
def test_correlation_aware_slope_test_against_naive_regression(stationary_runs):
    # common practice: regression p-values on spatially correlated samples raise false alarms.
    # On the 10 stationary fields, count axes with p below alpha / 3 by each test.
    alpha = StationarityOptions().alpha / 3
    naive = ours = 0
    for xyz, values, _, report in stationary_runs:
        for a, axis in enumerate(report["checks"]["trend"]["axes"]):
            naive += stats.linregress(xyz @ np.asarray(axis["vector"]), values).pvalue < alpha
            ours += axis["p"] < alpha
    print(f"axes below alpha/3 over 10 stationary fields: naive regression {naive}, drillaxis {ours} (of 30)")
    assert naive >= 10 and ours <= 3


# ---------------------------------------------------------------------------------------------
# proportional effect (CHECKS.md: lognormal, analytic)
# ---------------------------------------------------------------------------------------------


def test_lognormal_local_sd_over_local_mean_is_the_analytic_coefficient_of_variation():
    # analytic: ln Z ~ N(m, s^2) gives sd = mean x sqrt(exp(s^2) - 1): 0.532940 at s = 0.5
    assert math.sqrt(math.exp(0.25) - 1) == pytest.approx(0.532940, abs=1e-6)
    rng = np.random.default_rng(7)
    xyz = rng.uniform(0, 1000, (60000, 3))
    z = np.exp(rng.normal(1.0 + xyz[:, 0] / 1000.0, 0.5))  # local means vary (slowly); the CV does not
    check = proportional_effect_check(xyz, z)
    assert check["flag"] and check["correlation"] > 0.9
    assert check["ratio_sd_to_mean"] == pytest.approx(0.532940, rel=0.03)


def test_lognormal_program_is_flagged_for_proportional_effect():
    spec = recovery_spec(field=field(nugget=0.05, structures=[Structure("spherical", 0.2, 120.0, 60.0, 25.0)],
                                     mean={"OXIDE": 0.0, "FRESH": 0.0}, lognormal=True))
    xyz, values, hole, _, _ = composites_of(generate_program(spec, seed=2))
    report = diagnose(xyz, values, hole)
    assert report["checks"]["proportional_effect"]["flag"]
    assert "proportional effect" in report["warnings"][report["flags"].index("proportional_effect")].lower()


def test_gaussian_values_show_no_proportional_effect():
    rng = np.random.default_rng(8)
    xyz = rng.uniform(0, 1000, (60000, 3))
    z = rng.normal(5.0 + xyz[:, 0] / 500.0, 0.5)  # a trend in the mean, constant sd
    assert not proportional_effect_check(xyz, z)["flag"]


# ---------------------------------------------------------------------------------------------
# mixtures (CHECKS.md: fact of the trade)
# ---------------------------------------------------------------------------------------------


def test_two_populations_are_flagged_with_a_split_between_them():
    rng = np.random.default_rng(11)
    low = np.exp(rng.normal(math.log(0.5), 0.35, 3500))
    high = np.exp(rng.normal(math.log(6.0), 0.35, 1500))
    check = mixture_check(np.r_[low, high])
    assert check["flag"] and check["scale"] == "log"
    assert [c["weight"] for c in check["components"]] == pytest.approx([0.7, 0.3], abs=0.02)
    assert 0.5 * 1.5 < check["split_value"] < 6.0 / 1.5
    assert check["share_above_split"] == pytest.approx(0.3, abs=0.02)


def test_populations_of_different_variance_are_flagged():
    rng = np.random.default_rng(12)
    check = mixture_check(np.r_[rng.normal(10, 0.5, 3000), rng.normal(10, 2.5, 2000)])
    assert check["flag"] and check["sd_ratio"] > 3


def test_one_population_is_not_flagged():
    rng = np.random.default_rng(13)
    assert not mixture_check(np.exp(rng.normal(0.0, 0.8, 5000)))["flag"]
    assert not mixture_check(rng.normal(3.0, 1.0, 5000))["flag"]


def test_mixing_two_domains_of_a_program_is_flagged_and_the_domains_are_summarised():
    # invented program: oxide mean 1.5, fresh mean 6 (lognormal grades), composited together
    spec = recovery_spec(oxide_depth_m=70.0, field=field(nugget=0.05, structures=[
        Structure("spherical", 0.15, 120.0, 60.0, 25.0)], mean={"OXIDE": math.log(1.5), "FRESH": math.log(6.0)},
        lognormal=True))
    program = generate_program(spec, seed=3)
    xyz, values, hole, _, frame = composites_of(program)
    report = diagnose(xyz, values, hole)
    assert report["checks"]["mixture"]["flag"]
    split = report["checks"]["mixture"]["split_value"]
    assert 1.5 < split < 6.0
    depth = 0.5 * (frame["from"] + frame["to"]).to_numpy()
    oxide = depth < 70.0 / math.sin(math.radians(60))  # roughly: holes dip 60
    summary = {d["domain"]: d for d in domain_summary(values, np.where(oxide, "OXIDE", "FRESH"))}
    assert summary["FRESH"]["mean"] > 2 * summary["OXIDE"]["mean"]


def test_mixture_em_recovers_known_components():
    rng = np.random.default_rng(14)
    y = np.r_[rng.normal(0, 1, 6000), rng.normal(5, 0.5, 4000)]
    w, mu, sd, _ = gaussian_mixture(y)
    assert w == pytest.approx([0.6, 0.4], abs=0.02)
    assert mu == pytest.approx([0.0, 5.0], abs=0.05)
    assert sd == pytest.approx([1.0, 0.5], abs=0.05)


# ---------------------------------------------------------------------------------------------
# no false alarms on stationary fields; halves (CHECKS.md: fact of the trade)
# ---------------------------------------------------------------------------------------------


@pytest.mark.slow
def test_false_alarms_on_stationary_gaussian_fields(stationary_runs):
    # 10 stationary Gaussian fields (one spherical structure, no trend, one population)
    counts = {name: 0 for name in ("trend", "proportional_effect", "mixture", "sill", "halves")}
    for *_, report in stationary_runs:
        for name in report["flags"]:
            counts[name] += 1
    print(f"false alarms over {len(STATIONARY_SEEDS)} stationary fields: {counts}")
    assert max(counts.values()) <= 1 and sum(counts.values()) <= 2


@pytest.mark.slow
def test_halves_of_a_stationary_field_are_similar(stationary_runs):
    for *_, report in stationary_runs:
        h = report["checks"]["halves"]
        assert h["mean_difference_sd"] < 0.5 and h["variance_ratio"] < 2.0
        assert h["variogram_difference"] < 0.5
        assert h["halves"][0]["count"] + h["halves"][1]["count"] == report["checks"]["sill"]["composites_used"]


@pytest.mark.slow
def test_the_sill_test_on_stationary_fields_and_with_a_trend(stationary_runs):
    for *_, report in stationary_runs:
        omni = report["checks"]["sill"]["sets"][0]
        assert omni["name"] == "omni" and abs(omni["tail_ratio"] - 1.0) < 0.2
    xyz, values, hole, _, _ = composites_of(generate_program(recovery_spec(field=field(trend_per_100m=(1.0, 0, 0))),
                                                             seed=5))
    assert sill_check(xyz, values, hole)["flag"]


def test_diagnose_refuses_too_few_values():
    with pytest.raises(ValueError):
        diagnose(np.zeros((5, 3)), np.arange(5.0))


# ---------------------------------------------------------------------------------------------
# the command
# ---------------------------------------------------------------------------------------------


@pytest.mark.slow
def test_stationarity_command_with_detrending_and_model_axes(tmp_path):
    import json
    import subprocess
    import sys
    from pathlib import Path

    from engine.model import Model
    from engine.model import Structure as ModelStructure

    root = Path(__file__).resolve().parents[2]
    program = generate_program(recovery_spec(n_along=8, n_lines=6, hole_length_m=150.0,
                                             field=field(trend_per_100m=(1.0, 0, 0))), seed=9)
    _, _, _, _, frame = composites_of(program)
    frame = frame.assign(zone=np.where(frame["z"] > frame["z"].median(), "UPPER", "LOWER"))
    composites = tmp_path / "composites.csv"
    frame.to_csv(composites, index=False)
    model = Model(0.1, [ModelStructure("spherical", 0.9, (120.0, 60.0, 25.0))], np.eye(3)[[1, 0, 2]] * [1, 1, -1])
    (tmp_path / "model.json").write_text(json.dumps(model.to_json()))
    out = tmp_path / "out"
    done = subprocess.run([sys.executable, "-m", "engine", "stationarity", "--composites", str(composites),
                           "--value", "au_gpt", "--domain", "zone=UPPER", "--detrend", "linear", "--model",
                           str(tmp_path / "model.json"), "--out", str(out)], capture_output=True, text=True, cwd=root)
    assert done.returncode == 0, done.stderr
    st = json.loads((out / "stationarity.json").read_text())
    assert st["domain"] == "zone=UPPER" and st["checks"]["trend"]["flag"]
    assert "WARNING (stationarity): Trend in the mean along east" in done.stdout
    assert {d["domain"] for d in st["checks"]["mixture"]["domains"]} == {"UPPER", "LOWER"}
    assert st["detrend"]["kind"] == "linear" and "trend" not in st["detrend"]["residual_flags"]
    assert [a["name"] for a in st["model_axes_trend"]["axes"]][0] == "model major"
    trend = __import__("pandas").read_csv(out / "trend.csv")
    assert len(trend) == st["summary"]["count"] and {"hole", "trend", "residual"} <= set(trend.columns)
    assert np.allclose(trend["au_gpt"] - trend["trend"], trend["residual"])
    for name in ("swaths", "proportional_effect", "mixture", "sill", "halves"):
        assert (out / f"stationarity_{name}.png").exists()
