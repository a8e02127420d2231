"""The 3D scene: drill traces, composites, the pairs of one lag bin, the fitted ellipsoid and the
variogram volume, over the drill pattern (pyvista, off screen).

``build_scene`` makes the datasets (tested as meshes); ``render`` draws them from a camera view to a
PNG; ``export_html`` writes a standalone page (vtk.js, no network); ``write_vtm`` writes the
datasets for any VTK reader. Colours: traces and composites by value (a labelled colour bar),
pairs by their squared difference, the ellipsoid orange with its axes red (major), orange
(semi-major) and blue (minor), the volume's isosurfaces in two greens.

Off screen, VTK needs an OpenGL window without a display: EGL (Debian: libegl1, libgl1-mesa-dri)
is chosen before VTK starts unless ``VTK_DEFAULT_OPENGL_WINDOW`` says otherwise.
"""

from __future__ import annotations

import contextlib
import ctypes.util
import dataclasses
import math
import os
import tempfile
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

AXIS_COLOURS = {"major": "#c0262d", "semi_major": "#d9711c", "minor": "#1f5fa8"}
AXIS_LABELS = {"major": "major", "semi_major": "semi-major", "minor": "minor"}
VIEWS = ("minor", "plan", "section")
VOLUME_LABEL = "variogram volume (lag space)"


def prepare_offscreen(show: bool = False) -> None:
    """Choose EGL for off-screen windows (before VTK makes one) and keep the HTML export from
    fetching its WebAssembly bundle. Raises RuntimeError when the EGL library is missing, instead
    of letting VTK crash."""
    if not show and "VTK_DEFAULT_OPENGL_WINDOW" not in os.environ:
        if ctypes.util.find_library("EGL") is None:
            raise RuntimeError("off-screen rendering needs the EGL and Mesa libraries (Debian: apt-get install "
                               "libegl1 libgl1-mesa-dri), or VTK_DEFAULT_OPENGL_WINDOW set to a window class "
                               "that works here (for example vtkOSOpenGLRenderWindow with libosmesa6)")
        os.environ["VTK_DEFAULT_OPENGL_WINDOW"] = "vtkEGLRenderWindow"
    if "VTK_WASM_DIR_OVERRIDE" not in os.environ:
        empty = Path(tempfile.gettempdir()) / "drillaxis-no-wasm"
        empty.mkdir(exist_ok=True)
        os.environ["VTK_WASM_DIR_OVERRIDE"] = str(empty)


@dataclass
class Scene:
    """The datasets of a scene and what the drawing needs to know about them."""

    blocks: dict  # name -> pyvista dataset
    centre: np.ndarray
    axes: np.ndarray  # rows major, semi-major, minor
    ranges: np.ndarray  # the ellipsoid's semi-axes (m)
    value_name: str
    labels: list = field(default_factory=list)  # (position, text, colour)
    notes: dict = field(default_factory=dict)


def _lines(points_a, points_b):
    import pyvista as pv

    n = len(points_a)
    points = np.empty((2 * n, 3))
    points[0::2], points[1::2] = points_a, points_b
    cells = np.c_[np.full(n, 2), np.arange(0, 2 * n, 2), np.arange(1, 2 * n, 2)].ravel()
    return pv.PolyData(points, lines=cells)


def traces(xyz, hole, depth, values, radius_m: float):
    """One polyline per hole through its composites in down-hole order, drawn as a tube with the
    value interpolated along it; cell data ``hole`` holds each tube's hole number."""
    import pyvista as pv

    order = np.lexsort((depth, hole))
    h = hole[order]
    starts = np.flatnonzero(np.r_[True, h[1:] != h[:-1]])
    ends = np.r_[starts[1:], len(h)]
    cells, number = [], []
    for k, (a, b) in enumerate(zip(starts, ends)):
        if b - a < 2:
            continue
        cells.append(np.r_[b - a, np.arange(a, b)])
        number.append(k)
    line = pv.PolyData(xyz[order], lines=np.concatenate(cells) if cells else None)
    line.point_data["value"] = np.nan_to_num(values[order], nan=float(np.nanmedian(values)))
    line.cell_data["hole"] = np.asarray(number, dtype=np.int64)
    return line.tube(radius=radius_m, n_sides=8, capping=True)


