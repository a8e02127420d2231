"""Compositing: the CHECKS.md cases, metal kept under every rule (property test), the support effect."""

import math

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from engine.composite import CompositeOptions, composite
from engine.desurvey import Desurvey
from engine.errors import UsageError, ValidationError
from tests.reference.composite_reference import composite_reference

# common practice; values computed by hand (CHECKS.md, "Compositing")
HAND = pd.DataFrame({"hole": ["A"] * 4, "from": [0.0, 1.5, 2.0, 4.0], "to": [1.5, 2.0, 4.0, 5.3],
                     "au": [2.0, 8.0, 1.0, 0.5], "rho": [2.7, 3.5, 2.8, 2.6]})


def rows(result, columns=("from", "to", "au")):
    return [tuple(round(v, 6) for v in r) for r in result.composites[list(columns)].itertuples(index=False)]


def test_length_and_density_weighting_by_hand():
    by_length = composite(HAND, ["au"], CompositeOptions(length_m=2.0))
    assert rows(by_length)[:2] == [(0.0, 2.0, 3.5), (2.0, 4.0, 1.0)]
    by_density = composite(HAND, ["au", "rho"], CompositeOptions(length_m=2.0, density="rho"))
    assert rows(by_density)[:2] == [(0.0, 2.0, 3.810345), (2.0, 4.0, 1.0)]
    assert "length x density" in by_density.summary["weighting"]  # the weighting is stated
    assert "length-weighted" in by_length.summary["weighting"]


def test_merged_residual_by_hand():
    # CHECKS.md merges the 1.3 m residual 4-5.3 into 2-5.3 (0.803030 by length, 0.811804 by density).
    # A 1.3 m residual is not shorter than half of 2 m, so the default rule keeps it apart; the CHECKS
    # figures are those of merging every residual shorter than L (merge_below = 1).
    merged = composite(HAND, ["au"], CompositeOptions(length_m=2.0, merge_below=1.0))
    assert rows(merged) == [(0.0, 2.0, 3.5), (2.0, 5.3, 0.80303)]
    merged = composite(HAND, ["au", "rho"], CompositeOptions(length_m=2.0, merge_below=1.0, density="rho"))
    assert rows(merged)[1] == (2.0, 5.3, 0.811804)
    default = composite(HAND, ["au"], CompositeOptions(length_m=2.0))
    assert rows(default)[2] == (4.0, 5.3, 0.5)


def test_residual_shorter_than_half_is_merged_or_dropped():
    # common practice: a residual shorter than half the composite length joins the previous composite
    samples = HAND.assign(to=[1.5, 2.0, 4.0, 4.6])
    merged = composite(samples, ["au"], CompositeOptions(length_m=2.0))
    assert rows(merged) == [(0.0, 2.0, 3.5), (2.0, 4.6, round((2 * 1.0 + 0.6 * 0.5) / 2.6, 6))]
    dropped = composite(samples, ["au"], CompositeOptions(length_m=2.0, residual="drop"))
    assert rows(dropped) == [(0.0, 2.0, 3.5), (2.0, 4.0, 1.0)]
    assert dropped.left_out["metal_au"].tolist() == [pytest.approx(0.6 * 0.5)]
    assert "rule drop" in dropped.left_out["reason"].iloc[0]
    kept = composite(samples, ["au"], CompositeOptions(length_m=2.0, residual="keep"))
    assert rows(kept)[-1] == (4.0, 4.6, 0.5)


def test_composites_break_at_domain_contacts():
    # common practice: no composite spans two domains; each run restarts at its top
    samples = pd.DataFrame({"hole": "A", "from": [0.0, 1.0, 2.0, 3.0, 4.5], "to": [1.0, 2.0, 3.0, 4.5, 6.0],
                            "au": [1.0, 2.0, 3.0, 4.0, 5.0], "zone": ["OX", "OX", "OX", "FR", "FR"]})
    result = composite(samples, ["au"], CompositeOptions(length_m=2.0, domain="zone"))
    got = result.composites[["from", "to", "domain", "au"]].values.tolist()
    assert got == [[0.0, 2.0, "OX", 1.5], [2.0, 3.0, "OX", 3.0], [3.0, 5.0, "FR", 4.25], [5.0, 6.0, "FR", 5.0]]
    without = composite(samples, ["au"], CompositeOptions(length_m=2.0))
    assert without.composites["from"].tolist() == [0.0, 2.0, 4.0]


