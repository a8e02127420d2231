"""The 3D scene: meshes first (one tube per hole, the ellipsoid's semi-axes, each pair segment's two
composites), then the images (not blank) and the standalone HTML in headless Chromium.

Data: a small invented Tarn Hill program; the model is written by hand (Model.to_json) so that the
ellipsoid's axes and ranges are known exactly.
"""

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from engine.model import Model, Structure
from engine.orientation import trend_plunge
from engine.variogram import Direction, LagBins, Sets, bin_pairs
from synthetic_holes.program import generate_program
from synthetic_holes.recovery import composites_of, recovery_spec
from tests.viewer.browsing import Proxy, browser_or_skip, non_blank
from viewer import scene as sc
from viewer.browser import screenshot

ROOT = Path(__file__).resolve().parents[2]


def oblique_axes():
    from scipy.spatial.transform import Rotation

    axes = Rotation.from_euler("zyx", [35.0, -20.0, 15.0], degrees=True).as_matrix().T
    axes[2] = np.cross(axes[0], axes[1])
    return axes


@pytest.fixture(scope="module")
def data():
    program = generate_program(recovery_spec(n_along=8, n_lines=6, hole_length_m=150.0), seed=3)
    xyz, values, hole, depth, frame = composites_of(program)
    model = Model(0.1, [Structure("spherical", 0.5, (40.0, 30.0, 10.0)), Structure("spherical", 0.4,
                                                                                   (110.0, 70.0, 25.0))],
                  oblique_axes())
    data = {"schema": "drillaxis.model/1", "variable": "au_gpt", "domain": None, "variance": 1.0,
            "pairs_used": 0, **model.to_json(), "fit": {"lag_m": 10.0},
            "bootstrap": {"axis_angle_deg": {"major": {"median": 4.0, "p95": 9.0}}}}
    trend, plunge = trend_plunge(model.axes[0])
    sets = Sets(directions=[Direction(trend, plunge, 15.0)], directional_bins=LagBins(10.0, 12))
    pairs = bin_pairs(xyz, values, sets, "directional", 5, 0, max_pairs=300, hole=hole, depth=depth)
    return xyz, values, hole, depth, frame, data, model, pairs


@pytest.fixture(scope="module")
def scene(data):
    xyz, values, hole, depth, _, model_json, _, pairs = data
    volume = {"gamma": np.ones((9, 11, 11)), "pairs": np.full((9, 11, 11), 100.0), "cell_m": (10.0, 10.0, 5.0),
              "half_counts": (5, 5, 4)}
    volume["gamma"][4, 5, 5] = 0.2
    volume["gamma"][3:6, 4:7, 3:8] = np.minimum(volume["gamma"][3:6, 4:7, 3:8], 0.5)
    return sc.build_scene(xyz, hole, depth, values, model_json, "au_gpt", pairs, volume, per_structure=True)


def test_one_tube_per_hole(data, scene):
    xyz, _, hole, _, _, _, _, _ = data
    tube = scene.blocks["traces"]
    assert np.array_equal(np.unique(tube.cell_data["hole"]), np.unique(hole))
    radius = float(np.max(np.ptp(xyz, axis=0))) / 350
    for k in np.unique(hole)[:10]:
        part = tube.extract_cells(np.flatnonzero(tube.cell_data["hole"] == k))
        lo, hi = np.asarray(part.bounds[0::2]), np.asarray(part.bounds[1::2])
        mine = xyz[hole == k]
        assert (mine.min(axis=0) >= lo - 1e-6).all() and (mine.max(axis=0) <= hi + 1e-6).all()
        assert (hi - mine.max(axis=0) <= 1.01 * radius + 1e-6).all()  # the tube hugs its own hole


