"""Seeded synthetic drill programs with a known truth: the Tarn Hill scenario.

Tarn Hill is an invented gold prospect. Holes ``TH0001``... are collared on drill lines (a grid when
the spacings along and across the lines are equal, fences otherwise), rotated and jittered, and drilled
inclined with azimuth and dip drift. Samples have irregular lengths with unsampled gaps. Two domains:
``OXIDE`` above a weathering surface and ``FRESH`` below it, with different mean grades. Grades come
from a spectral Gaussian random field with a known anisotropy ellipsoid (nugget plus nested
structures), optionally with a linear trend and a lognormal transform. ``truth.json`` records it all.
"""

from __future__ import annotations

import json
from dataclasses import asdict, dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from engine.desurvey import Desurvey
from engine.orientation import axes_from_plane, orientation_from_axes
from engine.outputs import write_csv, write_json

from .field import SHAPES, SpectralField

PREFIX = "TH"


@dataclass
class Structure:
    """One nested structure: shape, sill and practical ranges along major, semi-major, minor (m)."""

    shape: str = "spherical"
    sill: float = 0.6
    major_m: float = 120.0
    semi_major_m: float = 60.0
    minor_m: float = 20.0

    def __post_init__(self):
        if self.shape not in SHAPES:
            raise ValueError(f"shape {self.shape!r}: use one of {', '.join(SHAPES)}")
        if not self.major_m >= self.semi_major_m >= self.minor_m > 0:
            raise ValueError("ranges must satisfy major >= semi-major >= minor > 0")


@dataclass
class FieldSpec:
    """The grade field. Orientation: plane of major and semi-major axes (dip direction, dip) and the
    pitch of the major axis in it, degrees (docs/conventions.md)."""

    nugget: float = 0.15
    structures: list = field(default_factory=lambda: [
        Structure("spherical", 0.45, 40.0, 25.0, 8.0),
        Structure("spherical", 0.40, 150.0, 80.0, 30.0),
    ])
    dip_direction_deg: float = 120.0
    dip_deg: float = 35.0
    pitch_deg: float = 30.0
    mean: dict = field(default_factory=lambda: {"OXIDE": 5.0, "FRESH": 6.0})
    trend_per_100m: tuple = (0.0, 0.0, 0.0)  # grade change per 100 m east, north, up
    lognormal: bool = False  # when true, grade = exp(mean + field): the model is that of ln(grade)
    features: int = 2000


@dataclass
class ProgramSpec:
    """A drill program. Lengths in metres, angles in degrees, dip negative down."""

    n_along: int = 12
    n_lines: int = 10
    along_m: float = 25.0
    across_m: float = 25.0
    line_azimuth_deg: float = 30.0
    jitter_m: float = 2.0
    origin: tuple = (24500.0, 61200.0, 410.0)
    hole_length_m: float = 200.0
    length_scatter_m: float = 20.0
    azimuth_deg: float = 300.0
    dip_deg: float = -60.0
    angle_scatter_deg: float = 2.0
    azimuth_drift_deg_per_100m: float = 3.0
    dip_drift_deg_per_100m: float = 2.0  # positive: holes flatten with depth
    survey_spacing_m: float = 30.0
    survey_noise_deg: float = 0.2
    sample_lengths_m: tuple = (0.5, 1.0, 1.0, 1.0, 1.5, 2.0)
    gap_probability: float = 0.03
    gap_length_m: tuple = (1.0, 6.0)
    unsampled_top_m: float = 2.0
    oxide_depth_m: float = 35.0
    density: dict = field(default_factory=lambda: {"OXIDE": 2.30, "FRESH": 2.75})
    density_missing_probability: float = 0.02
    field: FieldSpec = field(default_factory=FieldSpec)


@dataclass
class Program:
    """Generated tables and the truth behind them."""

    collars: pd.DataFrame
    surveys: pd.DataFrame
    intervals: pd.DataFrame
    truth: dict
    noise: np.ndarray | None = None  # each interval's own nugget draw (not written): truths at composite support

    def write(self, folder) -> dict[str, Path]:
        """Write ``collars.csv``, ``surveys.csv``, ``intervals.csv`` and ``truth.json``."""
        folder = Path(folder)
        folder.mkdir(parents=True, exist_ok=True)
        paths = {name: folder / f"{name}.csv" for name in ("collars", "surveys", "intervals")}
        write_csv(self.collars, paths["collars"])
        write_csv(self.surveys, paths["surveys"])
        write_csv(self.intervals, paths["intervals"])
        paths["truth"] = folder / "truth.json"
        write_json(self.truth, paths["truth"])
        return paths


