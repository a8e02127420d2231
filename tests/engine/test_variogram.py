"""The pair engine and the experimental variograms against slow references and outside checks."""

import math
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from engine.errors import UsageError
from engine.pairs import PairIndex
from engine.pairs import _kernels as k
from engine.variogram import (Direction, LagBins, Sets, VolumeGrid, accumulate, experimental_variograms,
                              indicator, measure_from_sums, normal_scores, variogram_table)
from tests.reference.variogram_reference import NAMES, reference_sums

ROOT = Path(__file__).resolve().parents[2]


def holes_program(rng, n_holes=6, per_hole=25, spacing=7.0):
    """Small inclined holes with duplicates, a collinear pair of holes and NaN values."""
    xyz, hole, depth = [], [], []
    for h in range(n_holes):
        start = rng.uniform(0, 40, 3) if h != 1 else xyz[0][0] + np.array([0.0, 0.0, 30.0])
        u = np.array([0.3, 0.2, -1.0]) if h < 2 else rng.normal(size=3) * [1, 1, 3] - [0, 0, 2]
        u /= np.linalg.norm(u)
        for s in range(per_hole):
            xyz.append(start + u * s * 2.0)
            hole.append(h)
            depth.append(s * 2.0)
    xyz = np.array(xyz)
    xyz[5] = xyz[4]  # a duplicate point
    values = rng.lognormal(0, 0.5, len(xyz))
    values[rng.uniform(size=len(xyz)) < 0.1] = np.nan
    return xyz, np.array(hole), np.array(depth), values


ALL_SETS = Sets(
    omni=LagBins(4.0, 8),
    directions=[Direction(0, 90, 20), Direction(45, 10, 30, bandwidth_m=6, vertical_bandwidth_m=4),
                Direction(300, 0, 22.5, bandwidth_m=5)],
    directional_bins=LagBins(5.0, 6, 3.0),
    downhole=LagBins(2.0, 8),
    volume=VolumeGrid((5.0, 5.0, 4.0), (4, 4, 3)),
)


def engine_sums(acc, key, sets):
    stats = acc.stats(0)
    plan = acc.plan
    if key[0] == "omni":
        row = stats[plan.layout[k.L_OMNI_SLOT] + key[2]]
    elif key[0] == "directional":
        row = stats[plan.layout[k.L_DIR_SLOT] + key[1] * (plan.directional_bins.count + 1) + key[2]]
    elif key[0] == "downhole":
        row = stats[plan.layout[k.L_DH_SLOT] + key[2]]
    else:
        raise KeyError(key)
    return row


@pytest.mark.parametrize("pairs", ["all", "across-holes", "same-hole"])
def test_every_set_equals_the_double_loop(pairs):
    # reference library / slow obvious reference: counts exactly, sums to 1e-10
    rng = np.random.default_rng(3)
    xyz, hole, depth, values = holes_program(rng)
    sets = Sets(**{**ALL_SETS.__dict__, "pairs": pairs})
    acc = accumulate(xyz, values, sets, hole=hole, depth=depth)
    want = reference_sums(xyz, values, hole, depth, sets)
    for key, row in want.items():
        if key[0] == "volume":
            continue
        got = engine_sums(acc, key, sets)
        for q, name in enumerate(NAMES):
            assert got[q] == pytest.approx(row[name], abs=1e-10, rel=1e-12), (key, name)
    # and nothing the reference did not find
    for name, slot_start, count, width in (("omni", acc.plan.layout[k.L_OMNI_SLOT], 1, 9),
                                           ("downhole", acc.plan.layout[k.L_DH_SLOT], 1, 9)):
        total = acc.stats(0)[slot_start:slot_start + width, k.COUNT].sum()
        assert total == sum(r["count"] for key, r in want.items() if key[0] == name)
    # the volume, mirrored to the full grid
    gamma, counts = acc.volume(0)
    nx, ny, nz = sets.volume.half_counts
    for key, row in want.items():
        if key[0] == "volume":
            ix, iy, iz = key[1]
            assert counts[iz + nz, iy + ny, ix + nx] == row["count"], key
            assert gamma[iz + nz, iy + ny, ix + nx] == pytest.approx(row["sum_sq"] / (2 * row["count"]), rel=1e-12)
    assert counts.sum() == sum(r["count"] for key, r in want.items() if key[0] == "volume")