def test_the_ellipsoid_semi_axes_are_the_ranges_along_the_model_axes(data, scene):
    _, _, _, _, _, _, model, _ = data
    surface = np.asarray(scene.blocks["ellipsoid"].points) - scene.centre
    ranges = np.array([110.0, 70.0, 25.0])
    assert np.allclose(scene.ranges, ranges, atol=1e-12)
    for a in range(3):
        assert abs(float((surface @ model.axes[a]).max()) - ranges[a]) < 1e-6
        assert abs(float((surface @ model.axes[a]).min()) + ranges[a]) < 1e-6
    # every point lies on the ellipsoid (analytic: sum of (x_k / r_k)^2 = 1 in the model's frame)
    assert np.allclose((((surface @ model.axes.T) / ranges) ** 2).sum(axis=1), 1.0, atol=1e-9)
    # the per-structure ellipsoids have their own ranges
    first = np.asarray(scene.blocks["ellipsoid_structure_1"].points) - scene.centre
    assert abs(float((first @ model.axes[0]).max()) - 40.0) < 1e-6
    # the drawn axes run from -r to +r along each model axis (model.json may take either sense)
    ends = np.asarray(scene.blocks["axes"].points) - scene.centre
    for a in range(3):
        assert abs(abs(float(scene.axes[a] @ model.axes[a])) - 1.0) < 1e-12
        assert np.allclose(ends[2 * a + 1], ranges[a] * scene.axes[a], atol=1e-9)
        assert np.allclose(ends[2 * a], -ranges[a] * scene.axes[a], atol=1e-9)


def test_each_pair_segment_joins_its_two_composites(data, scene):
    xyz, values, _, _, _, _, model, pairs = data
    segments = scene.blocks["pairs"]
    points = np.asarray(segments.points)
    assert segments.n_cells == len(pairs["i"]) > 50
    for c in range(segments.n_cells):
        ids = segments.get_cell(c).point_ids
        i, j = int(segments.cell_data["i"][c]), int(segments.cell_data["j"][c])
        assert np.allclose(points[ids[0]], xyz[i]) and np.allclose(points[ids[1]], xyz[j])
        assert segments.cell_data["squared_difference"][c] == pytest.approx((values[i] - values[j]) ** 2)
        h = xyz[j] - xyz[i]
        d = float(np.linalg.norm(h))
        assert 45.0 < d <= 55.0  # lag bin 5 of 10 m: |d - 50| <= 5
        angle = np.degrees(np.arccos(min(1.0, abs(float(h @ model.axes[0])) / d)))
        assert angle <= 15.0 + 1e-9


def test_bootstrap_cone_and_volume_isosurfaces(scene):
    cone = np.asarray(scene.blocks["major_axis_bootstrap"].points) - scene.centre
    along = cone @ scene.axes[0]
    off = np.linalg.norm(cone - along[:, None] * scene.axes[0], axis=1)
    rim = np.abs(along) > 1.0  # all but the apex (float32 points of the cone source: 1e-5 degree)
    assert np.allclose(np.degrees(np.arctan2(off[rim], np.abs(along[rim]))), 9.0, atol=1e-3)
    assert np.abs(along).max() == pytest.approx(110.0, abs=1e-3)
    assert "volume_isosurfaces" in scene.blocks and scene.notes["volume_levels_shown_pct"]


def test_the_images_are_drawn(scene, data, tmp_path):
    model = data[6]
    for view in sc.VIEWS:
        png = tmp_path / f"{view}.png"
        image = sc.render(scene, png, view, size=(800, 600), units="g/t", title="test", model=model)
        assert image.shape[:2] == (600, 800)
        share, _ = non_blank(png)
        colours = len(np.unique(image.reshape(-1, image.shape[-1]), axis=0))
        assert share > 0.03 and colours > 200, (view, share, colours)


def test_vtm_holds_the_datasets(scene, tmp_path):
    import pyvista as pv

    path = sc.write_vtm(scene, tmp_path / "scene.vtm")
    blocks = pv.read(path)
    assert {"traces", "composites", "ellipsoid", "axes", "pairs", "volume"} <= set(blocks.keys())
    assert blocks["ellipsoid"].n_points == scene.blocks["ellipsoid"].n_points


