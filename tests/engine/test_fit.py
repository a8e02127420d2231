"""Principal directions, the fitted model and the drill-pattern check, by recovering a known truth
from synthetic_holes (invented Tarn Hill programs; tolerances from the issue, stated below)."""

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from engine.fit import FitOptions, VariogramFitter, fibonacci_directions, perpendicular_fan
from engine.model import Model
from engine.pattern import check_model, drill_pattern
from synthetic_holes.program import FieldSpec, Structure, generate_program
from synthetic_holes.recovery import axis_errors_deg, composites_of, recover, recovery_spec

ROOT = Path(__file__).resolve().parents[2]
SEEDS = range(10)


def effective_ranges(model, axes):
    return [model.effective_range(axes[a]) for a in range(3)]


@pytest.fixture(scope="module")
def recoveries():
    return [recover(seed, bootstrap=50) for seed in SEEDS]


def test_search_directions_cover_the_hemisphere():
    u = fibonacci_directions(300)
    assert np.allclose(np.linalg.norm(u, axis=1), 1.0) and (u[:, 2] < 0).all()
    # any direction is within 8 degrees of one of them (either sense)
    probe = np.random.default_rng(0).normal(size=(2000, 3))
    probe /= np.linalg.norm(probe, axis=1)[:, None]
    nearest = np.degrees(np.arccos(np.abs(probe @ u.T).max(axis=1)))
    assert nearest.max() < 8.0
    fan = perpendicular_fan([0.3, 0.4, -0.866], 36)
    assert np.abs(fan @ np.array([0.3, 0.4, -0.866]) / np.linalg.norm([0.3, 0.4, -0.866])).max() < 1e-12


@pytest.mark.slow
def test_recovery_of_an_oblique_anisotropic_truth(recoveries):
    # known truth (synthetic_holes.recovery): inclined holes on a rotated grid, major / minor 4.8,
    # an oblique rotation. Tolerances from the issue: axes within 10 degrees and ranges (the
    # distance at which the model reaches 95% of its sill along each axis) within 25% for most
    # seeds; the nugget within 0.05 of the truth's share of the sill.
    good, nugget_ok, lines = 0, 0, []
    for seed, (result, truth, _) in zip(SEEDS, recoveries):
        m = result.model
        axis_err = axis_errors_deg(m.axes, truth.axes)
        fitted = effective_ranges(m, m.axes)
        true = effective_ranges(truth, truth.axes)
        range_err = [100.0 * (f - t) / t for f, t in zip(fitted, true)]
        ok = max(axis_err[0], axis_err[2]) <= 10.0 and max(abs(e) for e in range_err) <= 25.0
        good += ok
        nugget_ok += abs(m.nugget / m.sill - truth.nugget / truth.sill) <= 0.05
        lines.append(f"seed {seed}: axes {axis_err[0]:.1f} {axis_err[1]:.1f} {axis_err[2]:.1f} deg, ranges "
                     f"{range_err[0]:+.0f}% {range_err[1]:+.0f}% {range_err[2]:+.0f}%")
    print("\n".join(lines))
    assert good >= 7, "\n".join(lines)
    assert nugget_ok >= 7, "\n".join(lines)
    # the truth has one structure: cross-validation over groups of holes keeps it to one where BIC on the
    # weighted residuals fitted two (seed 9: semi-major +72%, minor +134%)
    single = sum(len(result.model.structures) == 1 for result, _, _ in recoveries)
    assert single >= 8, f"{single} of {len(recoveries)} seeds fitted with one structure"