def _collars(spec: ProgramSpec, rng) -> pd.DataFrame:
    i, j = np.meshgrid(np.arange(spec.n_along), np.arange(spec.n_lines), indexing="xy")
    along = (i.ravel() - (spec.n_along - 1) / 2) * spec.along_m
    across = (j.ravel() - (spec.n_lines - 1) / 2) * spec.across_m
    a = np.radians(spec.line_azimuth_deg)
    line_dir = np.array([np.sin(a), np.cos(a)])  # along the drill lines
    normal = np.array([np.cos(a), -np.sin(a)])  # across them
    xy = along[:, None] * line_dir + across[:, None] * normal
    xy += rng.normal(0.0, spec.jitter_m, size=xy.shape)
    x = spec.origin[0] + xy[:, 0]
    y = spec.origin[1] + xy[:, 1]
    z = spec.origin[2] + 6.0 * np.sin(xy[:, 0] / 160.0) + 4.0 * np.cos(xy[:, 1] / 210.0)
    n = len(x)
    depth = np.round(spec.hole_length_m + rng.uniform(-1, 1, n) * spec.length_scatter_m, 1)
    return pd.DataFrame({
        "hole_id": [f"{PREFIX}{k + 1:04d}" for k in range(n)],
        "east": np.round(x, 3), "north": np.round(y, 3), "elevation": np.round(z, 3),
        "max_depth": depth,
    })


def _surveys(spec: ProgramSpec, collars: pd.DataFrame, rng) -> pd.DataFrame:
    rows = []
    for hole, depth in zip(collars["hole_id"], collars["max_depth"]):
        at = np.arange(0.0, depth, spec.survey_spacing_m)
        at = np.append(at, depth)
        az0 = spec.azimuth_deg + rng.normal(0, spec.angle_scatter_deg)
        dip0 = spec.dip_deg + rng.normal(0, spec.angle_scatter_deg)
        az = az0 + spec.azimuth_drift_deg_per_100m * at / 100 + rng.normal(0, spec.survey_noise_deg, len(at))
        dip = dip0 + spec.dip_drift_deg_per_100m * at / 100 + rng.normal(0, spec.survey_noise_deg, len(at))
        rows.append(pd.DataFrame({"hole_id": hole, "depth": at, "azimuth": np.round(az % 360.0, 2),
                                  "dip": np.round(np.clip(dip, -89.9, -1.0), 2)}))
    return pd.concat(rows, ignore_index=True)


def _sample_intervals(spec: ProgramSpec, collars: pd.DataFrame, rng) -> pd.DataFrame:
    holes, froms, tos = [], [], []
    lengths = np.asarray(spec.sample_lengths_m, dtype=np.float64)
    for hole, depth in zip(collars["hole_id"], collars["max_depth"]):
        count = int(depth / lengths.min()) + 2
        step = rng.choice(lengths, size=count)
        gap = np.where(rng.uniform(size=count) < spec.gap_probability,
                       rng.uniform(*spec.gap_length_m, size=count), 0.0)
        start = spec.unsampled_top_m + np.concatenate([[0.0], np.cumsum(step + gap)[:-1]])
        start = np.round(start, 2)
        end = np.round(start + step, 2)
        keep = start < depth - 0.05
        start, end = start[keep], np.minimum(end[keep], depth)
        holes.append(np.full(len(start), hole, dtype=object))
        froms.append(start)
        tos.append(end)
    return pd.DataFrame({"hole_id": np.concatenate(holes), "from": np.concatenate(froms),
                         "to": np.concatenate(tos)})


