"""The nugget at composite support: segment averages against analytic integrals, the regularised
down-hole fit against a known sample-support nugget, and the carry to composite support."""

import math

import numpy as np
import pandas as pd
import pytest

from engine.composite import CompositeOptions, composite
from engine.nugget import (downhole_pairs, fit_along_holes, nugget_from_composites, nugget_from_samples,
                           regularised_increment, segment_mean)


@pytest.mark.parametrize("length", [0.5, 2.0, 7.0])
def test_segment_self_average_of_the_exponential(length):
    # analytic: for g(u) = 1 - exp(-u / b) (practical range a = 3 b), the mean over two points of one
    # segment of length l is 1 - 2 b^2 / l^2 (l / b - 1 + exp(-l / b))
    a = 12.0
    b = a / 3.0
    want = 1.0 - 2.0 * b * b / length**2 * (length / b - 1.0 + math.exp(-length / b))
    got = segment_mean("exponential", a, np.array([0.0]), np.array([length]), np.array([length]))[0]
    assert got == pytest.approx(want, rel=1e-10)


def test_segment_self_average_of_the_spherical():
    # analytic: for the spherical of range a >= l, the self-average is l / (2 a) - l^3 / (20 a^3)
    for length, a in ((2.0, 10.0), (1.0, 3.0), (5.0, 5.0)):
        got = segment_mean("spherical", a, np.array([0.0]), np.array([length]), np.array([length]))[0]
        assert got == pytest.approx(length / (2 * a) - length**3 / (20 * a**3), rel=1e-10)


def test_regularised_linear_variogram_has_the_intercept_minus_b_l_over_3():
    # published: Journel and Huijbregts 1978, ch. II: a linear variogram b h regularised over touching
    # supports of length l gives b (h - l / 3) at h = k l, an intercept of -b l / 3. The spherical with a
    # very long range is linear (1.5 h / a) near the origin.
    a, length = 1e7, 2.0
    b = 1.5 / a
    for k in (1, 2, 5):
        got = regularised_increment("spherical", a, np.array([k * length]), np.array([length]), np.array([length]))[0]
        assert got == pytest.approx(b * (k * length - length / 3.0), rel=1e-6)
    # unequal, separated segments: the mean distance between [0, 1] and [3, 5] is 3.5, the self-means 1/3 and 2/3
    got = regularised_increment("spherical", a, np.array([3.0]), np.array([1.0]), np.array([2.0]))[0]
    assert got == pytest.approx(b * (3.5 - 0.5 * (1.0 / 3.0 + 2.0 / 3.0)), rel=1e-6)


def line_samples(rng, n_holes=60, depth_m=150.0, nugget=0.3, sill=0.7, range_m=25.0):
    """Holes of irregular samples (0.5 to 1.5 m) over an exponential field along each hole (exact
    segment averages, by a fine line of points), plus independent noise of variance ``nugget``."""
    rows = []
    step = 0.05
    for h in range(n_holes):
        x = np.arange(0.0, depth_m + 2.0, step)
        # an AR(1) line with correlation exp(-3 step / range): an exponential of practical range range_m
        rho = math.exp(-3.0 * step / range_m)
        z = np.empty(len(x))
        z[0] = rng.normal()
        e = rng.normal(size=len(x)) * math.sqrt(1 - rho * rho)
        for i in range(1, len(x)):
            z[i] = rho * z[i - 1] + e[i]
        z *= math.sqrt(sill)
        edges = np.cumsum(rng.choice([0.5, 0.75, 1.0, 1.25, 1.5], size=400))
        edges = np.r_[0.0, edges[edges < depth_m]]
        for a, b in zip(edges[:-1], edges[1:]):
            inside = (x >= a) & (x < b)
            rows.append((h, a, b, z[inside].mean() + rng.normal(0.0, math.sqrt(nugget))))
    return pd.DataFrame(rows, columns=["hole", "from", "to", "value"])