def test_gaps_are_missing_not_zero_and_coverage_rule():
    samples = pd.DataFrame({"hole": "A", "from": [0.0, 3.0, 6.5], "to": [1.0, 6.0, 8.0], "au": [4.0, 1.0, 2.0]})
    result = composite(samples, ["au"], CompositeOptions(length_m=2.0, min_coverage=0.5, residual="keep"))
    c = result.composites.set_index("from")
    assert c.loc[0.0, "au"] == 4.0 and c.loc[0.0, "sampled"] == 1.0  # 0-2 averages its 1 m sampled
    assert result.left_out.empty  # 0-2 and 2-4 hold 1 m sampled of 2 (half), 6-8 holds 1.5 m
    strict = composite(samples, ["au"], CompositeOptions(length_m=2.0, min_coverage=0.9, residual="keep"))
    assert sorted(strict.left_out["from"]) == [0.0, 2.0, 6.0]
    assert strict.left_out["reason"].str.contains("minimum coverage").all()
    assert (strict.check["difference"].abs() < 1e-12).all()


def test_each_value_column_has_its_own_sampled_length():
    samples = pd.DataFrame({"hole": "A", "from": [0.0, 1.0], "to": [1.0, 2.0], "au": [2.0, np.nan],
                            "cu": [0.5, 0.7]})
    c = composite(samples, ["au", "cu"], CompositeOptions(length_m=2.0)).composites.iloc[0]
    assert (c["au"], c["au_sampled"], c["cu"], c["cu_sampled"], c["sampled"]) == (2.0, 1.0, 0.6, 2.0, 2.0)


def test_missing_density_needs_an_explicit_default():
    samples = HAND.assign(rho=[2.7, np.nan, 2.8, 2.6])
    with pytest.raises(ValidationError, match="--density-default"):
        composite(samples, ["au", "rho"], CompositeOptions(length_m=2.0, density="rho"))
    result = composite(samples, ["au", "rho"], CompositeOptions(length_m=2.0, density="rho", density_default=3.5))
    assert result.summary["density_filled"] == 1 and result.warnings
    assert rows(result)[0] == (0.0, 2.0, 3.810345)


def test_equal_and_whole_run_composites():
    eq = composite(HAND, ["au"], CompositeOptions(length_m=2.0, equal=True))
    lengths = eq.composites["length"].to_numpy()
    assert len(lengths) == round(5.3 / 2.0) and np.allclose(lengths, 5.3 / 3)
    samples = HAND.assign(zone=["X", "X", "Y", "Y"])
    runs = composite(samples, ["au"], CompositeOptions(mode="whole-run", domain="zone")).composites
    assert runs[["from", "to", "domain"]].values.tolist() == [[0.0, 2.0, "X"], [2.0, 5.3, "Y"]]
    assert runs["au"].tolist() == [3.5, pytest.approx((2 * 1.0 + 1.3 * 0.5) / 3.3)]


def test_bench_composites_follow_elevation():
    collars = pd.DataFrame({"hole": ["V", "I"], "x": [0.0, 50.0], "y": [0.0, 0.0], "z": [102.0, 100.0],
                            "depth": [40.0, 40.0]})
    surveys = pd.DataFrame({"hole": ["V", "I"], "survey_depth": [0.0, 0.0], "azimuth": [0.0, 90.0],
                            "dip": [-90.0, -60.0]})
    trace = Desurvey().fit(collars, surveys)
    samples = pd.DataFrame({"hole": ["V"] * 20 + ["I"] * 20, "from": np.tile(np.arange(0.0, 40.0, 2.0), 2),
                            "to": np.tile(np.arange(2.0, 42.0, 2.0), 2), "au": 1.0})
    result = composite(samples, ["au"], CompositeOptions(mode="bench", bench_height_m=5.0, bench_base_m=0.0,
                                                         min_coverage=0.0), trace)
    v = result.composites[result.composites.hole == "V"]
    # vertical hole from z = 102: crossings of 100, 95, ... at depths 2, 7, ...
    assert np.allclose(v["from"].to_numpy()[:4], [0.0, 2.0, 7.0, 12.0], atol=1e-6)
    assert np.allclose(v["bench"].to_numpy()[:3], [102.5, 97.5, 92.5])
    inclined = result.composites[result.composites.hole == "I"]
    along = 5.0 / math.sin(math.radians(60))  # a 5 m bench is 5.77 m along a hole dipping 60
    assert np.allclose(inclined["length"].to_numpy()[:-1], along, atol=1e-4)
    assert (result.check["difference"].abs() < 1e-9).all()


def test_capping_counts_samples_and_metal():
    result = composite(HAND, ["au"], CompositeOptions(length_m=2.0, caps={"au": 5.0}))
    cap = result.summary["caps"][0]
    assert cap["samples_capped"] == 1 and cap["metal_removed"] == pytest.approx(0.5 * 3.0)
    row = result.check.iloc[0]
    assert row["capped_metal"] == pytest.approx(1.5)
    assert row["input_after_cap"] == pytest.approx(row["input_metal"] - 1.5)
    assert rows(result)[0] == (0.0, 2.0, round((1.5 * 2.0 + 0.5 * 5.0) / 2.0, 6))