@pytest.mark.slow
def test_bootstrap_intervals_contain_the_truth_in_most_seeds(recoveries):
    # an axis interval holds the truth when the fitted axis is within the angle that 95% of the
    # replicate axes keep to (major and minor together); a range interval (2.5-97.5%) when it holds
    # the true practical range; each counted over the seeds, "most" being more than half
    held, ranges_held, lines = 0, np.zeros(3, dtype=int), []
    for seed, (result, truth, _) in zip(SEEDS, recoveries):
        b = result.bootstrap
        assert b["failed"] <= 5 and b["replicates"] == 50
        err = axis_errors_deg(result.model.axes, truth.axes)
        inside = [err[0] <= b["axis_angle_deg"]["major"]["p95"], err[2] <= b["axis_angle_deg"]["minor"]["p95"]]
        held += all(inside)
        true_ranges = [max(s.ranges_m[a] for s in truth.structures) for a in range(3)]
        for a, name in enumerate(("major", "semi_major", "minor")):
            ranges_held[a] += b["range_m"][name]["p2_5"] <= true_ranges[a] <= b["range_m"][name]["p97_5"]
        lines.append(f"seed {seed}: major {err[0]:.1f} vs {b['axis_angle_deg']['major']['p95']:.1f}, minor "
                     f"{err[2]:.1f} vs {b['axis_angle_deg']['minor']['p95']:.1f}; ranges " + ", ".join(
                         f"{b['range_m'][n]['p2_5']:.0f}-{b['range_m'][n]['p97_5']:.0f}"
                         for n in ("major", "semi_major", "minor")))
    print("\n".join(lines))
    assert held >= 7, "\n".join(lines)
    assert (ranges_held >= 6).all(), (ranges_held, "\n".join(lines))


@pytest.mark.slow
def test_fitted_models_are_valid_and_right_handed(recoveries):
    for result, _, _ in recoveries:
        m = result.model
        assert m.problems() == []
        assert np.allclose(np.cross(m.axes[0], m.axes[1]), m.axes[2], atol=1e-9)
        for s in m.structures:
            assert s.ranges_m[0] >= s.ranges_m[1] >= s.ranges_m[2] > 0 and s.sill >= 0


@pytest.mark.slow
def test_pattern_check_flags_a_planted_artifact():
    # an isotropic field drilled on lines with holes 20 m apart along them and 80 m between them:
    # if the fit comes out strongly anisotropic, a warning must say the pattern may have made it
    field = FieldSpec(nugget=0.1, structures=[Structure("spherical", 0.9, 70.0, 70.0, 70.0)],
                      mean={"OXIDE": 5.0, "FRESH": 5.0})
    spec = recovery_spec(n_along=18, n_lines=5, along_m=20.0, across_m=80.0, field=field)
    flagged_or_isotropic = 0
    for seed in range(3):
        program = generate_program(spec, seed=seed)
        xyz, values, hole, depth, _ = composites_of(program)
        result = VariogramFitter(FitOptions(bootstrap=0)).fit(xyz, values, hole, depth, 2.0).result_
        m = result.model
        pattern = drill_pattern(xyz, hole)
        assert pattern["lines"]["fences"]
        assert pattern["lines"]["along_m"] == pytest.approx(20.0, abs=3.0)
        assert pattern["lines"]["across_m"] == pytest.approx(80.0, abs=8.0)
        ranges = [max(s.ranges_m[a] for s in m.structures) for a in range(3)]
        checks = check_model(pattern, xyz, m.axes, ranges, result.principal)
        strongly = ranges[0] / ranges[2] >= 2.0
        flagged_or_isotropic += (not strongly) or bool(checks["warnings"])
    assert flagged_or_isotropic == 3


