"""Recovery scenarios: synthetic programs whose truth the fit should find, composited in process.

``recovery_spec`` is the Tarn Hill program used by the recovery test and benchmark: inclined holes
(-60 towards 300) on a grid rotated 30 degrees, 2 m samples (the composite length, so the nugget
keeps its support), one spherical structure with ranges 120 / 60 / 25 m (major to minor 4.8) in a
plane dipping 35 towards 120 with the major axis pitching 30 degrees: neither horizontal nor along a
grid line.

``SCENARIOS`` set their truth at sample support instead: samples of 0.5 to 1.5 m, each with its own
nugget draw, composited to 2 m, so that the composites carry less nugget than the samples (the
support effect) and the truth at composite support is found by compositing the nugget draws alone.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from engine.composite import CompositeOptions, composite
from engine.desurvey import Desurvey

from .program import FieldSpec, ProgramSpec, Structure, generate_program


def recovery_spec(**changes) -> ProgramSpec:
    field = FieldSpec(nugget=0.1, structures=[Structure("spherical", 0.9, 120.0, 60.0, 25.0)],
                      dip_direction_deg=120.0, dip_deg=35.0, pitch_deg=30.0, mean={"OXIDE": 5.0, "FRESH": 5.0})
    base = dict(n_along=14, n_lines=12, along_m=25.0, across_m=25.0, line_azimuth_deg=30.0, hole_length_m=220.0,
                sample_lengths_m=(2.0,), gap_probability=0.0, oxide_depth_m=0.0, field=field)
    base.update(changes)
    return ProgramSpec(**base)


IRREGULAR_SAMPLES_M = (0.5, 0.75, 1.0, 1.25, 1.5)


def _field(nugget, shape, sill, ranges, dip_direction, dip, pitch):
    return FieldSpec(nugget=nugget, structures=[Structure(shape, sill, *ranges)], dip_direction_deg=dip_direction,
                     dip_deg=dip, pitch_deg=pitch, mean={"OXIDE": 5.0, "FRESH": 5.0})


#: Programs whose truth is set at sample support (see the module's note).
SCENARIOS = {
    # inclined holes across an oblique lode (the recovery program with irregular samples)
    "oblique lode": dict(field=_field(0.15, "spherical", 0.85, (120.0, 60.0, 25.0), 120.0, 35.0, 30.0)),
    # a flat blanket drilled by vertical holes 45 m apart: the 14 m axis is vertical, along the holes
    "flat blanket": dict(n_along=10, n_lines=10, along_m=45.0, across_m=45.0, line_azimuth_deg=0.0,
                         hole_length_m=120.0, azimuth_deg=0.0, dip_deg=-90.0, angle_scatter_deg=0.5,
                         azimuth_drift_deg_per_100m=0.0, dip_drift_deg_per_100m=0.0,
                         field=_field(0.15, "exponential", 0.85, (210.0, 110.0, 14.0), 90.0, 0.0, 30.0)),
    # a steep shoot (major axis plunging about 70 degrees) drilled by holes along no axis
    "steep shoot": dict(azimuth_deg=130.0, dip_deg=-55.0, hole_length_m=200.0,
                        field=_field(0.15, "spherical", 0.85, (150.0, 50.0, 20.0), 200.0, 75.0, 80.0)),
    # an exponential structure under a nugget of 40% of the sill at sample support
    "strong nugget": dict(field=_field(0.4, "exponential", 0.6, (120.0, 80.0, 30.0), 120.0, 35.0, 30.0)),
}


def scenario_spec(name: str, **changes) -> ProgramSpec:
    """The program of one of SCENARIOS (irregular samples, no gaps, one domain), with ``changes``."""
    return recovery_spec(**{"sample_lengths_m": IRREGULAR_SAMPLES_M, **SCENARIOS[name], **changes})


def composites_of(program, length_m: float = 2.0, value: str = "au_gpt"):
    """Desurvey and composite a generated program; arrays (xyz, values, hole, depth) and the frame."""
    collars = program.collars.rename(columns={"hole_id": "hole", "east": "x", "north": "y", "elevation": "z",
                                              "max_depth": "depth"})
    trace = Desurvey().fit(collars, program.surveys.rename(columns={"hole_id": "hole", "depth": "survey_depth"}))
    intervals = program.intervals.rename(columns={"hole_id": "hole"})[["hole", "from", "to", value]]
    result = composite(intervals, [value], CompositeOptions(length_m=length_m), trace)
    c = result.composites.dropna(subset=[value])
    xyz = c[["x", "y", "z"]].to_numpy()
    hole = pd.factorize(c["hole"])[0]
    depth = 0.5 * (c["from"] + c["to"]).to_numpy()
    return xyz, c[value].to_numpy(dtype=np.float64), hole, depth, c


def axis_errors_deg(fitted_axes, true_axes) -> list[float]:
    """Angles (degrees) between corresponding axes, either sense."""
    out = []
    for a in range(3):
        c = abs(float(np.dot(fitted_axes[a], true_axes[a])))
        out.append(float(np.degrees(np.arccos(min(1.0, c)))))
    return out


def samples_of(program, frame, value: str = "au_gpt"):
    """The intervals behind composites ``frame`` (of composites_of) as engine.nugget.Intervals numbered
    by the composites' holes, and the composites' effective numbers of samples."""
    from engine.nugget import Intervals

    intervals = program.intervals
    names = pd.factorize(frame["hole"])[1]
    code = pd.Index(names).get_indexer(intervals["hole_id"])
    keep = code >= 0
    return (Intervals(code[keep], intervals["from"].to_numpy(dtype=np.float64)[keep],
                      intervals["to"].to_numpy(dtype=np.float64)[keep],
                      intervals[value].to_numpy(dtype=np.float64)[keep]),
            frame[f"{value}_effective_samples"].to_numpy(dtype=np.float64))


def composite_nugget_truth(program, frame, length_m: float = 2.0) -> float:
    """The variance of the nugget draws composited alone on the composites' layout: the nugget the
    composites truly carry (divide by the composites' variance for its share)."""
    collars = program.collars.rename(columns={"hole_id": "hole", "east": "x", "north": "y", "elevation": "z",
                                              "max_depth": "depth"})
    trace = Desurvey().fit(collars, program.surveys.rename(columns={"hole_id": "hole", "depth": "survey_depth"}))
    intervals = program.intervals.rename(columns={"hole_id": "hole"})[["hole", "from", "to"]].assign(
        noise=program.noise)
    noise = composite(intervals, ["noise"], CompositeOptions(length_m=length_m), trace).composites
    noise = noise.set_index(["hole", "from"])["noise"]
    return float(np.var(noise.reindex(pd.MultiIndex.from_arrays([frame["hole"], frame["from"]])).to_numpy(), ddof=1))


def recover(seed: int, bootstrap: int = 0, spec: ProgramSpec | None = None, threads=None, **options):
    """Generate, composite and fit one seed (``options``: more FitOptions); the fit result, the
    truth model and (positions, holes) of the composites."""
    from engine.fit import FitOptions, VariogramFitter
    from engine.model import Model

    program = generate_program(spec or recovery_spec(), seed=seed)
    xyz, values, hole, depth, _ = composites_of(program)
    fitter = VariogramFitter(FitOptions(bootstrap=bootstrap, seed=seed, threads=threads, **options))
    fitter.fit(xyz, values, hole, depth, composite_length=2.0)
    return fitter.result_, Model.from_json(program.truth["model"]), (xyz, hole)


def recover_scenario(name: str, seed: int, bootstrap: int = 0, threads=None, **options):
    """Generate one of SCENARIOS, composite it to 2 m and fit it with the samples behind the
    composites (as ``run`` does). Returns (fit result, truth model, the nugget the composites truly
    carry, the composites' variance)."""
    from engine.fit import FitOptions, VariogramFitter
    from engine.model import Model

    program = generate_program(scenario_spec(name), seed=seed)
    xyz, values, hole, depth, frame = composites_of(program)
    samples, effective = samples_of(program, frame)
    fitter = VariogramFitter(FitOptions(bootstrap=bootstrap, seed=seed, threads=threads, **options))
    fitter.fit(xyz, values, hole, depth, 2.0, ends=frame[["from", "to"]].to_numpy(), samples=samples,
               effective_samples=effective)
    return (fitter.result_, Model.from_json(program.truth["model"]), composite_nugget_truth(program, frame),
            float(np.var(values, ddof=1)))