def ellipsoid(centre, axes, ranges, resolution: int = 72):
    """The ellipsoid with semi-axes ``ranges`` along the rows of ``axes`` around ``centre``: a unit
    sphere (points at its poles and on its equator at every quarter) scaled and turned."""
    import pyvista as pv

    sphere = pv.Sphere(radius=1.0, theta_resolution=resolution, phi_resolution=resolution + 1)
    local = np.asarray(sphere.points, dtype=np.float64)
    sphere.points = np.asarray(centre) + (local * np.asarray(ranges)[None, :]) @ np.asarray(axes)
    return sphere


def pair_segments(xyz, i, j, head, tail):
    """Segments from composite i to composite j, cell data ``squared_difference``, ``i``, ``j``."""
    segments = _lines(xyz[i], xyz[j])
    segments.cell_data["squared_difference"] = (np.asarray(head) - np.asarray(tail)) ** 2
    segments.cell_data["i"] = np.asarray(i, dtype=np.int64)
    segments.cell_data["j"] = np.asarray(j, dtype=np.int64)
    return segments


def volume_grid(volume: dict, sill: float, offset, smoothing_cells: float = 1.0):
    """The variogram volume as an image in lag space, zero lag at ``offset``. Point data ``gamma``
    (cells with fewer than 10 pairs take the sill, so isosurfaces close) and ``smoothed``: a
    pair-weighted Gaussian average over ``smoothing_cells`` cells, for isosurfaces that show the
    shape rather than the noise of single cells."""
    import pyvista as pv
    from scipy.ndimage import gaussian_filter

    gamma = np.asarray(volume["gamma"], dtype=np.float64)
    pairs = np.asarray(volume["pairs"], dtype=np.float64)
    cell = np.asarray(volume["cell_m"], dtype=np.float64)
    nx, ny, nz = (int(v) for v in volume["half_counts"])
    ok = (pairs >= 10) & np.isfinite(gamma)
    filled = np.where(ok, gamma, sill)
    weight = np.where(ok, np.sqrt(pairs), 0.0)
    if smoothing_cells > 0:
        top = gaussian_filter(weight * filled, smoothing_cells, mode="nearest")
        bottom = gaussian_filter(weight, smoothing_cells, mode="nearest")
        smoothed = np.where(bottom > 1e-12, top / np.maximum(bottom, 1e-12), sill)
    else:
        smoothed = filled
    grid = pv.ImageData(dimensions=(2 * nx + 1, 2 * ny + 1, 2 * nz + 1), spacing=tuple(cell),
                        origin=tuple(np.asarray(offset) - np.array([nx, ny, nz]) * cell))
    grid.point_data["gamma"] = filled.ravel()  # indexed (iz, iy, ix): x runs fastest, as VTK orders points
    grid.point_data["smoothed"] = smoothed.ravel()
    return grid


def isosurfaces(grid, levels, centre):
    """The surfaces of ``smoothed`` at each level that lie closest to zero lag (the shell around
    the origin, not the scattered noise near the sill). A level whose shell does not enclose zero
    lag at least a cell away in every direction is not resolved by the grid and is left out."""
    import pyvista as pv

    parts = []
    cell = np.asarray(grid.spacing)
    for level in levels:
        surface = grid.contour([level], scalars="smoothed")
        if surface.n_points == 0:
            continue
        surface = surface.connectivity("closest", closest_point=tuple(centre))
        lo, hi = np.asarray(surface.bounds[0::2]), np.asarray(surface.bounds[1::2])
        if not ((lo <= np.asarray(centre) - cell).all() and (hi >= np.asarray(centre) + cell).all()):
            continue
        surface.point_data["level"] = np.full(surface.n_points, level)
        parts.append(surface)
    if not parts:
        return None
    merged = parts[0]
    for part in parts[1:]:
        merged = merged.merge(part)
    return merged if isinstance(merged, pv.PolyData) else merged.extract_surface()