@pytest.mark.slow
def test_the_html_scene_renders_in_chromium_with_no_network_request(scene, tmp_path):
    browser_or_skip()
    page = sc.export_html(scene, tmp_path / "scene.html")
    proxy = Proxy()
    try:
        shot = tmp_path / "scene_html.png"
        done = screenshot(page, shot, proxy=proxy.address)
        assert done.returncode == 0 and shot.exists(), done.stderr[-2000:]
        assert proxy.page_requests() == []
    finally:
        proxy.close()
    import matplotlib.image as mpimg

    image = mpimg.imread(shot)[..., :3]
    h, w = image.shape[:2]
    middle = image[h // 5: 4 * h // 5, w // 5: 4 * w // 5]  # the colour bar sits at the right edge
    drawn = float((np.abs(middle - image[0, 0]).sum(axis=2) > 0.05).mean())
    assert drawn > 0.02, drawn  # the 3D content is drawn (a page with no WebGL content stays white)


@pytest.mark.slow
def test_view_command_writes_the_scene(tmp_path, data):
    _, _, _, _, frame, model_json, _, _ = data
    composites = tmp_path / "composites.csv"
    frame.to_csv(composites, index=False)
    (tmp_path / "model.json").write_text(json.dumps(model_json))
    out = tmp_path / "view"
    done = subprocess.run([sys.executable, "-m", "engine", "view", "--composites", str(composites), "--model",
                           str(tmp_path / "model.json"), "--units", "g/t", "--size", "800", "600", "--pairs-direction",
                           "30/0", "--out", str(out)], capture_output=True, text=True, cwd=ROOT)
    assert done.returncode == 0, done.stderr
    for name in ("scene.png", "scene_plan.png", "scene_section.png", "scene.html"):
        assert (out / name).stat().st_size > 1000, name
    import pyvista as pv

    blocks = pv.read(out / "scene.vtm")  # an index of the pieces in scene/
    assert "traces" in blocks.keys() and blocks["traces"].n_cells > 0
    assert "pairs:" in done.stdout and "along direction 30/0" in done.stdout


def test_vtm_is_written_whole_and_replaces_an_older_one(scene, tmp_path):
    import pyvista as pv

    (tmp_path / "scene").mkdir()
    (tmp_path / "scene" / "scene_99.vtp").write_text("an older run's block")
    (tmp_path / "scene.vtm").write_text("an older index")
    sc.write_vtm(scene, tmp_path / "scene.vtm")
    blocks = pv.read(tmp_path / "scene.vtm")
    assert blocks["ellipsoid"].n_points == scene.blocks["ellipsoid"].n_points
    assert not (tmp_path / "scene" / "scene_99.vtp").exists()  # the old pieces went with the old index
    assert sorted(p.name for p in tmp_path.iterdir()) == ["scene", "scene.vtm"]  # no temporary left


def test_the_html_export_binds_its_server_to_loopback_and_stops_it(tmp_path):
    # the exporter starts a local server; told TRAME_DEFAULT_HOST=0.0.0.0 it would listen on every
    # network. It must bind to 127.0.0.1 only, and nothing may listen once the page is written.
    code = (
        "import os, socket\n"
        "import numpy as np, psutil, pyvista as pv\n"
        "binds = []\n"
        "bind = socket.socket.bind\n"
        "def spy(self, address):\n"
        "    binds.append(address)\n"
        "    return bind(self, address)\n"
        "socket.socket.bind = spy\n"
        "from viewer import scene as sc\n"
        "scene = sc.Scene(blocks={'ellipsoid': pv.Sphere()}, centre=np.zeros(3), axes=np.eye(3),\n"
        "                 ranges=np.ones(3), value_name='au')\n"
        "sc.draw = lambda plotter, scene, units, pair_bar=True: plotter.add_mesh(scene.blocks['ellipsoid'])\n"
        f"sc.export_html(scene, {str(tmp_path / 'a.html')!r})\n"
        f"sc.export_html(scene, {str(tmp_path / 'b.html')!r})\n"
        "listening = [c.laddr for c in psutil.Process().net_connections() if c.status == 'LISTEN']\n"
        "print(sorted({a[0] for a in binds if isinstance(a, tuple)}), listening)\n"
    )
    env = {**__import__("os").environ, "TRAME_DEFAULT_HOST": "0.0.0.0"}
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=ROOT, env=env)
    assert done.returncode == 0, done.stderr[-3000:]
    assert done.stdout.strip().splitlines()[-1] == "['127.0.0.1'] []"
    assert (tmp_path / "a.html").stat().st_size > 10000 and (tmp_path / "b.html").stat().st_size > 10000
