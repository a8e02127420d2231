"""Models back in grade units (engine/backtransform.py) against CHECKS.md: the lognormal relation
C_Z(h) = m^2 (exp(C_Y(h)) - 1) (published: Journel and Huijbregts 1978) and the Hermite expansion
C_Z(h) = sum phi_n^2 rho(h)^n (published: Rivoirard 1994; Wackernagel 2003). For Z = exp(s Y) the
Hermite coefficients are analytic: phi_n = exp(s^2 / 2) s^n / sqrt(n!) (expand exp(s y) in Hermite
polynomials: the generating function)."""

import math

import numpy as np
import pytest

from engine.backtransform import back_transform, hermite_coefficients, hermite_gamma, lognormal_gamma
from engine.model import Model, Structure

AXES = np.array([[0.6, 0.8, 0.0], [-0.8, 0.6, 0.0], [0.0, 0.0, 1.0]])


def test_hermite_coefficients_of_a_lognormal_sample_are_the_analytic_ones():
    s = 0.6
    z = np.exp(s * np.random.default_rng(0).normal(size=200_000))
    phi = hermite_coefficients(z)
    for n in range(5):
        assert phi[n] == pytest.approx(math.exp(s * s / 2) * s ** n / math.sqrt(math.factorial(n)), rel=0.03, abs=2e-3)
    assert np.sum(phi[1:] ** 2) == pytest.approx(z.var(), rel=0.01)


def test_declustering_weights_enter_the_anamorphosis():
    # two copies of the low values weigh as one when their weights are halved
    z = np.array([1.0, 1.0, 2.0, 3.0, 4.0])
    w = np.array([0.5, 0.5, 1.0, 1.0, 1.0])
    assert hermite_coefficients(z, w)[:6] == pytest.approx(hermite_coefficients(np.array([1.0, 2.0, 3.0, 4.0]))[:6])


def test_the_lognormal_model_in_grade_units_follows_the_relation_at_ten_lags():
    y = Model(0.05, [Structure("spherical", 0.30, (120.0, 60.0, 25.0))], AXES)
    mean = 2.5
    out = back_transform(y, "log", np.full(10, mean))
    grade = Model.from_json(out)
    d = np.linspace(12.0, 120.0, 10)
    for a in range(3):
        h = d[:, None] * AXES[a][None, :] * (y.structures[0].ranges_m[a] / 120.0)
        truth = lognormal_gamma(y, mean, h)  # m^2 (exp(C_Y(0)) - exp(C_Y(h)))
        assert np.all(np.abs(grade.gamma(h) / truth - 1) <= 0.05), (a, grade.gamma(h), truth)
    sill = mean ** 2 * (math.exp(0.35) - 1.0)
    assert grade.sill == pytest.approx(sill, rel=0.05)
    assert out["largest_relative_misfit"] < 0.1 and "lognormal" in out["assumption"]


def test_hermite_and_lognormal_back_transforms_agree_on_lognormal_grades():
    # for Z = exp(s Y) both relations give m^2 (exp(s^2 rho) - 1): analytic
    s = 0.7
    z = np.exp(1.0 + s * np.random.default_rng(2).normal(size=100_000))
    ns = Model(0.1, [Structure("exponential", 0.9, (150.0, 80.0, 30.0))], AXES)  # normal scores: sill 1
    logm = Model(0.1 * s * s, [Structure("exponential", 0.9 * s * s, (150.0, 80.0, 30.0))], AXES)
    h = np.linspace(5.0, 200.0, 10)[:, None] * AXES[0][None, :]
    phi = hermite_coefficients(z)
    assert hermite_gamma(ns, phi, h) == pytest.approx(lognormal_gamma(logm, float(z.mean()), h), rel=0.03)


@pytest.mark.slow
def test_a_lognormal_program_fitted_in_logs_has_a_grade_sill_near_the_declustered_variance(tmp_path):
    # invented data with a known truth: grades exp(0.6 (v - 5)) of a generated Gaussian program v; fitted with
    # --transform log, the back-transformed sill must come within 5% of the grades' declustered variance. The
    # ranges are short beside the program (40 / 25 / 10 m) so that its histogram is near its model's: the
    # relation is of the distribution, and one realisation of long ranges holds few independent values
    import json

    import pandas as pd

    from engine.cli import main
    from synthetic_holes.program import generate_program
    from synthetic_holes.recovery import _field, composites_of, recovery_spec

    field = _field(0.1, "spherical", 0.9, (40.0, 25.0, 10.0), 120.0, 35.0, 30.0)
    program = generate_program(recovery_spec(n_along=10, n_lines=8, hole_length_m=150.0, field=field), seed=0)
    _, _, _, _, frame = composites_of(program)
    frame = frame.assign(au=np.exp(0.6 * (frame["au_gpt"] - 5.0)))
    path = tmp_path / "composites.csv"
    frame[["hole", "from", "to", "x", "y", "z", "au"]].to_csv(path, index=False)
    code = main(["fit", "--composites", str(path), "--value", "au", "--transform", "log", "--bootstrap", "0",
                 "--out", str(tmp_path / "fit")])
    assert code == 0
    model = json.loads((tmp_path / "fit" / "model.json").read_text())
    grade = model["model_in_grade_units"]
    sill = grade["nugget"] + sum(s["sill"] for s in grade["structures"])
    assert sill == pytest.approx(model["declustering"]["variance"], rel=0.05)
    assert pd.notna(grade["largest_relative_misfit"])