def bootstrap_cones(centre, axis, length_m, angle_deg):
    """Two cones with their apex at the centre, around both senses of ``axis``, of half-angle
    ``angle_deg`` (95% of the bootstrap replicate axes lie within it)."""
    import pyvista as pv

    axis = np.asarray(axis, dtype=np.float64)
    radius = length_m * math.tan(math.radians(angle_deg))
    cones = [pv.Cone(center=s * axis * length_m / 2, direction=-s * axis, height=length_m, radius=radius,
                     resolution=48, capping=False) for s in (1.0, -1.0)]
    merged = cones[0].merge(cones[1])
    merged.points = np.asarray(merged.points, dtype=np.float64) + np.asarray(centre)  # built at zero: no float32 loss
    return merged


def build_scene(xyz, hole, depth, values, model: dict, value_name: str = "value", pairs: dict | None = None,
                volume: dict | None = None, centre=None, fraction: float = 1.0, per_structure: bool = False,
                hole_names=None, collar_labels: bool = False, volume_levels=(0.5, 0.8, 0.9)) -> Scene:
    """All datasets of the scene. ``model``: a model.json dictionary; ``pairs``: the output of
    ``engine.variogram.bin_pairs``; ``volume``: gamma, pairs, cell_m, half_counts;
    ``volume_levels``: isosurface levels as shares of the model's total sill (those the grid does
    not resolve are left out); ``fraction``: the ellipsoid at that share of the ranges."""
    import pyvista as pv

    from engine.model import AXIS_NAMES, Model

    xyz = np.asarray(xyz, dtype=np.float64)
    hole = np.asarray(hole)
    values = np.asarray(values, dtype=np.float64)
    fitted = Model.from_json(model)
    axes = np.asarray(fitted.axes, dtype=np.float64)
    ranges = np.array([max(s.ranges_m[a] for s in fitted.structures) for a in range(3)]) * fraction
    centre = xyz.mean(axis=0) if centre is None else np.asarray(centre, dtype=np.float64)
    extent = float(np.max(np.ptp(xyz, axis=0)))
    blocks = {}
    blocks["traces"] = traces(xyz, hole, np.asarray(depth, dtype=np.float64), values, radius_m=max(extent / 350, 0.2))
    points = pv.PolyData(xyz)
    points.point_data["value"] = values
    blocks["composites"] = points
    blocks["ellipsoid"] = ellipsoid(centre, axes, ranges)
    if per_structure and len(fitted.structures) > 1:
        for k, s in enumerate(fitted.structures):
            blocks[f"ellipsoid_structure_{k + 1}"] = ellipsoid(centre, axes, np.asarray(s.ranges_m) * fraction)
    axis_lines = _lines(centre - ranges[:, None] * axes, centre + ranges[:, None] * axes)
    axis_lines.cell_data["axis"] = np.arange(3)
    blocks["axes"] = axis_lines
    labels = [(centre + 1.08 * ranges[a] * axes[a], f"{AXIS_LABELS[name]} {ranges[a]:.0f} m", AXIS_COLOURS[name])
              for a, name in enumerate(AXIS_NAMES)]
    cone = (model.get("bootstrap") or {}).get("axis_angle_deg", {}).get("major", {}).get("p95")
    if cone:
        blocks["major_axis_bootstrap"] = bootstrap_cones(centre, axes[0], ranges[0], cone)
    if pairs is not None and len(pairs["i"]):
        blocks["pairs"] = pair_segments(xyz, pairs["i"], pairs["j"], pairs["head"], pairs["tail"])
    notes = {}
    if volume is not None:
        sill = fitted.nugget + sum(s.sill for s in fitted.structures)
        reach = np.asarray(volume["cell_m"]) * (np.asarray(volume["half_counts"]) + 0.5)
        offset = np.array([xyz[:, 0].max() + reach[0] * 1.3, centre[1], centre[2]])
        grid = volume_grid(volume, sill, offset)
        blocks["volume"] = grid
        levels = [share * sill for share in volume_levels]
        surfaces = isosurfaces(grid, levels, offset)
        if surfaces is not None:
            blocks["volume_isosurfaces"] = surfaces
            shown = sorted(set(np.round(np.asarray(surfaces.point_data["level"]) / sill * 100).astype(int)))
            notes["volume_levels_shown_pct"] = shown
        notes["volume_offset"] = offset
        labels.append((offset + np.array([0.0, 0.0, reach[2] * 1.25]), VOLUME_LABEL, "#3a9a5b"))
    if collar_labels and hole_names is not None:
        from engine.pattern import hole_ends

        tops, _ = hole_ends(xyz, hole)  # holes in ascending order of their numbers
        labels += [(top + [0, 0, extent / 80], str(hole_names[k]), "#333333")
                   for k, top in zip(np.unique(hole), tops)]
    return Scene(blocks, centre, axes, ranges, value_name, labels, notes)


