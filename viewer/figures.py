"""Figures of the stationarity checks, the variograms and the drill pattern (matplotlib, off screen).

Each function takes the plain dictionaries the engine writes (stationarity.json, model.json,
pattern.json) or arrays, and returns PNG bytes. Colours: one blue for data, one orange for models,
red only for what a check flagged.
"""

from __future__ import annotations

import io
import math

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402

DATA = "#1f5fa8"
MODEL = "#d9711c"
FLAG = "#c0262d"
QUIET = "#8a8a8a"
SECOND = "#3a9a5b"

plt.rcParams.update({"font.size": 9, "axes.titlesize": 10, "axes.spines.top": False, "axes.spines.right": False,
                     "figure.dpi": 110, "savefig.bbox": "tight"})


def plain(text) -> str:
    """Data text for a figure label: a dollar sign would start matplotlib's mathematics mode."""
    return str(text).replace("$", r"\$")


def png(figure) -> bytes:
    buffer = io.BytesIO()
    figure.savefig(buffer, format="png")
    plt.close(figure)
    return buffer.getvalue()


def _grid(count, columns=3, size=(3.6, 2.8)):
    rows = max(1, math.ceil(count / columns))
    columns = min(columns, count)
    figure, axes = plt.subplots(rows, columns, figsize=(size[0] * columns, size[1] * rows), squeeze=False)
    for extra in axes.ravel()[count:]:
        extra.set_visible(False)
    return figure, axes.ravel()


def swaths(trend: dict, variable: str) -> bytes:
    """Slice means (with +- one standard deviation and counts) along each tested axis, with the
    fitted slope."""
    variable = plain(variable)
    axes_data = trend["axes"]
    figure, panels = _grid(len(axes_data))
    for ax, a in zip(panels, axes_data):
        s = [x for x in a["slices"] if x["count"] > 0]
        centre = np.array([x["centre"] for x in s])
        mean = np.array([x["mean"] for x in s])
        sd = np.sqrt(np.array([x["variance"] if x["variance"] is not None else np.nan for x in s]))
        count = np.array([x["count"] for x in s])
        twin = ax.twinx()
        width = (s[0]["to"] - s[0]["from"]) * 0.8 if s else 1.0
        twin.bar(centre, count, width=width, color=QUIET, alpha=0.25, zorder=0)
        twin.set_ylabel("composites", color=QUIET)
        twin.spines["right"].set_visible(True)
        ax.set_zorder(twin.get_zorder() + 1)
        ax.patch.set_visible(False)
        ax.fill_between(centre, mean - sd, mean + sd, color=DATA, alpha=0.15, linewidth=0)
        ax.plot(centre, mean, "o-", color=DATA, markersize=3.5, label="slice mean")
        colour = FLAG if a["flag"] else MODEL
        overall = float(np.average(mean, weights=count)) if len(s) else 0.0
        centre_w = float(np.average(centre, weights=count)) if len(s) else 0.0
        line = overall + a["slope_per_100m"] / 100.0 * (centre - centre_w)
        ax.plot(centre, line, "--", color=colour, linewidth=1.5, label="least-squares slope")
        ax.set_title(f"{a['name']}: {a['slope_per_100m']:+.3g} per 100 m, p = {a['p']:.2g}"
                     + ("  FLAG" if a["flag"] else ""), color=FLAG if a["flag"] else "black")
        ax.set_xlabel(f"distance along {a['name']} (m, from the centre)")
        ax.set_ylabel(variable)
    panels[0].legend(loc="best", fontsize=7, frameon=False)
    figure.suptitle("Swaths: slice mean with one standard deviation either side; bars are composite counts", y=1.0)
    figure.tight_layout()
    return png(figure)


def proportional_effect(check: dict, variable: str) -> bytes:
    variable = plain(variable)
    figure, ax = plt.subplots(figsize=(4.8, 3.8))
    mean, sd = np.asarray(check["local_mean"]), np.asarray(check["local_sd"])
    ax.scatter(mean, sd, s=10 + 40 * np.asarray(check["local_count"]) / max(1, max(check["local_count"], default=1)),
               color=DATA, alpha=0.6, edgecolor="none")
    if check.get("slope") is not None:
        x = np.linspace(mean.min(), mean.max(), 50)
        ax.plot(x, check["intercept"] + check["slope"] * x, color=FLAG if check["flag"] else MODEL,
                label=f"slope {check['slope']:.3g}, r = {check['correlation']:.2f}")
        ax.legend(frameon=False, fontsize=8)
    ax.set_xlabel(f"local mean of {variable}")
    ax.set_ylabel("local standard deviation")
    w = check["window_m"]
    ax.set_title(f"{check['windows']} windows of {w[0]:.0f} x {w[1]:.0f} x {w[2]:.0f} m"
                 + ("  FLAG" if check["flag"] else ""), color=FLAG if check["flag"] else "black")
    figure.tight_layout()
    return png(figure)


