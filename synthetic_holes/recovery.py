"""Recovery scenarios: synthetic programs whose truth the fit should find, composited in process.

``recovery_spec`` is the Tarn Hill program used by the recovery test and benchmark: inclined holes
(-60 towards 300) on a grid rotated 30 degrees, 2 m samples (the composite length, so the nugget
keeps its support), one spherical structure with ranges 120 / 60 / 25 m (major to minor 4.8) in a
plane dipping 35 towards 120 with the major axis pitching 30 degrees: neither horizontal nor along a
grid line.
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