def test_the_sample_nugget_is_recovered_by_the_regularised_fit():
    # a known truth at sample support: noise of variance 0.3 on each irregular sample
    rng = np.random.default_rng(4)
    s = line_samples(rng)
    pairs = downhole_pairs(s["hole"], s["from"], s["to"], s["value"], 12.0)
    fit = fit_along_holes(pairs, float(s["value"].var()))
    assert fit.nugget == pytest.approx(0.3, rel=0.12)
    # a straight line through the first lags of 2 m composites misses it (the bias this module removes)
    assert fit.shape in ("exponential", "spherical")


def test_the_composite_nugget_is_the_composited_noise():
    # analytic: the noise of a composite is C0 sum(w^2) / (sum w)^2; composite the noise alone on the
    # same layout and compare its variance with the nugget carried to composite support
    rng = np.random.default_rng(7)
    s = line_samples(rng, nugget=0.3)
    noise = line_samples(np.random.default_rng(7), nugget=0.3, sill=1e-12)  # the same layout and noise draws
    frame = s.assign(hole=s["hole"].astype(str), noise=noise["value"].to_numpy())
    result = composite(frame[["hole", "from", "to", "value", "noise"]], ["value", "noise"],
                       CompositeOptions(length_m=2.0))
    c = result.composites
    estimate = nugget_from_samples(s["hole"], s["from"], s["to"], s["value"], c["value_effective_samples"])
    truth = float(np.var(c["noise"], ddof=1))
    assert estimate.composite == pytest.approx(truth, rel=0.15)
    assert estimate.sample == pytest.approx(0.3, rel=0.12)
    assert 1.5 < estimate.mean_effective_samples < 3.0  # 2 m of samples 0.5 to 1.5 m long
    # from the composites alone, the regularised fit finds their own nugget too
    own = nugget_from_composites(c["hole"], c["from"], c["to"], c["value"])
    assert own.composite == pytest.approx(truth, rel=0.3) and own.sample is None


def test_effective_samples_of_a_composite():
    # analytic: overlaps 1.5 and 0.5 m give (1.5 + 0.5)^2 / (1.5^2 + 0.5^2) = 1.6 samples; one sample, 1
    samples = pd.DataFrame({"hole": ["A"] * 3, "from": [0.0, 1.5, 2.0], "to": [1.5, 2.0, 4.0], "au": [2.0, 8.0, 1.0]})
    c = composite(samples, ["au"], CompositeOptions(length_m=2.0)).composites
    assert c["au_effective_samples"].round(12).tolist() == [1.6, 1.0]


@pytest.mark.slow
@pytest.mark.parametrize("nugget", [0.05, 0.2, 0.4])
def test_the_composite_nugget_share_of_programs_with_a_truth_at_sample_support(nugget):
    # invented data, a known truth: programs of irregular samples (0.5 to 1.5 m) with their own nugget
    # draws, composited to 2 m. The truth at composite support is the variance of the draws composited
    # alone on the same layout (analytic). The share is of the composites' variance, estimated and true.
    from synthetic_holes.program import generate_program
    from synthetic_holes.recovery import composite_nugget_truth, composites_of, samples_of, scenario_spec
    from synthetic_holes.recovery import _field

    close = 0
    for seed in range(10):
        spec = scenario_spec("oblique lode", n_along=10, n_lines=8, hole_length_m=150.0,
                             field=_field(nugget, "exponential", 1.0 - nugget, (120.0, 60.0, 25.0), 120.0, 35.0, 30.0))
        program = generate_program(spec, seed=seed)
        _, values, _, _, frame = composites_of(program)
        samples, effective = samples_of(program, frame)
        estimate = nugget_from_samples(samples.hole, samples.from_m, samples.to_m, samples.values, effective)
        variance = float(np.var(values, ddof=1))
        truth = composite_nugget_truth(program, frame) / variance
        close += abs(estimate.composite / variance - truth) <= 0.03
    assert close >= 8, close