def test_cell_search_equals_brute_force_kernel_on_larger_data():
    rng = np.random.default_rng(8)
    xyz = rng.uniform(0, 200, (3000, 3)) * [1, 1, 0.3]
    values = np.c_[rng.normal(size=3000), rng.lognormal(size=3000)]
    sets = Sets(omni=LagBins(10, 6), directions=[Direction(30, 0, 15), Direction(0, 90, 10)],
                directional_bins=LagBins(8, 7), volume=VolumeGrid((10, 10, 5), (5, 5, 3)))
    fast = accumulate(xyz, values, sets)
    slow = accumulate(xyz, values, sets, brute_force=True)
    assert np.array_equal(fast.sums[:, k.COUNT], slow.sums[:, k.COUNT])
    assert np.allclose(fast.sums, slow.sums, rtol=1e-11, atol=1e-9)
    assert fast.accepted == slow.accepted and fast.candidates < slow.candidates


def test_direction_lookup_lists_every_set_that_can_take_a_pair():
    # the cube-map lookup only prunes: every (direction, set) the exact cone test accepts must be
    # listed for the direction's cell, for narrow and wide tolerances, axes and cube-edge directions
    rng = np.random.default_rng(11)
    count = 300
    golden = math.pi * (3 - math.sqrt(5))  # a Fibonacci set of directions on the sphere
    zs = 1 - (np.arange(count) + 0.5) / count
    u = np.c_[np.sqrt(1 - zs**2) * np.cos(golden * np.arange(count)),
              np.sqrt(1 - zs**2) * np.sin(golden * np.arange(count)), zs]
    tolerance = rng.choice([0.5, 3.0, 10.0, 45.0, 89.0, 90.0], count)
    cos_tol = np.cos(np.radians(tolerance))
    lookup = k.direction_lookup(u, cos_tol)
    e = np.concatenate([rng.normal(size=(20000, 3)), np.eye(3), -np.eye(3), [[1, 1, 1], [1, -1, 0], [0, 1, -1]],
                        u[:50], u[:50] * -1.0])
    for vec in e:
        cell = k._direction_cell(*vec)
        listed = set(lookup[lookup[cell]:lookup[cell + 1]].tolist())
        d = np.linalg.norm(vec)
        accepted = np.flatnonzero(np.abs(u @ vec) >= d * cos_tol)
        assert set(accepted.tolist()) <= listed, vec
    # and it does prune: with 5 degree cones each cell lists a small share of the 300 sets
    narrow = k.direction_lookup(u, np.full(count, math.cos(math.radians(5.0))))
    assert np.diff(narrow[:6 * k.LOOKUP_SIDE**2 + 1]).mean() < count / 10


def test_hole_weights_equal_a_weighted_double_loop():
    # the hole-wise bootstrap's weights: a pair of two holes counts w_a w_b, a pair within a hole w_a;
    # a weight of zero is the same as leaving the hole out (slow obvious reference: tests/reference)
    rng = np.random.default_rng(5)
    xyz, hole, depth, values = holes_program(rng)
    w_hole = np.array([2.0, 0.0, 1.0, 3.0, 1.0, 2.0])
    weights = w_hole[hole]
    sets = Sets(omni=LagBins(4.0, 8), downhole=LagBins(2.0, 8))
    acc = accumulate(xyz, values, sets, hole=hole, depth=depth, weights=weights)
    want = reference_sums(xyz, values, hole, depth, sets, weights=weights)
    checked = 0
    for key, row in want.items():
        got = engine_sums(acc, key, sets)
        assert got[k.COUNT] == pytest.approx(row["count"], abs=1e-12), key
        assert got[k.SUM_SQ] == pytest.approx(row["sum_sq"], rel=1e-12, abs=1e-10), key
        checked += row["count"] > 0
    assert checked > 10
    for name in ("omni", "downhole"):  # and nothing the reference did not find
        first = acc.plan.layout[k.L_OMNI_SLOT if name == "omni" else k.L_DH_SLOT]
        total = acc.stats(0)[first:first + 9, k.COUNT].sum()
        assert total == pytest.approx(sum(r["count"] for key, r in want.items() if key[0] == name), abs=1e-9)
    keep = hole != 1
    left_out = accumulate(xyz[keep], values[keep], sets, hole=hole[keep], depth=depth[keep], weights=weights[keep])
    assert np.allclose(acc.sums, left_out.sums, rtol=1e-12, atol=1e-10)
    ones = accumulate(xyz, values, sets, hole=hole, depth=depth, weights=np.ones(len(xyz)))
    plain = accumulate(xyz, values, sets, hole=hole, depth=depth)
    assert np.allclose(ones.sums, plain.sums, rtol=1e-12, atol=1e-10)