# --------------------------------------------------------------------------------------------
# drawing
# --------------------------------------------------------------------------------------------


def view_frame(scene: Scene, view: str):
    """(towards the camera, screen up, screen right) unit vectors of a view."""
    if view == "plan":
        toward, up = np.array([0.0, 0.0, 1.0]), np.array([0.0, 1.0, 0.0])
    elif view == "section":  # look horizontally across the major axis: its vertical section
        across = np.cross(scene.axes[0], [0.0, 0.0, 1.0])
        if np.linalg.norm(across) < 1e-9:
            across = np.array([1.0, 0.0, 0.0])
        toward, up = across / np.linalg.norm(across), np.array([0.0, 0.0, 1.0])
    else:  # down the minor axis, from above
        toward = scene.axes[2] * (1.0 if scene.axes[2][2] >= 0 else -1.0)
        up = np.cross(toward, np.cross([0.0, 0.0, 1.0], toward))
        if np.linalg.norm(up) < 1e-9:
            up = np.array([0.0, 1.0, 0.0])
    up = up / np.linalg.norm(up)
    right = np.cross(up, toward)
    return toward, up, right / np.linalg.norm(right)


def view_scene(scene: Scene, view: str, half_thickness_m: float | None = None, model=None) -> Scene:
    """The scene as one view shows it: traces, composites and pairs cut to a slab about the centre,
    normal to the view, reaching either side as far as the model's 95%-of-sill distance along the
    view (at least a twentieth of the extent; ``notes["slab_m"]``), and the variogram volume moved
    to the right of the data on screen."""
    toward, up, right = view_frame(scene, view)
    b = dict(scene.blocks)
    xyz = np.asarray(b["composites"].points)
    if half_thickness_m is None:
        along = float(model.effective_range(toward)) if model is not None else float(scene.ranges[2])
        half_thickness_m = max(along, float(np.max(np.ptp(xyz, axis=0))) / 20)

    def offsets(points):
        return (np.asarray(points) - scene.centre) @ toward

    tube = b["traces"].copy()
    tube.point_data["offset"] = offsets(tube.points)
    b["traces"] = tube.clip_scalar(scalars="offset", value=half_thickness_m, invert=True).clip_scalar(
        scalars="offset", value=-half_thickness_m, invert=False)
    inside = np.abs(offsets(xyz)) <= half_thickness_m
    b["composites"] = b["composites"].extract_points(inside, adjacent_cells=False)
    if "pairs" in b:
        ends = np.asarray(b["pairs"].points)
        middle = 0.5 * (ends[0::2] + ends[1::2])
        keep = np.flatnonzero(np.abs(offsets(middle)) <= half_thickness_m)
        if len(keep):
            b["pairs"] = b["pairs"].extract_cells(keep)
        else:
            del b["pairs"]
    labels = [entry for entry in scene.labels if entry[1] != VOLUME_LABEL]
    if "volume" in b:
        old = np.asarray(scene.notes["volume_offset"])
        half_width = float(np.max(np.abs((xyz - scene.centre) @ right)))
        reach = float(np.max(np.asarray(b["volume"].spacing) * (np.asarray(b["volume"].dimensions) - 1) / 2))
        new = scene.centre + right * (half_width + 1.25 * reach)
        shift = new - old
        for key in ("volume", "volume_isosurfaces"):
            if key in b:
                b[key] = b[key].translate(shift, inplace=False)
        labels.append((new - up * reach * 0.75, VOLUME_LABEL, "#3a9a5b"))
    return dataclasses.replace(scene, blocks=b, labels=labels, notes={**scene.notes, "slab_m": half_thickness_m})