@pytest.mark.slow
def test_fit_command_writes_model_and_pattern(tmp_path):
    program = generate_program(recovery_spec(n_along=8, n_lines=6, hole_length_m=150.0), seed=4)
    paths = program.write(tmp_path / "data")
    out = tmp_path / "run"
    command = [sys.executable, "-m", "engine", "run", "--collars", str(paths["collars"]), "--surveys",
               str(paths["surveys"]), "--intervals", str(paths["intervals"]), "--value", "au_gpt",
               "--bootstrap", "3", "--out", str(out), "--quiet"]
    done = subprocess.run(command, capture_output=True, text=True, cwd=ROOT)
    assert done.returncode == 0, done.stderr
    model = json.loads((out / "model.json").read_text())
    assert model["schema"] == "drillaxis.model/1" and model["range_convention"] == "practical"
    axes = np.array([model["axes"][n] for n in ("major", "semi_major", "minor")])
    assert np.allclose(axes @ axes.T, np.eye(3), atol=1e-9)
    assert np.allclose(np.cross(axes[0], axes[1]), axes[2], atol=1e-9)
    assert {"major", "semi_major", "minor", "plane", "pitch"} <= set(model["orientation"])
    assert model["bootstrap"]["replicates"] == 3 and "axis_angle_deg" in model["bootstrap"]
    assert "competent or qualified person" in model["caution"]
    Model.from_json(model)  # reads back
    pattern = json.loads((out / "pattern.json").read_text())
    assert pattern["holes"] == 48 and set(pattern["model_axes"]) == {"major", "semi_major", "minor"}
    for name in ("composites.csv", "fit_variograms.csv", "rejected.csv"):
        assert (out / name).exists()


@pytest.mark.slow
def test_the_fit_does_not_depend_on_the_unit_of_the_values():
    # analytic: scaling the values by s scales the variogram by s^2 and leaves the ellipsoid as it is
    # (grades in g/t or in kg/t must give the same model). Compared as the model surface at lag
    # vectors, since with equal semi-major and minor ranges the rotation about the major axis is free.
    program = generate_program(recovery_spec(n_along=8, n_lines=6, hole_length_m=150.0), seed=5)
    xyz, values, hole, depth, _ = composites_of(program)
    rng = np.random.default_rng(0)
    lags = rng.normal(size=(400, 3))
    lags *= rng.uniform(1.0, 150.0, 400)[:, None] / np.linalg.norm(lags, axis=1)[:, None]
    surfaces = {}
    for s in (1.0, 1e-6, 1e3):
        model = VariogramFitter(FitOptions(bootstrap=0)).fit(xyz, values * s, hole, depth, 2.0).result_.model
        surfaces[s] = model.gamma(lags) / (s * s)
        major = model.axes[0] if s == 1.0 else major
        angle = np.degrees(np.arccos(min(1.0, abs(float(model.axes[0] @ major)))))
        assert angle < 1.0, (s, angle)
    for s, surface in surfaces.items():
        assert np.max(np.abs(surface - surfaces[1.0]) / surfaces[1.0]) < 0.01, s


def test_a_direction_with_only_short_lag_pairs_does_not_look_continuous():
    # the continuity score is the mean gamma over the lags; lags beyond the last supported one hold no
    # evidence of continuity, so they count at the variance (review finding: np.interp held the last
    # short-lag value to the end and made such a direction look the most continuous)
    from engine.fit import Experimental, continuity_scores

    d = np.arange(1.0, 13.0) * 10.0
    gamma = 1.0 - np.exp(-3 * d / 60.0)  # an exponential of range 60 m, sill 1
    full = Experimental(d, gamma, np.full(12, 100.0))
    short = Experimental(d, gamma, np.r_[np.full(3, 100.0), np.zeros(9)])
    scores = continuity_scores([full, short], 1.0, 30)
    assert scores[1] >= scores[0]
    assert scores[0] == pytest.approx(gamma.mean())