def _pdf(y, mu, sd):
    return np.exp(-0.5 * ((y - mu) / sd) ** 2) / (sd * math.sqrt(2 * math.pi))


def mixture(check: dict, values, variable: str) -> bytes:
    variable = plain(variable)
    values = np.asarray(values, dtype=np.float64)
    values = values[np.isfinite(values)]
    log = check["scale"] == "log"
    y = np.log(values) if log else values
    figure, ax = plt.subplots(figsize=(5.6, 3.8))
    ax.hist(y, bins=60, density=True, color=DATA, alpha=0.35, label="composites")
    grid = np.linspace(y.min(), y.max(), 400)
    ax.plot(grid, _pdf(grid, y.mean(), y.std()), color=QUIET, label="one normal population")
    if "components" in check:
        total = np.zeros_like(grid)
        for c in check["components"]:
            part = c["weight"] * _pdf(grid, c["mean"], c["sd"])
            total += part
            ax.plot(grid, part, ":", color=MODEL, linewidth=1)
        ax.plot(grid, total, color=FLAG if check["flag"] else MODEL, label="two-component mixture")
        if check["flag"]:
            split = math.log(check["split_value"]) if log else check["split_value"]
            ax.axvline(split, color=QUIET, linestyle="--", linewidth=1)
            ax.text(split, ax.get_ylim()[1] * 0.95, f" split {check['split_value']:.3g}", fontsize=7, va="top")
    ax.set_xlabel(f"ln({variable})" if log else variable)
    ax.set_ylabel("density")
    ax.legend(frameon=False, fontsize=7)
    drop = check.get("bic_drop", 0.0)
    ax.set_title(f"BIC {'lower' if drop >= 0 else 'higher'} by {abs(drop):.0f} with two components"
                 + ("  FLAG" if check["flag"] else ""), color=FLAG if check["flag"] else "black")
    figure.tight_layout()
    return png(figure)


def sill(check: dict, variable: str) -> bytes:
    variable = plain(variable)
    figure, ax = plt.subplots(figsize=(5.6, 3.8))
    colours = {"omni": DATA, "east": SECOND, "north": MODEL, "vertical": "#7b4fa0"}
    for s in check["sets"]:
        d, g, n = (np.asarray(s[k], dtype=float) for k in ("distance", "gamma", "pairs"))
        ok = np.isfinite(g) & (n >= 30) & (d <= s["limit_m"])
        if not ok.any():
            continue
        ax.plot(d[ok], g[ok], "o-", markersize=3, color=colours.get(s["name"], QUIET),
                label=s["name"] + (" (FLAG)" if s["flag"] else ""), linewidth=2.2 if s["flag"] else 1.2)
    ax.axhline(check["variance"], color=QUIET, linestyle="--", linewidth=1, label="variance")
    return _variogram_axes(figure, ax, variable, "Variograms to half the extent", check["flag"])


def declustering(d: dict, variable: str) -> bytes:
    """The declustered mean against the cell size (the scan), the naive mean and the size chosen."""
    variable = plain(variable)
    figure, ax = plt.subplots(figsize=(5.6, 3.2))
    scan = d.get("scan", {})
    sizes, means = np.asarray(scan.get("cell_m", []), dtype=float), np.asarray(scan.get("mean", []), dtype=float)
    if len(sizes):
        ax.plot(sizes, means, "o-", markersize=3, color=DATA, label="declustered mean")
    ax.axhline(d["naive_mean"], color=QUIET, linestyle="--", linewidth=1, label="naive mean")
    if d.get("cell_m"):
        ax.axvline(d["cell_m"], color=MODEL, linewidth=1.2, label=f"cell chosen, {d['cell_m']:.1f} m")
    ax.set_xlabel("cell size (m)")
    ax.set_ylabel(f"mean of {variable}")
    ax.set_title("Cell declustering: the mean against the cell size")
    ax.legend(frameon=False, fontsize=7)
    return png(figure)


