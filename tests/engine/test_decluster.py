"""Cell declustering (engine/decluster.py) against CHECKS.md: weights proportional to 1 / (samples in
the sample's cell), averaged over cell origins, all equal on a regular grid (published: Journel,
Math. Geology 15(3), 1983; Deutsch, Computers & Geosciences 15(3), 1989). Invented data with a known
truth for the rest."""

import numpy as np
import pytest

from engine.decluster import cell_weights, decluster, weighted_stats


def test_weights_on_a_regular_grid_are_all_equal():
    g = np.arange(0.0, 100.0, 10.0)
    xyz = np.stack(np.meshgrid(g, g, g[:4], indexing="ij"), axis=-1).reshape(-1, 3)
    for cell in (10.0, 20.0, 40.0):
        w = cell_weights(xyz, cell)
        assert w.mean() == pytest.approx(1.0)
        # at a cell of a whole number of spacings every cell holds as many points, save the edges
        assert np.allclose(w, 1.0) if cell == 10.0 else np.median(w) == pytest.approx(1.0, rel=0.25)


def test_a_point_weighs_one_over_its_cell_count():
    # one origin: two points share a cell, a third is alone; weights 1/2, 1/2, 1, scaled to mean 1
    xyz = np.array([[0.0, 0.0, 0.0], [0.1, 0.0, 0.0], [5.0, 0.0, 0.0]])
    w = cell_weights(xyz, 1.0, origins=1)
    assert w.tolist() == pytest.approx([0.75, 0.75, 1.5])


def test_equal_weights_give_numpys_statistics():
    v = np.random.default_rng(1).lognormal(size=200)
    mean, var = weighted_stats(v, np.ones(200))
    assert mean == pytest.approx(v.mean()) and var == pytest.approx(v.var(ddof=1))


def _field(x, y, z):
    """A rich zone about (125, 125) on a background of 1 (invented)."""
    return 1.0 + 4.0 * np.exp(-((x - 125.0) ** 2 + (y - 125.0) ** 2) / (2 * 60.0 ** 2)) + 0.0 * z


def _holes(spacing, x0, x1, y0, y1, first=0):
    """Vertical holes on a square grid, a composite every 2 m to 100 m: positions and hole numbers."""
    xs, ys = np.meshgrid(np.arange(x0, x1, spacing), np.arange(y0, y1, spacing), indexing="ij")
    z = -np.arange(1.0, 100.0, 2.0)
    xyz = np.array([(x, y, d) for x, y in zip(xs.ravel(), ys.ravel()) for d in z])
    return xyz, first + np.repeat(np.arange(xs.size), len(z))


def test_infill_in_a_rich_zone_is_declustered_towards_the_true_mean():
    rng = np.random.default_rng(3)
    regular, h1 = _holes(50.0, 0.0, 500.0, 0.0, 500.0)
    infill, h2 = _holes(12.5, 62.5, 187.5, 62.5, 187.5, first=1000)
    xyz, hole = np.r_[regular, infill], np.r_[h1, h2]
    values = _field(*xyz.T) + rng.normal(0.0, 0.3, len(xyz))
    # the field's own mean over the drilled volume (a dense grid: the truth the composites estimate)
    g = np.linspace(0.0, 450.0, 451)
    true_mean = float(_field(*np.meshgrid(g, g, [0.0], indexing="ij")).mean())
    d = decluster(xyz, values, hole)
    assert abs(d.mean - true_mean) < abs(d.naive_mean - true_mean)
    assert abs(d.mean - true_mean) < 0.25 * abs(d.naive_mean - true_mean)  # most of the bias removed
    assert "minimum" in d.rule and d.weights[len(regular):].mean() < d.weights[:len(regular)].mean()


def test_an_evenly_drilled_program_is_left_unchanged_within_one_percent():
    rng = np.random.default_rng(5)
    xyz, hole = _holes(50.0, 0.0, 500.0, 0.0, 500.0)
    values = _field(*xyz.T) + rng.normal(0.0, 0.3, len(xyz))
    d = decluster(xyz, values, hole)
    assert d.mean == pytest.approx(d.naive_mean, rel=0.01)
    assert d.variance == pytest.approx(d.naive_variance, rel=0.01)