def test_replicate_pass_equals_one_weighted_pass_per_replicate():
    # the bootstrap's one-pass form: every replicate's counts and squared-difference sums equal a
    # separate weighted pass with that replicate's hole weights
    rng = np.random.default_rng(9)
    xyz, hole, depth, values = holes_program(rng)
    sets = Sets(directions=ALL_SETS.directions, directional_bins=ALL_SETS.directional_bins,
                downhole=ALL_SETS.downhole, volume=ALL_SETS.volume)
    draws = rng.multinomial(6, np.full(6, 1 / 6), size=4).T.astype(float)  # (holes, replicates)
    w = draws[hole]
    plan = sets.plan()
    index = PairIndex(xyz, hole, depth, max_distance_m=plan.max_distance_m)
    both = index.run_replicates(values, plan, w)
    for r in range(w.shape[1]):
        one = accumulate(xyz, values, sets, hole=hole, depth=depth, weights=w[:, r], index=index).sums
        assert np.allclose(both[:, 0, r], one[:, k.COUNT], rtol=0, atol=1e-9)
        assert np.allclose(both[:, 1, r], one[:, k.SUM_SQ], rtol=1e-12, atol=1e-9)


def test_one_hole_empty_and_single_point():
    xyz = np.c_[np.zeros(10), np.zeros(10), -np.arange(10.0)]
    acc = accumulate(xyz, np.arange(10.0), Sets(omni=LagBins(1.0, 3), downhole=LagBins(1.0, 3)),
                     hole=np.zeros(10), depth=np.arange(10.0))
    t = variogram_table(acc)
    assert t[t.set == "omni"]["pairs"].tolist() == [9, 8, 7]
    assert t[t.set == "downhole"]["gamma"].tolist() == [0.5, 2.0, 4.5]
    one = accumulate(np.zeros((1, 3)), [1.0], Sets(omni=LagBins(1.0, 2)))
    assert one.sums[:, k.COUNT].sum() == 0
    none = accumulate(np.zeros((0, 3)), np.zeros(0), Sets(omni=LagBins(1.0, 2)))
    assert none.sums.sum() == 0


def test_zero_lag_pairs_and_bin_edges():
    # duplicates fall in bin 0 (not reported as a lag); a pair on the edge between two bins
    # belongs to the lower one; down-hole separations that are multiples of the lag are exact
    xyz = np.array([[0, 0, 0], [0, 0, 0], [3.0, 0, 0], [6.0, 0, 0]])
    acc = accumulate(xyz, [1.0, 2.0, 3.0, 5.0], Sets(omni=LagBins(2.0, 3)))
    counts = acc.stats(0)[:4, k.COUNT].tolist()
    # lag 2, tolerance 1: d = 0 (the duplicate) -> bin 0; d = 3 (three pairs, on the edge between
    # bins 1 and 2) -> bin 1; d = 6 (two pairs, the centre of bin 3) -> bin 3
    assert counts == [1, 3, 0, 2]
    depth = np.arange(0.0, 20.0, 2.0)
    xyz = np.c_[np.zeros(10), np.zeros(10), -depth]
    acc = accumulate(xyz, np.arange(10.0), Sets(downhole=LagBins(4.0, 4)), hole=np.zeros(10), depth=depth)
    t = variogram_table(acc)
    # separation 2m has 10 - m pairs; 2, 6, 10, 14 and 18 sit on edges and go to the lower bin:
    # bin 1 holds 4 and 6, bin 2 holds 8 and 10, bin 3 holds 12 and 14, bin 4 holds 16 and 18
    assert t["pairs"].tolist() == [8 + 7, 6 + 5, 4 + 3, 2 + 1]