def _variogram_axes(figure, ax, variable, title, flagged) -> bytes:
    ax.set_xlabel("separation (m)")
    ax.set_ylabel(f"semivariogram of {variable}")
    ax.set_ylim(bottom=0)
    ax.legend(frameon=False, fontsize=7)
    ax.set_title(title + ("  FLAG" if flagged else ""), color=FLAG if flagged else "black")
    figure.tight_layout()
    return png(figure)


def halves(check: dict, xyz, variable: str) -> bytes:
    variable = plain(variable)
    figure, (plan, ax) = plt.subplots(1, 2, figsize=(9.0, 3.8))
    xyz = np.asarray(xyz)
    trend = math.radians(check["trend"])
    axis = np.array([math.sin(trend), math.cos(trend)])
    s = (xyz[:, :2] - xyz[:, :2].mean(axis=0)) @ axis
    first = s <= check["split_at_m"]
    plan.scatter(xyz[first, 0], xyz[first, 1], s=1, color=DATA, label="first half")
    plan.scatter(xyz[~first, 0], xyz[~first, 1], s=1, color=MODEL, label="second half")
    plan.set_aspect("equal")
    plan.set_xlabel("east (m)")
    plan.set_ylabel("north (m)")
    plan.legend(frameon=False, fontsize=7, markerscale=6)
    plan.set_title(f"split along trend {check['trend']:.0f}")
    for half, colour in zip(check["halves"], (DATA, MODEL)):
        d, g, n = (np.asarray(half[k], dtype=float) for k in ("distance", "gamma", "pairs"))
        ok = np.isfinite(g) & (n >= 30)
        ax.plot(d[ok], g[ok], "o-", markersize=3, color=colour,
                label=f"{half['side']} half: mean {half['mean']:.3g}, variance {half['variance']:.3g}")
    return _variogram_axes(figure, ax, variable, "Omnidirectional variogram of each half", check["flag"])


def both_models(model: dict, grade: dict, variable: str, units_of_the_fit: str) -> bytes:
    """The model fitted in the transform's units and the same back in grade units, each along its
    three axes (the grade model's declustered variance dashed)."""
    from engine.model import AXIS_NAMES, Model

    variable = plain(variable)
    figure, panels = _grid(2, columns=2, size=(4.2, 3.0))
    colours = (DATA, MODEL, SECOND)
    for ax, (m, title, level) in zip(panels, ((model, f"fitted, in {units_of_the_fit}", model["variance"]),
                                              (grade, "back in grade units", (model.get("declustering") or {})
                                               .get("variance")))):
        obj = Model.from_json(m)
        top = 1.5 * max(s.ranges_m[0] for s in obj.structures)
        d = np.linspace(0.0, top, 200)[1:]
        for a, name in enumerate(AXIS_NAMES):
            ax.plot(d, obj.gamma(d[:, None] * obj.axes[a][None, :]), color=colours[a], label=name.replace("_", "-"))
        if level:
            ax.axhline(level, color=QUIET, linestyle="--", linewidth=0.8,
                       label="variance" if m is model else "declustered variance of the grades")
        ax.set_xlabel("separation (m)")
        ax.set_ylim(bottom=0)
        ax.set_title(title)
        ax.legend(frameon=False, fontsize=7)
    panels[0].set_ylabel(f"semivariogram of {variable}")
    return png(figure)


def fitted_variograms(rows, model: dict, variable: str) -> bytes:
    """The experimental variograms along the three principal axes and down the holes, with the
    model along each axis and averaged over the direction's cone."""
    variable = plain(variable)
    figure, panels = _grid(4, columns=4, size=(3.3, 3.0))
    names = [("major", "major"), ("semi_major", "semi-major"), ("minor", "minor"), ("downhole", "down-hole")]
    top = model["variance"] * 1.4
    orientation = model["orientation"]
    for ax, (key, label) in zip(panels, names):
        part = rows[rows["set"] == key]
        ok = part["pairs"].to_numpy() > 0
        d, g, n = part["distance"].to_numpy()[ok], part["gamma"].to_numpy()[ok], part["pairs"].to_numpy()[ok]
        if len(d):
            ax.scatter(d, g, s=8 + 40 * n / n.max(), color=DATA, zorder=3, label="experimental")
            top = max(top, float(np.nanmax(g)) * 1.1)
        if key != "downhole" and part["model"].notna().any():
            ax.plot(part["distance"], part["model_in_cone"], color=MODEL, label="model over the cone")
            ax.plot(part["distance"], part["model"], ":", color=MODEL, label="model on the axis")
        ax.axhline(model["variance"], color=QUIET, linestyle="--", linewidth=0.8)
        if key == "downhole":
            ax.axhline(model["nugget"], color=MODEL, linestyle=":", linewidth=1, label="fitted nugget")
            ax.set_title("down-hole")
        else:
            o = orientation[key]
            ax.set_title(f"{label} ({o['trend']:.0f} / {o['plunge']:.0f})")
        ax.set_xlabel("separation (m)")
        ax.set_xlim(left=0)
    for ax in panels:
        ax.set_ylim(0, top)
    panels[0].set_ylabel(f"semivariogram of {variable}")
    panels[0].legend(frameon=False, fontsize=6.5, loc="lower right")
    figure.tight_layout()
    return png(figure)