@pytest.mark.slow
def test_fixed_parts_are_kept_and_said(tmp_path):
    # the geologist's hand on the fit: what is fixed stays as given, model.json says what was fixed and what was
    # fitted, and the bootstrap varies only what was fitted (the axes' angles are zero when the axes are fixed)
    from engine.cli import main
    from engine.orientation import axes_from_plane

    program = generate_program(recovery_spec(n_along=10, n_lines=8, hole_length_m=150.0), seed=2)
    _, _, _, _, frame = composites_of(program)
    path = tmp_path / "composites.csv"
    frame[["hole", "from", "to", "x", "y", "z", "au_gpt"]].to_csv(path, index=False)
    out = tmp_path / "fixed"
    code = main(["fit", "--composites", str(path), "--value", "au_gpt", "--nugget", "0.07", "--plane", "120/35",
                 "--pitch", "30", "--shape", "spherical", "--bootstrap", "4", "--out", str(out)])
    assert code == 0
    model = json.loads((out / "model.json").read_text())
    assert model["nugget"] == 0.07
    assert np.allclose(Model.from_json(model).axes, axes_from_plane(120.0, 35.0, 30.0), atol=1e-9)
    assert {s["shape"] for s in model["structures"]} == {"spherical"}
    assert set(model["fit"]["fixed"]) == {"nugget", "axes", "shapes"}
    assert model["fit"]["fitted"] == ["structures", "sills", "ranges"]
    assert model["bootstrap"]["axis_angle_deg"]["major"]["p95"] == pytest.approx(0.0, abs=1e-4)  # acos round-off
    assert model["bootstrap"]["nugget"]["p2_5"] == model["bootstrap"]["nugget"]["p97_5"] == 0.07
    # a model read back and refitted keeps its axes, shapes and number of structures
    again = tmp_path / "again"
    assert main(["fit", "--composites", str(path), "--value", "au_gpt", "--model", str(out / "model.json"),
                 "--bootstrap", "0", "--out", str(again)]) == 0
    refit = json.loads((again / "model.json").read_text())
    assert np.allclose(Model.from_json(refit).axes, Model.from_json(model).axes, atol=1e-9)
    assert len(refit["structures"]) == len(model["structures"]) and refit["fit"]["fitted"] == ["nugget", "sills",
                                                                                               "ranges"]


def test_a_range_shorter_than_the_first_lag_with_pairs_is_warned_about():
    # issue 13, item 0: no pair is that close along the axis, so the range is not resolved; along the holes the
    # down-hole variogram's lags count (a range there shorter than the hole spacing is seen by them)
    from engine.fit import Experimental, short_of_the_data
    from engine.model import Structure

    axes = np.eye(3)[[0, 1, 2]]
    model = Model(0.1, [Structure("spherical", 0.9, (120.0, 60.0, 8.0))], axes)
    d = np.arange(1.0, 13.0) * 22.5
    principal = [Experimental(d, np.full(12, 0.9), np.full(12, 100.0)) for _ in range(3)]
    downhole = Experimental(np.arange(1.0, 11.0) * 2.0, np.linspace(0.2, 0.9, 10), np.full(10, 500.0))
    across = np.tile([1.0, 0.0, 0.0], (24, 1))  # holes along east: the minor (vertical) gets no down-hole lags
    warned = short_of_the_data(model, principal, downhole, across, 30)
    assert len(warned) == 1 and "minor range (8.0 m)" in warned[0] and "22.5 m" in warned[0]
    vertical = np.tile([0.0, 0.0, -1.0], (24, 1))  # vertical holes: the 2 m lags resolve the 8 m vertical range
    assert short_of_the_data(model, principal, downhole, vertical, 30) == []


def test_down_hole_lags_are_compared_with_the_regularised_model():
    # analytic (Journel and Huijbregts 1978, ch. II): for a linear variogram b h, composites of length l whose
    # centres are d >= l apart have gamma_v(d) = b (d - l / 3); an exponential of very long range is linear
    # near the origin with b = 3 sill / range
    from engine.fit import regularised_values
    from engine.model import Structure

    axes = np.eye(3)
    model = Model(0.0, [Structure("exponential", 1.0, (1e5, 1e5, 1e5))], axes)
    d = np.array([2.0, 4.0, 6.0])
    b = 3.0 / 1e5
    assert regularised_values(model, np.array([0.0, 0.0, -1.0]), d, 2.0) == pytest.approx(b * (d - 2.0 / 3.0),
                                                                                          rel=1e-3)