# ---- outside checks (CHECKS.md, "Experimental variograms")

def test_published_1d_copper_series():
    # data published in Dutter, Geostatistics lecture notes, TU Wien, 2003; gamma computed by hand
    grades = np.array([28, 25, 27, 25, 21, 25, 11, 16, 11, 17, 27, 26, 25, 26, 21.0])
    xyz = np.c_[np.arange(15) * 50.0, np.zeros(15), np.zeros(15)]
    t = experimental_variograms(xyz, grades, Sets(omni=LagBins(50.0, 4)))
    assert t["pairs"].tolist() == [14, 13, 12, 11]
    assert t["gamma"].round(6).tolist() == [16.392857, 22.153846, 38.25, 55.409091]


def test_linear_trend():
    # analytic: z = a x along a line gives gamma(h) = a^2 h^2 / 2 exactly
    x = np.arange(0.0, 50.0)
    t = experimental_variograms(np.c_[x, 0 * x, 0 * x], 2.5 * x, Sets(omni=LagBins(1.0, 10)))
    gamma = dict(zip(t["lag"], t["gamma"]))
    assert (gamma[1.0], gamma[3.0], gamma[10.0]) == pytest.approx((3.125, 28.125, 312.5), rel=1e-12)


def test_one_class_holding_every_pair_is_the_sample_variance():
    # analytic: one lag class with every pair gives the variance with ddof = 1
    rng = np.random.default_rng(1)
    xyz = rng.uniform(0, 10, (300, 3))
    z = rng.normal(size=300)
    t = experimental_variograms(xyz, z, Sets(omni=LagBins(10.0, 1, 10.0)))
    assert t["pairs"].iloc[0] == 300 * 299 / 2
    assert t["gamma"].iloc[0] == pytest.approx(z.var(ddof=1), rel=1e-12)


def test_independent_noise_is_flat():
    # analytic: gamma ~ s^2 at every lag, within 5 s^2 sqrt(2 / N)
    rng = np.random.default_rng(2)
    n = 20000
    xyz = np.c_[rng.uniform(0, 1000, n), rng.uniform(0, 1000, n), np.zeros(n)]
    z = rng.normal(0, 2.0, n)
    t = experimental_variograms(xyz, z, Sets(omni=LagBins(10.0, 5)))
    assert np.all(np.abs(t["gamma"] - 4.0) < 5 * 4.0 * math.sqrt(2 / n))


def test_reverse_direction_and_volume_symmetry():
    # analytic: gamma(h) = gamma(-h); azimuth A equals A + 180; cell (i,j,k) equals (-i,-j,-k)
    rng = np.random.default_rng(5)
    xyz = rng.uniform(0, 100, (1500, 3)) * [1, 1, 0.5]
    z = rng.normal(size=1500) + xyz[:, 0] / 30
    sets = Sets(directions=[Direction(70, 20, 15), Direction(250, -20, 15)], directional_bins=LagBins(8, 6),
                volume=VolumeGrid((8, 8, 6), (5, 5, 3)))
    acc = accumulate(xyz, z, sets)
    t = variogram_table(acc)
    a, b = t[t.direction == "70/20"], t[t.direction == "250/-20"]
    assert a["pairs"].tolist() == b["pairs"].tolist()
    assert np.allclose(a["gamma"], b["gamma"], rtol=1e-12)
    assert np.allclose(a["mean_head"], b["mean_tail"], rtol=1e-12)  # head and tail change places
    gamma, counts = acc.volume(0)
    assert np.array_equal(counts, counts[::-1, ::-1, ::-1])
    assert np.allclose(np.nan_to_num(gamma), np.nan_to_num(gamma[::-1, ::-1, ::-1]), rtol=1e-12)