def _range_curve(model_obj, e1, e2, count=181, steps=600):
    """Points of the plane (e1, e2) at the distance where the model first reaches its nugget plus
    95% of the structures' sill, in each of ``count`` directions."""
    angles = np.linspace(0, 2 * math.pi, count)
    u = np.cos(angles)[:, None] * e1[None, :] + np.sin(angles)[:, None] * e2[None, :]
    longest = max(max(s.ranges_m) for s in model_obj.structures)
    h = np.linspace(0.0, 1.5 * longest, steps)
    gamma = model_obj.gamma((u[:, None, :] * h[None, :, None]).reshape(-1, 3)).reshape(count, steps)
    level = model_obj.nugget + 0.95 * sum(s.sill for s in model_obj.structures)
    above = gamma >= level
    first = np.where(above.any(axis=1), above.argmax(axis=1), steps - 1)
    low = np.maximum(first - 1, 0)
    g0, g1 = gamma[np.arange(count), low], gamma[np.arange(count), first]
    with np.errstate(invalid="ignore", divide="ignore"):
        t = np.where(g1 > g0, (level - g0) / (g1 - g0), 0.0)
    r = h[low] + np.clip(t, 0, 1) * (h[first] - h[low])
    return np.c_[r * np.cos(angles), r * np.sin(angles)]


def volume_slices(volume: dict, model: dict) -> bytes:
    """The variogram volume in its three planes through zero lag (plan, east-up, north-up) with the
    model's 95%-of-sill distance in each plane drawn over it."""
    from engine.model import Model

    gamma, pairs = np.asarray(volume["gamma"]), np.asarray(volume["pairs"])
    cell = np.asarray(volume["cell_m"], dtype=float)
    nx, ny, nz = (int(v) for v in volume["half_counts"])
    shown = np.where(pairs >= 10, gamma, np.nan)
    fitted = Model.from_json(model)
    figure, panels = plt.subplots(1, 3, figsize=(11.5, 3.8))
    planes = [("plan (east, north)", shown[nz, :, :], (cell[0], cell[1]), (nx, ny), "east (m)", "north (m)",
               np.eye(3)[0], np.eye(3)[1]),
              ("vertical east-up", shown[:, ny, :], (cell[0], cell[2]), (nx, nz), "east (m)", "up (m)",
               np.eye(3)[0], np.eye(3)[2]),
              ("vertical north-up", shown[:, :, nx], (cell[1], cell[2]), (ny, nz), "north (m)", "up (m)",
               np.eye(3)[1], np.eye(3)[2])]
    vmax = model["variance"] * 1.2
    image = None
    for ax, (title, data, (cu, cv), (hu, hv), xl, yl, e1, e2) in zip(panels, planes):
        extent = [-(hu + 0.5) * cu, (hu + 0.5) * cu, -(hv + 0.5) * cv, (hv + 0.5) * cv]
        image = ax.imshow(data, origin="lower", extent=extent, cmap="viridis", vmin=0, vmax=vmax, aspect="equal")
        curve = _range_curve(fitted, e1, e2)
        ax.plot(curve[:, 0], curve[:, 1], color="white", linewidth=1.4)
        ax.set_xlim(extent[:2])
        ax.set_ylim(extent[2:])
        ax.set_title(title)
        ax.set_xlabel(xl)
        ax.set_ylabel(yl)
    figure.colorbar(image, ax=list(panels), shrink=0.8, label="semivariogram (cells of 10+ pairs)")
    return png(figure)


def _stereo(vector):
    """Lower-hemisphere equal-area (Schmidt) projection of an axis: (x east, y north) in a unit circle."""
    v = np.asarray(vector, dtype=float)
    v = v / np.linalg.norm(v)
    if v[2] > 0:
        v = -v
    plunge = math.asin(-v[2])
    trend = math.atan2(v[0], v[1])
    r = math.sqrt(2) * math.sin((math.pi / 2 - plunge) / 2)
    return r * math.sin(trend), r * math.cos(trend)