def _camera(plotter, toward, up, bounds):
    lo, hi = np.asarray(bounds[0::2]), np.asarray(bounds[1::2])
    focus = 0.5 * (lo + hi)
    distance = 2.2 * float(np.linalg.norm(hi - lo))
    plotter.camera_position = [tuple(focus + distance * toward), tuple(focus), tuple(up)]
    plotter.camera.parallel_projection = True
    plotter.reset_camera(bounds=bounds)


def _north_and_scale(plotter, bounds, extent):
    import pyvista as pv

    step = 10 ** math.floor(math.log10(max(extent / 4, 1e-6)))
    length = step * (5 if extent / 4 >= 5 * step else 2 if extent / 4 >= 2 * step else 1)
    x0, y0, z0 = bounds[0], bounds[2], bounds[4]
    arrow = pv.Arrow(start=(x0, y0, z0), direction=(0, 1, 0), scale=extent / 8, tip_length=0.3, shaft_radius=0.04,
                     tip_radius=0.1)
    plotter.add_mesh(arrow, color="black", name="north")
    scale = pv.Line((x0 + extent / 6, y0, z0), (x0 + extent / 6 + length, y0, z0))
    plotter.add_mesh(scale, color="black", line_width=5, name="scale")
    plotter.add_point_labels([(x0, y0 + extent / 8 * 1.1, z0), (x0 + extent / 6 + length / 2, y0 - extent / 40, z0)],
                             ["N", f"{length:g} m"], font_size=22, text_color="black", shape=None,
                             show_points=False, always_visible=True, name="north_scale_labels")


def draw(plotter, scene: Scene, units: str = "", pair_bar: bool = True):
    """Add the scene's datasets to a plotter."""
    b = scene.blocks
    title = f"{scene.value_name} ({units})" if units else scene.value_name
    bar = dict(title=title, n_labels=5, fmt="%.3g", vertical=True, position_x=0.9, position_y=0.25, height=0.45,
               width=0.05, color="black", title_font_size=18, label_font_size=14)
    if b["traces"].n_points:  # a slab about a centre away from the holes holds none
        plotter.add_mesh(b["traces"], scalars="value", cmap="viridis", scalar_bar_args=bar, name="traces")
    if b["composites"].n_points:
        plotter.add_mesh(b["composites"], scalars="value", cmap="viridis", point_size=3,
                         render_points_as_spheres=True, show_scalar_bar=False, name="composites", opacity=0.6)
    plotter.add_mesh(b["ellipsoid"], color="#d9711c", opacity=0.28, smooth_shading=True, name="ellipsoid",
                     label="ellipsoid (ranges)")
    for key in [k for k in b if k.startswith("ellipsoid_structure_")]:
        plotter.add_mesh(b[key], color="#f2b36b", opacity=0.15, style="wireframe", name=key)
    axes = b["axes"]
    for a, name in enumerate(("major", "semi_major", "minor")):
        plotter.add_mesh(axes.extract_cells([a]), color=AXIS_COLOURS[name], line_width=6, name=f"axis_{name}",
                         label=f"{AXIS_LABELS[name]} axis")
    if "major_axis_bootstrap" in b:
        plotter.add_mesh(b["major_axis_bootstrap"], color="#c0262d", opacity=0.12, name="major_axis_bootstrap",
                         label="major: 95% bootstrap cone")
    if "pairs" in b:
        plotter.add_mesh(b["pairs"], scalars="squared_difference", cmap="cool", line_width=1.2, name="pairs",
                         show_scalar_bar=pair_bar,
                         scalar_bar_args=dict(title="(head - tail)^2", n_labels=3, fmt="%.2g",
                                              vertical=True, position_x=0.05, position_y=0.25, height=0.4,
                                              width=0.04, color="black", title_font_size=16, label_font_size=12))
    if "volume_isosurfaces" in b:
        plotter.add_mesh(b["volume_isosurfaces"], scalars="level", cmap=["#2f7d4a", "#8fcb9f"], opacity=0.5,
                         show_scalar_bar=False, name="volume_isosurfaces",
                         label="volume: " + "/".join(f"{v}" for v in scene.notes.get("volume_levels_shown_pct", []))
                         + "% of sill")
    if scene.labels:
        plotter.add_point_labels([p for p, _, _ in scene.labels], [t for _, t, _ in scene.labels], font_size=16,
                                 text_color="black", shape_color="white", shape_opacity=0.6, show_points=False,
                                 always_visible=True, name="labels")