def test_regular_grid_pair_counts():
    # analytic: pairs at lag vector (i,j,k) on an nx x ny x nz grid = (nx-|i|)(ny-|j|)(nz-|k|)
    nx, ny, nz = 9, 7, 5
    g = np.stack(np.meshgrid(np.arange(nx), np.arange(ny), np.arange(nz), indexing="ij"), -1).reshape(-1, 3) * 2.0
    acc = accumulate(g, np.ones(len(g)), Sets(volume=VolumeGrid((2.0, 2.0, 2.0), (4, 3, 2))))
    _, counts = acc.volume(0)
    for iz in range(-2, 3):
        for iy in range(-3, 4):
            for ix in range(-4, 5):
                expected = (nx - abs(ix)) * (ny - abs(iy)) * (nz - abs(iz))
                if (ix, iy, iz) == (0, 0, 0):
                    expected = 0  # a point is not paired with itself
                assert counts[iz + 2, iy + 3, ix + 4] == expected, (ix, iy, iz)


def test_matplotlib_elevation_grid_against_numpy():
    # reference library: matplotlib's bundled jacksboro_fault_dem.npz; the engine equals a
    # brute-force numpy variogram along rows, columns and diagonals to 1e-10
    cbook = pytest.importorskip("matplotlib.cbook")
    data = cbook.get_sample_data("jacksboro_fault_dem.npz")  # an NpzFile
    elevation = np.asarray(data["elevation"], dtype=np.float64)[:60, :60]
    ny, nx = elevation.shape
    yy, xx = np.mgrid[0:ny, 0:nx]
    xyz = np.c_[xx.ravel() * 1.0, yy.ravel() * 1.0, np.zeros(xx.size)]
    z = elevation.ravel()
    sets = Sets(directions=[Direction(90, 0, 1e-6), Direction(0, 0, 1e-6)], directional_bins=LagBins(1.0, 6, 0.05))
    t = variogram_table(accumulate(xyz, z, sets))
    for direction, (sx, sy) in (("90/0", (1, 0)), ("0/0", (0, 1))):
        got = t[t.direction == direction]
        for lag in range(1, 7):
            diff = elevation[lag * sy:, lag * sx:] - elevation[:ny - lag * sy, :nx - lag * sx]
            row = got[got.lag == lag].iloc[0]
            assert row["pairs"] == diff.size
            assert row["gamma"] == pytest.approx(0.5 * np.mean(diff**2), rel=1e-10)
    # the diagonal (north-east): step s is s sqrt(2) long, so its lags are multiples of sqrt(2)
    diagonal = variogram_table(accumulate(xyz, z, Sets(directions=[Direction(45, 0, 1e-6)],
                                                       directional_bins=LagBins(math.sqrt(2), 4, 0.05))))
    assert len(diagonal) == 4
    for step in range(1, 5):
        diff = elevation[step:, step:] - elevation[:-step, :-step]
        row = diagonal.iloc[step - 1]
        assert row["pairs"] == diff.size, step
        assert row["gamma"] == pytest.approx(0.5 * np.mean(diff**2), rel=1e-10), step


def test_measures_from_sums():
    h = np.array([1.0, 2.0, 4.0, 3.0])
    t = np.array([2.0, 2.5, 3.0, 1.0])
    s = np.zeros((1, k.N_STATS))
    s[0] = [4, 0, h.sum(), t.sum(), (h**2).sum(), (t**2).sum(), ((h - t) ** 2).sum(), np.abs(h - t).sum(),
            (h * t).sum(), (((h - t) / ((h + t) / 2)) ** 2).sum()]
    assert measure_from_sums(s, "semivariogram")[0] == pytest.approx(((h - t) ** 2).mean() / 2)
    assert measure_from_sums(s, "madogram")[0] == pytest.approx(np.abs(h - t).mean() / 2)
    cov = (h * t).mean() - h.mean() * t.mean()
    assert measure_from_sums(s, "covariance")[0] == pytest.approx(cov)
    assert measure_from_sums(s, "correlogram")[0] == pytest.approx(np.corrcoef(h, t)[0, 1])
    both = np.r_[h, t]
    assert measure_from_sums(s, "standardized-by-lag")[0] == pytest.approx(((h - t) ** 2).mean() / 2 / both.var())
    # the trade's standardized variogram divides by the domain's variance: its sill is one (review finding: it
    # divided by each lag's own variance)
    assert measure_from_sums(s, "standardized", variance=2.5)[0] == pytest.approx(((h - t) ** 2).mean() / 2 / 2.5)
    with pytest.raises(UsageError):
        measure_from_sums(s, "standardized")
    assert measure_from_sums(s, "general-relative")[0] == pytest.approx(
        ((h - t) ** 2).mean() / 2 / ((h.mean() + t.mean()) / 2) ** 2)
    assert measure_from_sums(s, "pairwise-relative")[0] == pytest.approx(
        (((h - t) / ((h + t) / 2)) ** 2).mean() / 2)