def orientation(model: dict, pattern: dict | None = None) -> bytes:
    """The three axes on a lower-hemisphere equal-area net, each with the circle within which 95%
    of the bootstrap replicate axes fell, and the mean hole direction."""
    figure, ax = plt.subplots(figsize=(4.4, 4.4))
    t = np.linspace(0, 2 * math.pi, 200)
    ax.plot(np.cos(t), np.sin(t), color="black", linewidth=0.8)
    ax.plot([0], [0], "+", color=QUIET)
    ax.text(0, 1.04, "N", ha="center", fontsize=9)
    boot = (model.get("bootstrap") or {}).get("axis_angle_deg", {})
    colours = {"major": FLAG, "semi_major": MODEL, "minor": DATA}
    for name, vector in model["axes"].items():
        x, y = _stereo(vector)
        ax.plot(x, y, "o", color=colours[name], markersize=7, label=name.replace("_", "-"))
        cone = boot.get(name, {}).get("p95")
        if cone:
            v = np.asarray(vector, dtype=float)
            v = v / np.linalg.norm(v)
            if v[2] > 0:
                v = -v
            a = np.cross(v, [0.0, 0.0, 1.0])
            if np.linalg.norm(a) < 1e-9:
                a = np.array([1.0, 0.0, 0.0])
            a /= np.linalg.norm(a)
            b = np.cross(v, a)
            c = math.radians(cone)
            ring = [math.cos(c) * v + math.sin(c) * (math.cos(s) * a + math.sin(s) * b) for s in t]
            points = np.array([_stereo(r) for r in ring])
            ax.plot(points[:, 0], points[:, 1], ".", color=colours[name], markersize=0.8)
    if pattern and pattern.get("hole_direction"):
        x, y = _stereo(pattern["hole_direction"]["vector"])
        ax.plot(x, y, "s", color=QUIET, markersize=6, label="mean hole direction")
    ax.set_aspect("equal")
    ax.set_xlim(-1.1, 1.1)
    ax.set_ylim(-1.1, 1.15)
    ax.axis("off")
    ax.legend(loc="lower left", fontsize=7, frameon=False, bbox_to_anchor=(-0.05, -0.08))
    ax.set_title("axes, lower hemisphere, equal area;\ndotted: 95% of bootstrap axes", fontsize=8)
    return png(figure)


def drill_pattern(xyz, hole, pattern: dict, model: dict | None) -> bytes:
    """Plan of the composites by hole, the collars, the drill-line trend and the model's major and
    semi-major axes drawn at their ranges from the centre."""
    xyz = np.asarray(xyz)
    figure, ax = plt.subplots(figsize=(5.6, 5.0))
    ax.scatter(xyz[:, 0], xyz[:, 1], s=0.5, c=np.asarray(hole) % 7, cmap="tab10", alpha=0.5)
    from engine.pattern import hole_ends

    tops, _ = hole_ends(xyz, np.asarray(hole))
    ax.plot(tops[:, 0], tops[:, 1], "k.", markersize=2.5, label="top composite of each hole")
    centre = xyz[:, :2].mean(axis=0)
    if model is not None:
        for name, colour in (("major", FLAG), ("semi_major", MODEL)):
            v = np.asarray(model["axes"][name][:2])
            r = max(s["ranges"][name] for s in model["structures"])
            if float(np.linalg.norm(v)) < 1e-6:  # a vertical axis has no length in plan
                continue
            end = v * r  # the range along the axis, seen in plan
            ax.annotate("", xy=centre + end, xytext=centre - end,
                        arrowprops=dict(arrowstyle="<->", color=colour, linewidth=1.8))
            ax.plot([], [], color=colour, label=f"{name.replace('_', '-')} range in plan")
    lines = pattern.get("lines")
    if lines and lines.get("strength", 0) > 0.3:
        t = math.radians(lines["trend"])
        d = np.array([math.sin(t), math.cos(t)]) * 0.4 * float(np.ptp(xyz[:, 0]))
        ax.plot([centre[0] - d[0], centre[0] + d[0]], [centre[1] - d[1], centre[1] + d[1]], color=QUIET,
                linestyle="--", label="drill lines")
    ax.set_aspect("equal")
    ax.set_xlabel("east (m)")
    ax.set_ylabel("north (m)")
    ax.legend(frameon=False, fontsize=7, loc="upper left")
    ax.set_title("Composites in plan, coloured by hole")
    return png(figure)