def test_options_are_checked():
    with pytest.raises(UsageError):
        composite(HAND, ["au"], CompositeOptions(length_m=0.0))
    with pytest.raises(UsageError):
        composite(HAND, ["au"], CompositeOptions(length_m=2.0, domain="zone"))
    with pytest.raises(UsageError):
        composite(HAND, ["au"], CompositeOptions(length_m=2.0, residual="round"))


# ---- property test: random holes, intervals, gaps and domains

@st.composite
def programs(draw):
    n_holes = draw(st.integers(1, 4))
    records = []
    for h in range(n_holes):
        depth = draw(st.floats(0.0, 3.0))
        for _ in range(draw(st.integers(1, 25))):
            depth += draw(st.sampled_from([0.0, 0.0, 0.0, 0.4, 1.7, 3.0]))  # unsampled gaps
            length = draw(st.sampled_from([0.25, 0.5, 1.0, 1.3, 2.0, 3.7]))
            au = draw(st.one_of(st.floats(0.0, 50.0), st.just(float("nan"))))
            records.append({"hole": f"H{h}", "from": depth, "to": depth + length, "au": au,
                            "cu": draw(st.floats(0.0, 5.0)), "rho": draw(st.floats(2.0, 4.0)),
                            "zone": draw(st.sampled_from(["A", "A", "B"]))})
            depth += length
    return pd.DataFrame(records)


@settings(max_examples=60, deadline=None)
@given(samples=programs(), length=st.sampled_from([1.0, 2.0, 2.5, 5.0]),
       rule=st.sampled_from(["merge", "drop", "keep", "equal"]), by_domain=st.booleans(),
       by_density=st.booleans())
def test_metal_is_kept_and_composites_respect_contacts(samples, length, rule, by_domain, by_density):
    options = CompositeOptions(length_m=length, residual="merge" if rule == "equal" else rule,
                               equal=rule == "equal", min_coverage=0.0, domain="zone" if by_domain else None,
                               density="rho" if by_density else None)
    result = composite(samples, ["au", "cu", "rho"], options)
    check = result.check
    scale = 1.0 + check["input_metal"].abs().max()
    # metal per hole and domain: composites + left out = input, to round-off
    assert (check["difference"].abs() <= 1e-9 * scale).all()
    if rule != "drop":
        assert (check["left_out_metal"] == 0).all() and result.left_out.empty
    else:  # what was dropped is exactly what the left-out list holds
        for column in ("au", "cu"):
            listed = result.left_out[f"metal_{column}"].sum()
            assert listed == pytest.approx(check.loc[check.value == column, "left_out_metal"].sum(), abs=1e-9 * scale)
    c = result.composites
    # composites never overlap and never span a contact
    for hole, part in c.groupby("hole"):
        part = part.sort_values("from")
        assert (part["from"].to_numpy()[1:] >= part["to"].to_numpy()[:-1] - 1e-12).all()
        if by_domain:
            s = samples[samples.hole == hole]
            for row in part.to_dict("records"):
                inside = s[(s["to"] > row["from"]) & (s["from"] < row["to"])]
                assert set(inside["zone"]) <= {row["domain"]}
    # the engine equals the slow reference
    reference = composite_reference(samples.to_dict("records"), ["au", "cu", "rho"], length,
                                    "zone" if by_domain else None, options.residual, 0.5, options.equal,
                                    "rho" if by_density else None)
    if rule == "drop":
        reference = [r for r in reference if not r["is_residual"]]
    assert len(reference) == len(c)
    for got, want in zip(c.sort_values(["hole", "from"]).to_dict("records"),
                         sorted(reference, key=lambda r: (r["hole"], r["from"]))):
        assert got["hole"] == want["hole"]
        assert got["from"] == pytest.approx(want["from"], abs=1e-9) and got["to"] == pytest.approx(want["to"], abs=1e-9)
        assert got["sampled"] == pytest.approx(want["coverage"], abs=1e-9)
        for column in ("au", "cu", "rho"):
            if math.isnan(want[column]):
                assert math.isnan(got[column])
            else:
                assert got[column] == pytest.approx(want[column], rel=1e-9, abs=1e-9)
            assert got[f"{column}_sampled"] == pytest.approx(want[f"{column}_sampled"], abs=1e-9)


def test_support_effect_on_a_synthetic_program():
    # published: Clark, Practical Geostatistics, 1979: longer composites have no larger variance
    from synthetic_holes import ProgramSpec, generate_program

    program = generate_program(ProgramSpec(n_along=8, n_lines=6), seed=4)
    samples = program.intervals.rename(columns={"hole_id": "hole"})
    variance = {}
    for length in (1.0, 2.0, 4.0, 8.0):
        result = composite(samples, ["au_gpt"], CompositeOptions(length_m=length, domain="domain"))
        fresh = result.composites[result.composites.domain == "FRESH"]
        variance[length] = fresh["au_gpt"].var()
    assert variance[1.0] >= variance[2.0] >= variance[4.0] >= variance[8.0]