def test_pairwise_relative_leaves_out_pairs_of_two_zeros():
    # by its definition (common practice): the mean over pairs of ((h - t) / ((h + t) / 2))^2 / 2; a pair of two
    # zeros has no relative difference and is not a pair of this measure (review finding: it was counted as 0)
    h = np.array([1.0, 0.0, 2.0, 0.0])
    t = np.array([3.0, 0.0, 1.0, 4.0])
    s = np.zeros((1, k.N_STATS))
    kept = (h + t) > 0
    s[0, k.COUNT] = 4
    s[0, k.SUM_PR] = (((h - t)[kept] / ((h + t)[kept] / 2)) ** 2).sum()
    truth = (((h - t)[kept] / ((h + t)[kept] / 2)) ** 2).mean() / 2
    assert measure_from_sums(s, "pairwise-relative", zero_pairs=np.array([1.0]))[0] == pytest.approx(truth)


def test_relative_measures_refuse_negative_values(tmp_path, capsys):
    import pandas as pd

    from engine.cli import main

    rng = np.random.default_rng(3)
    frame = pd.DataFrame({"hole": np.repeat(["A", "B", "C"], 20), "from": np.tile(np.arange(20.0), 3),
                          "to": np.tile(np.arange(1.0, 21.0), 3), "x": np.repeat([0.0, 10.0, 20.0], 20),
                          "y": 0.0, "z": -np.tile(np.arange(20.0), 3), "au": rng.normal(0.0, 1.0, 60)})
    frame.to_csv(tmp_path / "c.csv", index=False)
    code = main(["variogram", "--composites", str(tmp_path / "c.csv"), "--value", "au", "--measure",
                 "pairwise-relative", "--out", str(tmp_path / "o")])
    assert code == 2 and "below zero" in capsys.readouterr().err


def test_the_pairwise_relative_command_counts_no_pair_of_two_zeros(tmp_path):
    # the command's zero pass against a direct count: grades with zeros along one line
    import pandas as pd

    from engine.cli import main

    x = np.arange(40.0)
    au = np.where(np.arange(40) % 3 == 0, 0.0, 1.0 + (np.arange(40) % 5))
    frame = pd.DataFrame({"hole": [f"H{i}" for i in range(40)], "from": 0.0, "to": 1.0, "x": x, "y": 0.0,
                          "z": 0.0, "au": au})
    frame.to_csv(tmp_path / "c.csv", index=False)
    assert main(["variogram", "--composites", str(tmp_path / "c.csv"), "--value", "au", "--measure",
                 "pairwise-relative", "--omni", "--lag", "3", "--lags", "2", "--lag-tolerance", "0.5",
                 "--out", str(tmp_path / "o")]) == 0
    table = pd.read_csv(tmp_path / "o" / "variograms.csv")
    row = table[(table["set"] == "omni") & (table["lag"] == 3.0)].iloc[0]
    h, t = au[:-3], au[3:]
    kept = (h + t) > 0
    truth = (((h - t)[kept] / ((h + t)[kept] / 2)) ** 2).mean() / 2
    assert row["gamma"] == pytest.approx(truth, rel=1e-9)