def generate_program(spec: ProgramSpec | None = None, seed: int = 0) -> Program:
    """Generate a drill program from ``spec`` with the random generator seeded by ``seed``.

    Example
    -------
    >>> program = generate_program(ProgramSpec(n_along=4, n_lines=3, hole_length_m=80), seed=3)
    >>> len(program.collars), program.truth["model"]["range_convention"]
    (12, 'practical')
    """
    spec = spec or ProgramSpec()
    rng = np.random.default_rng(seed)
    collars = _collars(spec, rng)
    surveys = _surveys(spec, collars, rng)
    intervals = _sample_intervals(spec, collars, rng)

    trace = Desurvey().fit(
        collars.rename(columns={"hole_id": "hole", "east": "x", "north": "y", "elevation": "z",
                                "max_depth": "depth"}),
        surveys.rename(columns={"hole_id": "hole", "depth": "survey_depth"}),
    )
    holes = intervals["hole_id"].to_numpy()
    top = trace.positions(holes, intervals["from"].to_numpy())
    bottom = trace.positions(holes, intervals["to"].to_numpy())
    mid = 0.5 * (top + bottom)
    chord = bottom - top
    length = np.linalg.norm(chord, axis=1)
    direction = chord / length[:, None]

    f = spec.field
    axes = axes_from_plane(f.dip_direction_deg, f.dip_deg, f.pitch_deg)
    centre = np.array([spec.origin[0], spec.origin[1], spec.origin[2] - spec.hole_length_m / 2])
    gaussian = SpectralField(
        [(s.shape, s.sill, (s.major_m, s.semi_major_m, s.minor_m)) for s in f.structures],
        axes, rng, features=f.features, origin=centre,
    ).values(mid, direction, length)
    noise = rng.normal(0.0, np.sqrt(f.nugget), size=len(mid)) if f.nugget > 0 else np.zeros(len(mid))
    gaussian += noise

    # weathering surface: oxide_depth_m below the collar surface, interpolated from the nearest collar
    collar_xyz = trace.collar_xyz_
    index = trace.hole_index(holes)
    vertical_below_collar = collar_xyz[index, 2] - mid[:, 2]
    domain = np.where(vertical_below_collar < spec.oxide_depth_m, "OXIDE", "FRESH").astype(object)
    mean = np.array([f.mean[d] for d in domain])
    trend = (mid - centre) @ (np.asarray(f.trend_per_100m, dtype=np.float64) / 100.0)
    grade = mean + gaussian + trend
    if f.lognormal:
        grade = np.exp(grade)
    density = np.array([spec.density[d] for d in domain]) + rng.normal(0, 0.04, len(mid))
    density[rng.uniform(size=len(mid)) < spec.density_missing_probability] = np.nan
    high = grade > np.quantile(grade, 0.9)
    intervals["au_gpt"] = np.round(grade, 4)
    intervals["density"] = np.round(density, 3)
    intervals["domain"] = domain
    intervals["lith"] = np.where(high, "QUARTZ VEIN", "SCHIST")

    orientation = orientation_from_axes(axes)
    truth = {
        "schema": "drillaxis.truth/1",
        "scenario": "Tarn Hill (invented)",
        "seed": int(seed),
        "variable": "au_gpt",
        "model": {
            "transform": "log" if f.lognormal else "none",
            "nugget": f.nugget,
            "structures": [
                {"shape": s.shape, "sill": s.sill,
                 "ranges": {"major": s.major_m, "semi_major": s.semi_major_m, "minor": s.minor_m}}
                for s in f.structures
            ],
            "axes": orientation.pop("axes"),
            "orientation": orientation,
            "range_convention": "practical",
            "support": "point model; each sample's value is the line average of the field over the "
                       "sample plus independent nugget noise",
        },
        "domains": {"rule": f"OXIDE where the sample mid-point is less than {spec.oxide_depth_m} m "
                            "vertically below its collar, else FRESH", "mean": f.mean},
        "trend_per_100m": {"east": f.trend_per_100m[0], "north": f.trend_per_100m[1],
                           "up": f.trend_per_100m[2], "centre": centre.tolist()},
        "spec": json.loads(json.dumps(asdict(spec))),
        "counts": {"holes": len(collars), "surveys": len(surveys), "intervals": len(intervals),
                   "sampled_m": float((intervals["to"] - intervals["from"]).sum())},
    }
    return Program(collars, surveys, intervals, truth, noise)