def render(scene: Scene, path, view: str = "minor", size=(1600, 1200), units: str = "", title: str = "",
           model=None):
    """Draw the scene from a view to a PNG (``minor``: down the minor axis; ``plan``; ``section``:
    across the major axis, horizontally), the data cut to a slab about the centre (see
    ``view_scene``); returns the image as an array."""
    import pyvista as pv

    prepare_offscreen()
    shown = view_scene(scene, view, model=model)
    plotter = pv.Plotter(off_screen=True, window_size=list(size))
    plotter.set_background("white")
    draw(plotter, shown, units)
    bounds = plotter.bounds
    extent = float(max(bounds[1] - bounds[0], bounds[3] - bounds[2], bounds[5] - bounds[4]))
    _north_and_scale(plotter, bounds, extent)
    plotter.add_legend(bcolor="white", border=True, size=(0.24, 0.2), loc="lower right", face="rectangle")
    names = {"minor": "looking down the minor axis", "plan": "plan view, north up",
             "section": "vertical section along the major axis"}
    plotter.add_text(f"{title}\n{names[view]}; holes and pairs within {shown.notes['slab_m']:.0f} m of the centre "
                     "across the view".strip(), position="upper_left", font_size=11, color="black")
    toward, up, _ = view_frame(scene, view)
    _camera(plotter, toward, up, bounds)
    image = plotter.screenshot(str(path), return_img=True)
    plotter.close()
    return image


def export_html(scene: Scene, path, units: str = ""):
    """A standalone interactive page (vtk.js with the scene's data inside)."""
    import pyvista as pv

    prepare_offscreen()
    plotter = pv.Plotter(off_screen=True, window_size=[1200, 900])
    plotter.set_background("white")
    draw(plotter, scene, units, pair_bar=False)  # the page shows one colour bar: the value's
    toward, up, _ = view_frame(scene, "minor")
    _camera(plotter, toward, up, plotter.bounds)
    import contextlib
    import io

    with contextlib.redirect_stdout(io.StringIO()), _loopback_server():  # they print where they looked for a bundle
        plotter.trame.export_html(str(path))
    plotter.close()
    _no_network(Path(path))
    return Path(path)


@contextlib.contextmanager
def _loopback_server():
    """The local trame server that the exporter needs, started here bound to 127.0.0.1 (left to
    itself it follows TRAME_DEFAULT_HOST, which may say 0.0.0.0: every network) and stopped when
    the export is done."""
    import asyncio

    import pyvista as pv
    from trame_pyvista.jupyter import elegantly_launch
    from trame_pyvista.widgets import get_server

    name = pv.global_theme.trame.jupyter_server_name
    server = get_server(name)
    started = False
    if not server.running:
        elegantly_launch(name, host="127.0.0.1")
        started = True
    try:
        yield server
    finally:
        if started:
            asyncio.run(server.stop())


# vtk.js adds five favicon links to its page, each a request to the network: point them at nothing
FAVICON = "`https://kitware.github.io/vtk-js/icon/favicon-${t}x${t}.png`"


def _no_network(path: Path) -> None:
    text = path.read_text(encoding="utf-8")
    if FAVICON in text:
        path.write_text(text.replace(FAVICON, '"data:,"'), encoding="utf-8")


def write_vtm(scene: Scene, path):
    """``scene.vtm`` and its blocks (``scene/*.vtp``, ``.vtu``...), whole or not at all: written into a
    temporary folder beside them, then the blocks' folder moved into place and the index last, so
    that a kill leaves no half-written block and no index pointing at missing ones."""
    import pyvista as pv

    from engine.outputs import atomic_folder

    path = Path(path)
    blocks = pv.MultiBlock({name: data for name, data in scene.blocks.items()})
    with atomic_folder(path) as temporary:
        blocks.save(str(temporary / path.name))
    return path


def show(scene: Scene, units: str = ""):
    """An interactive window, where a display exists."""
    import pyvista as pv

    prepare_offscreen(show=True)
    plotter = pv.Plotter()
    draw(plotter, scene, units)
    toward, up, _ = view_frame(scene, "minor")
    _camera(plotter, toward, up, plotter.bounds)
    plotter.show()