def test_cross_semivariogram_and_transforms():
    rng = np.random.default_rng(6)
    xyz = np.c_[np.arange(200.0), np.zeros(200), np.zeros(200)]
    u = rng.normal(size=200)
    v = 0.5 * u + rng.normal(size=200)
    acc = accumulate(xyz, np.c_[u, v], Sets(omni=LagBins(1.0, 3)))
    count, sum_dd = acc.cross(0, 1)
    for lag in (1, 2, 3):
        du, dv = u[lag:] - u[:-lag], v[lag:] - v[:-lag]
        assert count[lag] == 200 - lag
        # the head is the southern/western point: here the one with larger x is the tail
        assert sum_dd[lag] / (2 * count[lag]) == pytest.approx(np.mean(du * dv) / 2, rel=1e-12)
    scores = normal_scores(np.array([3.0, 1.0, np.nan, 2.0]))
    assert np.isnan(scores[2]) and scores[1] < scores[3] < scores[0] and abs(scores[3]) < 1e-12
    assert indicator(np.array([0.5, 2.0, np.nan]), 1.0).tolist()[:2] == [1.0, 0.0]


def python_in_subprocess(code: str, **environment) -> str:
    """Run ``code`` in a fresh interpreter with these environment variables; its standard output."""
    result = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=ROOT,
                            env=dict(os.environ, **environment))
    assert result.returncode == 0, result.stderr
    return result.stdout


def test_pair_counts_identical_with_one_and_two_threads():
    # in a fresh interpreter allowed two threads whatever the machine has (numba clamps a thread count
    # to NUMBA_NUM_THREADS, which follows the cores: on a one-core runner 2 would silently become 1)
    code = (
        "import numpy as np, numba\n"
        "from engine._jit import threads\n"
        "from engine.pairs import _kernels as k\n"
        "from engine.variogram import accumulate\n"
        "from tests.engine.test_variogram import ALL_SETS\n"
        "rng = np.random.default_rng(7)\n"
        "xyz = rng.uniform(0, 300, (20000, 3)) * [1, 1, 0.2]\n"
        "z = rng.normal(size=20000)\n"
        "with threads(2) as used:\n"
        "    assert used == 2 and numba.get_num_threads() == 2, used\n"
        "one = accumulate(xyz, z, ALL_SETS, threads=1)\n"
        "two = accumulate(xyz, z, ALL_SETS, threads=2)\n"
        "assert one.accepted > 1000000, one.accepted\n"
        "assert np.array_equal(one.sums[:, k.COUNT], two.sums[:, k.COUNT])\n"
        "assert np.allclose(one.sums, two.sums, rtol=1e-10, atol=1e-9)  # sums in another order: round-off\n"
        "print('same')\n"
    )
    assert python_in_subprocess(code, NUMBA_NUM_THREADS="2").strip() == "same"


def test_kernel_runs_with_jit_disabled():
    code = (
        "import numpy as np\n"
        "from engine.variogram import Sets, LagBins, Direction, VolumeGrid, experimental_variograms\n"
        "g = np.array([28, 25, 27, 25, 21, 25, 11, 16, 11, 17, 27, 26, 25, 26, 21.0])\n"
        "xyz = np.c_[np.arange(15) * 50.0, np.zeros(15), np.zeros(15)]\n"
        "s = Sets(omni=LagBins(50.0, 4), directions=[Direction(90, 0, 10)],\n"
        "         volume=VolumeGrid((50, 50, 50), (2, 1, 1)))\n"
        "t = experimental_variograms(xyz, g, s)\n"
        "print(' '.join(f'{v:.6f}' for v in t[t.set == 'omni']['gamma']))\n"
    )
    assert python_in_subprocess(code, NUMBA_DISABLE_JIT="1").split() == ["16.392857", "22.153846", "38.250000",
                                                                          "55.409091"]


def test_index_is_reused_across_variables_and_sets():
    rng = np.random.default_rng(9)
    xyz = rng.uniform(0, 100, (2000, 3))
    index = PairIndex(xyz, max_distance_m=60.0)
    a = accumulate(xyz, rng.normal(size=2000), Sets(omni=LagBins(10, 5)), index=index)
    b = accumulate(xyz, rng.normal(size=2000), Sets(directions=[Direction(0, 0)], directional_bins=LagBins(10, 5)),
                   index=index)
    assert a.accepted == b.accepted
    with pytest.raises(UsageError, match="beyond the index's search distance"):
        accumulate(xyz, np.zeros(2000), Sets(omni=LagBins(10, 10)), index=index)  # reaches beyond 60 m


def test_pair_list_of_a_bin_equals_the_double_loop_and_samples_fixed_pairs():
    from engine.variogram import bin_pairs

    rng = np.random.default_rng(12)
    xyz, hole, depth, values = holes_program(rng)
    values = np.nan_to_num(values, nan=1.0)
    sets = Sets(omni=LagBins(4.0, 8), directions=[Direction(45, 10, 30, bandwidth_m=6)],
                directional_bins=LagBins(5.0, 6))
    every = bin_pairs(xyz, values, sets, "omni", 3, max_pairs=100000, hole=hole, depth=depth)
    d = np.linalg.norm(xyz[:, None] - xyz[None], axis=2)
    ii, jj = np.nonzero(np.triu((d > 10.0) & (d <= 14.0), 1))  # bin 3: 12 - 2 < d <= 12 + 2
    assert sorted(zip(np.minimum(every["i"], every["j"]), np.maximum(every["i"], every["j"]))) == sorted(zip(ii, jj))
    assert every["pairs_in_bin"] == len(ii)
    # the values returned are those of the two ends, head first
    assert np.allclose(np.sort(np.c_[every["head"], every["tail"]], axis=1),
                       np.sort(np.c_[values[every["i"]], values[every["j"]]], axis=1))
    some = bin_pairs(xyz, values, sets, "omni", 3, max_pairs=50, hole=hole, depth=depth)
    again = bin_pairs(xyz, values, sets, "omni", 3, max_pairs=50, hole=hole, depth=depth)
    assert 0 < len(some["i"]) <= 50 and np.array_equal(some["i"], again["i"])
    directional = bin_pairs(xyz, values, sets, "directional", 2, direction=0, hole=hole, depth=depth)
    acc = accumulate(xyz, values, sets, hole=hole, depth=depth)
    row = variogram_table(acc).query("set == 'directional' and lag == 10")
    assert len(directional["i"]) == row["pairs"].iloc[0]
    assert np.mean((directional["head"] - directional["tail"]) ** 2) / 2 == pytest.approx(row["gamma"].iloc[0])


def test_search_cap_empties_volume_corners_only():
    rng = np.random.default_rng(13)
    xyz = rng.uniform(0, 60, (1500, 3))
    z = rng.normal(size=1500)
    volume = VolumeGrid((5.0, 5.0, 5.0), (4, 4, 4))
    full = accumulate(xyz, z, Sets(omni=LagBins(5.0, 4), volume=volume))
    capped = accumulate(xyz, z, Sets(omni=LagBins(5.0, 4), volume=volume, max_distance_m=22.5))
    # the lag bins do not change (sums in another order: round-off)
    assert np.array_equal(full.stats(0)[:5, k.COUNT], capped.stats(0)[:5, k.COUNT])
    assert np.allclose(full.stats(0)[:5], capped.stats(0)[:5], rtol=1e-12)
    _, counts_full = full.volume(0)
    _, counts_capped = capped.volume(0)
    assert counts_capped.sum() < counts_full.sum()
    assert counts_capped[4, 4, 4 + 2] == counts_full[4, 4, 4 + 2]  # cells near zero keep every pair
    with pytest.raises(UsageError, match="search cap"):
        Sets(omni=LagBins(5.0, 4), max_distance_m=10.0).plan()


def test_dask_backend_equals_the_local_run():
    pytest.importorskip("distributed")
    rng = np.random.default_rng(14)
    xyz, hole, depth, values = holes_program(rng, n_holes=12)
    local = accumulate(xyz, values, ALL_SETS, hole=hole, depth=depth)
    remote = accumulate(xyz, values, ALL_SETS, hole=hole, depth=depth, dask="local:2")
    assert np.array_equal(local.sums[:, k.COUNT], remote.sums[:, k.COUNT])
    assert np.allclose(local.sums, remote.sums, rtol=1e-9, atol=1e-9)
    assert local.accepted == remote.accepted
