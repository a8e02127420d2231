"""Compositing that keeps metal: fixed-length, equal-length, whole-run and bench composites.

A *run* is a stretch of one hole from its first to its last sample, broken at every change of the
domain column when one is given: no composite spans a contact. Inside a run, unsampled stretches are
missing, never zero: a composite's value averages its sampled length only, and each value column has
its own sampled length (assays are missing for different intervals). Values are weighted by length,
or by length x density. Every metre of metal is accounted for: what the composites hold plus what was
left out (dropped residuals, composites below the minimum coverage) equals the input, per hole,
domain and value column, to round-off (``check`` table). Conventions: docs/conventions.md; method:
docs/methods.md.

Example
-------
>>> import pandas as pd
>>> samples = pd.DataFrame({"hole": ["A"] * 4, "from": [0.0, 1.5, 2.0, 4.0], "to": [1.5, 2.0, 4.0, 5.3],
...                         "au": [2.0, 8.0, 1.0, 0.5]})
>>> result = composite(samples, ["au"], CompositeOptions(length_m=2.0))
>>> result.composites[["from", "to", "au"]].round(6).values.tolist()
[[0.0, 2.0, 3.5], [2.0, 4.0, 1.0], [4.0, 5.3, 0.5]]
>>> merged = composite(samples, ["au"], CompositeOptions(length_m=2.0, merge_below=1.0))
>>> merged.composites[["from", "to", "au"]].round(6).values.tolist()
[[0.0, 2.0, 3.5], [2.0, 5.3, 0.80303]]
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field

import numba
import numpy as np
import pandas as pd

from ._jit import jit_parallel
from .errors import UsageError, ValidationError, list_some

RESIDUAL_RULES = ("merge", "drop", "keep")
MODES = ("length", "whole-run", "bench")
EDGE_TOLERANCE_M = 1e-9  # residuals and overlaps shorter than this are round-off (metres)
MAX_COMPOSITES = 20_000_000  # more pieces than this is a mistaken length, not a composite file
BENCH_TRACE_STEP_M = 0.25  # spacing of the trace points used to find bench crossings


@dataclass
class CompositeOptions:
    """How to composite.

    Parameters
    ----------
    length_m : float
        Composite length L (``mode="length"``).
    domain : str, optional
        Category column whose changes break runs.
    residual : {"merge", "drop", "keep"}
        The rule for the last piece of a run shorter than L: ``merge`` joins it to the previous
        composite of the run when shorter than ``merge_below`` x L (a longer one stays as its own
        composite); ``drop`` leaves it out (listed with its metal); ``keep`` keeps it as its own
        composite.
    merge_below : float
        Fraction of L below which ``merge`` joins a residual to the previous composite (default 0.5;
        1 merges every residual).
    equal : bool
        Split each run into round(run / L) composites of equal length instead (no residual).
    min_coverage : float
        Composites whose sampled length / length is below this are left out (listed).
    density : str, optional
        Value column of density: weight by length x density.
    density_default : float, optional
        Density used where the density column is missing (each such sample is counted).
    mode : {"length", "whole-run", "bench"}
        Fixed-length composites, one composite per run, or slices of elevation.
    bench_height_m, bench_base_m : float
        Bench height H and an elevation on a bench boundary (``mode="bench"``).
    caps : dict
        Column -> cap value; values above it are set to it before compositing.
    """

    length_m: float | None = None
    domain: str | None = None
    residual: str = "merge"
    merge_below: float = 0.5
    equal: bool = False
    min_coverage: float = 0.5
    density: str | None = None
    density_default: float | None = None
    mode: str = "length"
    bench_height_m: float | None = None
    bench_base_m: float = 0.0
    caps: dict = field(default_factory=dict)

    def validate(self, value_columns, category_columns=()):
        if self.mode not in MODES:
            raise UsageError(f"composite mode {self.mode!r}: use one of {', '.join(MODES)}.")
        if self.mode == "length":
            if self.length_m is None or not (self.length_m > 0) or not math.isfinite(self.length_m):
                raise UsageError(f"--length {self.length_m!r}: give a composite length above zero, in metres.")
        if self.mode == "bench" and not (self.bench_height_m and self.bench_height_m > 0):
            raise UsageError(f"--bench {self.bench_height_m!r}: give a bench height above zero, in metres.")
        if self.residual not in RESIDUAL_RULES:
            raise UsageError(f"--residual {self.residual!r}: use one of {', '.join(RESIDUAL_RULES)}.")
        if not 0.0 < self.merge_below <= 1.0:
            raise UsageError(f"--merge-below {self.merge_below!r}: give a fraction above 0, up to 1.")
        if not 0.0 <= self.min_coverage <= 1.0:
            raise UsageError(f"--min-coverage {self.min_coverage!r}: give a fraction from 0 to 1.")
        if self.domain is not None and self.domain not in category_columns:
            found = ", ".join(map(repr, list(category_columns) + list(value_columns)))
            raise UsageError(f"--domain {self.domain!r}: no such category column. Interval columns: {found}.")
        if self.density is not None and self.density not in value_columns:
            raise UsageError(f"--density {self.density!r}: no such value column. Value columns: "
                             f"{', '.join(map(repr, value_columns))}.")
        if self.density_default is not None and not (self.density_default > 0):
            raise UsageError(f"--density-default {self.density_default!r}: a density must be above zero.")
        for column, cap in self.caps.items():
            if column not in value_columns:
                raise UsageError(f"--cap {column}={cap}: no such value column.")

    def weighting(self) -> str:
        if self.density is None:
            return "length-weighted: sum(length x value) / sum(length) over the sampled length"
        text = (f"length x density weighted by column {self.density!r}: sum(length x density x value) / "
                f"sum(length x density) over the sampled length; the density column itself is "
                "length-weighted")
        if self.density_default is not None:
            text += f"; missing density taken as {self.density_default:g}"
        return text


@dataclass
class CompositeResult:
    """Composites, what was left out, the metal reconciliation and a summary."""

    composites: pd.DataFrame
    left_out: pd.DataFrame
    check: pd.DataFrame
    summary: dict
    warnings: list


# --------------------------------------------------------------------------------------------
# kernel
# --------------------------------------------------------------------------------------------


@jit_parallel
def _accumulate(run_samples, run_composites, s_from, s_to, weight, values, weighted, c_from, c_to):
    """Per composite: sampled length of any value, and per value column the sampled length, the
    mass (sum of overlap x weight), the metal (sum of overlap x weight x value) and the sum of the
    squared masses of the samples (for the effective number of samples)."""
    n_runs = run_samples.shape[0] - 1
    n_values = values.shape[1]
    n_comp = c_from.shape[0]
    coverage = np.zeros(n_comp)
    sampled = np.zeros((n_comp, n_values))
    mass = np.zeros((n_comp, n_values))
    metal = np.zeros((n_comp, n_values))
    mass2 = np.zeros((n_comp, n_values))
    for r in numba.prange(n_runs):
        s = run_samples[r]
        s_end = run_samples[r + 1]
        for c in range(run_composites[r], run_composites[r + 1]):
            a = c_from[c]
            b = c_to[c]
            while s < s_end and s_to[s] <= a:
                s += 1
            k = s
            while k < s_end and s_from[k] < b:
                overlap = min(b, s_to[k]) - max(a, s_from[k])
                if overlap > EDGE_TOLERANCE_M:  # slivers of round-off between edges are not samples
                    coverage[c] += overlap
                    for v in range(n_values):
                        x = values[k, v]
                        if not np.isnan(x):
                            w = overlap * weight[k] if weighted[v] else overlap
                            sampled[c, v] += overlap
                            mass[c, v] += w
                            metal[c, v] += w * x
                            mass2[c, v] += w * w
                k += 1
    return coverage, sampled, mass, metal, mass2


# --------------------------------------------------------------------------------------------
# runs and composite edges
# --------------------------------------------------------------------------------------------


def _runs(hole_code, domain_code, d_from, d_to):
    """Run index of each sample (sorted by hole and depth), and per run: first sample, top, bottom."""
    n = len(hole_code)
    start = np.ones(n, dtype=bool)
    if n > 1:
        start[1:] = (hole_code[1:] != hole_code[:-1]) | (domain_code[1:] != domain_code[:-1])
    run = np.cumsum(start) - 1
    first = np.flatnonzero(start)
    run_samples = np.r_[first, n].astype(np.int64)
    top = d_from[first]
    bottom = np.maximum.reduceat(d_to, first) if n else np.zeros(0)
    return run, run_samples, top, bottom


def _length_edges(top, bottom, options: CompositeOptions):
    """Composite edges of each run for fixed or equal lengths.

    Returns (c_from, c_to, c_run, residual) where ``residual`` marks pieces that are residuals
    (shorter than L at the end of a run) kept as their own composite or to be dropped.
    """
    span = bottom - top
    L = float(options.length_m)
    _refuse_too_many(float(np.sum(span)) / L + len(span), f"--length {L:g}")
    if options.equal:
        count = np.maximum(1, np.round(span / L)).astype(np.int64)
        c_run = np.repeat(np.arange(len(top)), count)
        index = np.arange(len(c_run)) - np.repeat(np.cumsum(count) - count, count)
        piece = span[c_run] / count[c_run]
        c_from = top[c_run] + index * piece[0:len(c_run)]
        c_to = np.where(index == count[c_run] - 1, bottom[c_run], top[c_run] + (index + 1) * piece)
        return c_from, c_to, c_run, np.zeros(len(c_run), dtype=bool)
    full = np.floor(span / L + EDGE_TOLERANCE_M / L).astype(np.int64)
    rest = span - full * L
    has_rest = rest > EDGE_TOLERANCE_M
    merge = has_rest & (options.residual == "merge") & (rest < options.merge_below * L) & (full >= 1)
    own_rest = has_rest & ~merge
    count = full + own_rest
    c_run = np.repeat(np.arange(len(top)), count)
    index = np.arange(len(c_run)) - np.repeat(np.cumsum(count) - count, count)
    c_from = top[c_run] + index * L
    last = index == count[c_run] - 1
    c_to = np.where(last, bottom[c_run], top[c_run] + (index + 1) * L)
    # the edges of one run must be shared floats so that overlaps telescope exactly
    c_from[1:] = np.where(c_run[1:] == c_run[:-1], c_to[:-1], c_from[1:])
    residual = last & own_rest[c_run]
    return c_from, c_to, c_run, residual


def _bench_edges(top, bottom, run_hole, trace, options: CompositeOptions):
    """Pieces of each run between the depths where the hole crosses bench boundaries, with the
    bench centre elevation of each piece."""
    H = float(options.bench_height_m)
    base = float(options.bench_base_m)
    _refuse_too_many(float(np.sum(bottom - top)) / H + len(top), f"--bench {H:g}")
    steps = np.maximum(2, np.ceil((bottom - top) / BENCH_TRACE_STEP_M).astype(np.int64) + 1)
    g_run = np.repeat(np.arange(len(top)), steps)
    g_index = np.arange(len(g_run)) - np.repeat(np.cumsum(steps) - steps, steps)
    g_depth = top[g_run] + (bottom - top)[g_run] * g_index / (steps[g_run] - 1)
    z = trace.positions(run_hole[g_run], g_depth)[:, 2]
    level = np.floor((z - base) / H)
    same_run = g_run[1:] == g_run[:-1]
    cross = same_run & (level[1:] != level[:-1])
    i = np.flatnonzero(cross)
    # the boundary crossed lies between the two levels: interpolate its depth linearly
    boundary = base + H * np.maximum(level[i], level[i + 1])
    f = (boundary - z[i]) / (z[i + 1] - z[i])
    cross_depth = g_depth[i] + f * (g_depth[i + 1] - g_depth[i])
    edges_run = np.concatenate([np.arange(len(top)), g_run[i], np.arange(len(top))])
    edges_depth = np.concatenate([top, cross_depth, bottom])
    order = np.lexsort((edges_depth, edges_run))
    edges_run, edges_depth = edges_run[order], edges_depth[order]
    keep = (edges_run[1:] == edges_run[:-1]) & (edges_depth[1:] > edges_depth[:-1] + EDGE_TOLERANCE_M)
    c_from = edges_depth[:-1][keep]
    c_to = edges_depth[1:][keep]
    c_run = edges_run[:-1][keep]
    return c_from, c_to, c_run


def _refuse_too_many(count: float, option: str) -> None:
    if count > MAX_COMPOSITES:
        raise UsageError(f"{option}: that would cut the runs into about {count:.3g} composites (at most "
                         f"{MAX_COMPOSITES:,}); give a length of the order of the samples' (metres, for example 2).")


# --------------------------------------------------------------------------------------------
# the public function
# --------------------------------------------------------------------------------------------


def composite(intervals: pd.DataFrame, value_columns, options: CompositeOptions, trace=None) -> CompositeResult:
    """Composite interval samples.

    Parameters
    ----------
    intervals : DataFrame
        Columns ``hole, from, to`` (metres), the value columns and, when compositing by domain, the
        domain column. Rows must not overlap within a hole (validate first).
    value_columns : list of str
    options : CompositeOptions
    trace : engine.desurvey.Desurvey, optional
        Fitted hole traces: gives the composites' positions (mid, start and end points); needed for
        bench composites.
    """
    value_columns = list(value_columns)
    category_columns = [c for c in intervals.columns
                        if c not in value_columns and c not in ("hole", "from", "to", "_line")]
    options.validate(value_columns, category_columns)
    if options.mode == "bench" and trace is None:
        raise UsageError("bench composites need the hole traces (collars and surveys).")
    warnings = []
    frame = intervals
    hole_code, hole_ids = pd.factorize(frame["hole"], sort=False)
    hole_ids = np.asarray(hole_ids, dtype=object)
    if options.domain:
        if options.domain != "domain" and "domain" in value_columns + category_columns:
            raise UsageError(f"--domain {options.domain!r}: the intervals also hold a column named 'domain', which "
                             "the composites' own domain column would hide; rename one of them.")
        domain_code, domain_ids = pd.factorize(frame[options.domain], sort=True, use_na_sentinel=False)
        domain_ids = np.asarray([("" if pd.isna(d) else str(d)) for d in domain_ids], dtype=object)
        blank = int((domain_ids[domain_code] == "").sum())
        if blank:
            warnings.append(f"{blank} sample(s) have no value in the domain column {options.domain!r}: they are "
                            "composited as a domain of their own, named '' (empty); assign them a domain to use them")
    else:
        domain_code, domain_ids = np.zeros(len(frame), dtype=np.int64), np.array([""], dtype=object)
    d_from = frame["from"].to_numpy(dtype=np.float64)
    d_to = frame["to"].to_numpy(dtype=np.float64)
    in_order = bool(np.all((hole_code[1:] > hole_code[:-1])
                           | ((hole_code[1:] == hole_code[:-1]) & (d_from[1:] >= d_from[:-1]))))
    order = np.arange(len(d_from)) if in_order else np.lexsort((d_from, hole_code))
    hole_code, domain_code, d_from, d_to = hole_code[order], domain_code[order], d_from[order], d_to[order]
    raw_values = np.column_stack([frame[c].to_numpy(dtype=np.float64)[order] for c in value_columns]) \
        if value_columns else np.zeros((len(frame), 0))
    values = raw_values.copy()

    # weights
    weighted = np.zeros(len(value_columns), dtype=np.bool_)
    weight = np.ones(len(frame))
    density_filled = 0
    if options.density:
        rho = frame[options.density].to_numpy(dtype=np.float64)[order]
        missing = np.isnan(rho)
        if missing.any():
            if options.density_default is None:
                raise ValidationError(
                    f"density column {options.density!r} is missing for {int(missing.sum())} sample(s) (holes "
                    + ", ".join(repr(h) for h in pd.unique(hole_ids[hole_code[missing]])[:5])
                    + "); give --density-default VALUE to use for them, or fill them in."
                )
            rho = np.where(missing, options.density_default, rho)
            density_filled = int(missing.sum())
            warnings.append(f"density missing for {density_filled} sample(s): taken as {options.density_default:g}")
        if (rho <= 0).any():
            bad = rho <= 0
            lines = frame["_line"].to_numpy()[order][bad] if "_line" in frame else []
            raise ValidationError(
                f"density column {options.density!r} has {int(bad.sum())} value(s) not above zero ("
                + (f"intervals lines {', '.join(map(str, lines[:5]))}{' ...' if len(lines) > 5 else ''}; "
                   if len(lines) else "")
                + "holes " + list_some(pd.unique(hole_ids[hole_code[bad]])) + "); fix them."
            )
        weight = rho
        weighted[:] = [c != options.density for c in value_columns]

    # capping, before compositing
    cap_rows = []
    length = d_to - d_from
    capped_metal = np.zeros((len(frame), len(value_columns)))
    for column, cap in options.caps.items():
        v = value_columns.index(column)
        over = values[:, v] > cap
        w = length * (weight if weighted[v] else 1.0)
        capped_metal[over, v] = (w * (values[:, v] - cap))[over]
        values[over, v] = cap
        cap_rows.append({"column": column, "cap": float(cap), "samples_capped": int(over.sum()),
                         "metal_removed": float(capped_metal[:, v].sum()),
                         "metal_before": float(np.nansum(w * raw_values[:, v]))})

    run, run_samples, top, bottom = _runs(hole_code, domain_code, d_from, d_to)
    run_first = run_samples[:-1]
    run_hole, run_domain = hole_code[run_first], domain_code[run_first]
    residual = None
    if options.mode == "length":
        c_from, c_to, c_run, residual = _length_edges(top, bottom, options)
    elif options.mode == "whole-run":
        c_from, c_to, c_run = top.copy(), bottom.copy(), np.arange(len(top))
    else:
        c_from, c_to, c_run = _bench_edges(top, bottom, hole_ids[run_hole], trace, options)
    if residual is None:
        residual = np.zeros(len(c_run), dtype=bool)
    run_composites = np.searchsorted(c_run, np.arange(len(top) + 1)).astype(np.int64)
    coverage, sampled, mass, metal, mass2 = _accumulate(
        run_samples, run_composites, np.ascontiguousarray(d_from), np.ascontiguousarray(d_to),
        np.ascontiguousarray(weight, dtype=np.float64), np.ascontiguousarray(values), weighted,
        np.ascontiguousarray(c_from), np.ascontiguousarray(c_to),
    )
    with np.errstate(invalid="ignore", divide="ignore"):
        value = metal / mass
    value[mass == 0] = np.nan
    empty = [c for v, c in enumerate(value_columns) if not np.isfinite(value[:, v]).any()]
    if empty:
        warnings.append(f"no composite holds a value of {list_some(empty)}: the column(s) have no sampled value")

    c_length = c_to - c_from
    dropped = residual & (options.residual == "drop") & (options.mode == "length") & (not options.equal)
    thin = ~dropped & (coverage < options.min_coverage * c_length - EDGE_TOLERANCE_M)
    keep = ~dropped & ~thin

    c_hole_code = run_hole[c_run]
    c_domain_code = run_domain[c_run]
    c_hole = pd.Categorical.from_codes(c_hole_code, categories=pd.Index(hole_ids, dtype=object))
    if trace is not None:
        trace_index = trace.hole_index(hole_ids)[c_hole_code]
        mid = trace.positions(trace_index, 0.5 * (c_from + c_to))
        start = trace.positions(trace_index, c_from)
        end = trace.positions(trace_index, c_to)
    else:
        mid = start = end = np.full((len(c_from), 3), np.nan)
    # every column built first and joined once: one insert per column fragments a wide table
    columns = {"hole": c_hole, "from": c_from, "to": c_to, "length": c_length, "sampled": coverage,
               "x": mid[:, 0], "y": mid[:, 1], "z": mid[:, 2]}
    if options.domain:
        columns["domain"] = pd.Categorical.from_codes(c_domain_code, categories=pd.Index(domain_ids, dtype=object))
        if options.domain != "domain":  # the input's own name too, so that COLUMN=VALUE selects as it reads
            columns[options.domain] = columns["domain"]
    for v, column in enumerate(value_columns):
        columns[column] = value[:, v]
    if options.mode == "bench":
        z_mid = mid[:, 2]
        columns["bench"] = options.bench_base_m + options.bench_height_m * (
            np.floor((z_mid - options.bench_base_m) / options.bench_height_m) + 0.5)
    for v, column in enumerate(value_columns):
        columns[f"{column}_sampled"] = sampled[:, v]
    with np.errstate(invalid="ignore", divide="ignore"):  # (sum w)^2 / sum w^2: 1 for one sample, n for n equal
        effective = np.where(mass2 > 0, mass * mass / mass2, np.nan)
    for v, column in enumerate(value_columns):
        columns[f"{column}_effective_samples"] = effective[:, v]
    columns.update({"x_from": start[:, 0], "y_from": start[:, 1], "z_from": start[:, 2],
                    "x_to": end[:, 0], "y_to": end[:, 1], "z_to": end[:, 2]})
    out = pd.DataFrame(columns)

    left = ~keep
    reasons = [
        f"residual of {length_m:.3g} m at the end of its run (rule drop)" if is_dropped else
        f"sampled {covered:.3g} m of {length_m:.3g} m is below the minimum coverage (sampled / length) of "
        f"{options.min_coverage:g}"
        for is_dropped, covered, length_m in zip(dropped[left], coverage[left], c_length[left])
    ]
    left_columns = {"table": "composites", "line": pd.array([pd.NA] * int(left.sum()), dtype="Int64"),
                    "hole": hole_ids[c_hole_code[left]], "from": c_from[left], "to": c_to[left]}
    if options.domain:
        left_columns["domain"] = domain_ids[c_domain_code[left]]
    left_columns["reason"] = reasons
    for v, column in enumerate(value_columns):
        left_columns[f"metal_{column}"] = metal[left, v]
    left_out = pd.DataFrame(left_columns)

    check = _reconcile(value_columns, hole_ids, domain_ids, hole_code, domain_code, length, weight, weighted,
                       raw_values, capped_metal, c_run, run_hole, run_domain, value, mass, metal, keep,
                       options.domain is not None)
    composites = out.loc[keep].reset_index(drop=True)
    summary = {
        "mode": options.mode,
        "options": {k: v for k, v in asdict(options).items()},
        "weighting": options.weighting(),
        "samples": int(len(frame)),
        "runs": int(len(top)),
        "composites": int(keep.sum()),
        "left_out": {"residuals_dropped": int(dropped.sum()), "below_min_coverage": int(thin.sum())},
        "density_filled": density_filled,
        "caps": cap_rows,
        "largest_metal_difference": float(np.abs(check["difference"]).max()) if len(check) else 0.0,
        "largest_relative_metal_difference": float(check["relative_difference"].max()) if len(check) else 0.0,
    }
    return CompositeResult(composites, left_out, check, summary, warnings)


def _reconcile(value_columns, hole_ids, domain_ids, hole_code, domain_code, length, weight, weighted,
               raw_values, capped_metal, c_run, run_hole, run_domain, value, mass, metal, keep, by_domain):
    """Per hole, domain and value column: input metal, capped metal, composite metal, metal left out."""
    n_h, n_d = len(hole_ids), len(domain_ids)
    sample_key = hole_code * n_d + domain_code
    comp_key = run_hole[c_run] * n_d + run_domain[c_run]
    size = n_h * n_d
    used = np.flatnonzero(np.bincount(sample_key, minlength=size) > 0)
    names = ("input_metal", "capped_metal", "composite_metal", "left_out_metal")
    parts = {name: [] for name in names}
    for v, column in enumerate(value_columns):
        w = length * (weight if weighted[v] else 1.0)
        present = ~np.isnan(raw_values[:, v])
        parts["input_metal"].append(np.bincount(sample_key[present], weights=(w * raw_values[:, v])[present],
                                                minlength=size)[used])
        parts["capped_metal"].append(np.bincount(sample_key, weights=capped_metal[:, v], minlength=size)[used])
        # composite metal recomputed from the written value: what a user summing the output gets
        held = np.where(keep & (mass[:, v] > 0), np.nan_to_num(value[:, v]) * mass[:, v], 0.0)
        parts["composite_metal"].append(np.bincount(comp_key, weights=held, minlength=size)[used])
        parts["left_out_metal"].append(np.bincount(comp_key, weights=np.where(keep, 0.0, metal[:, v]),
                                                   minlength=size)[used])
    n_values = len(value_columns)
    joined = {name: np.concatenate(parts[name]) if n_values else np.zeros(0) for name in names}
    check = pd.DataFrame({
        "hole": np.tile(hole_ids[used // n_d], n_values), "domain": np.tile(domain_ids[used % n_d], n_values),
        "value": np.repeat(np.asarray(value_columns, dtype=object), len(used)),
        "input_metal": joined["input_metal"], "capped_metal": joined["capped_metal"],
        "input_after_cap": joined["input_metal"] - joined["capped_metal"],
        "composite_metal": joined["composite_metal"], "left_out_metal": joined["left_out_metal"],
    })
    check["difference"] = check["input_after_cap"] - check["composite_metal"] - check["left_out_metal"]
    scale = np.maximum(np.abs(check["input_after_cap"]),
                       np.abs(check["composite_metal"]) + np.abs(check["left_out_metal"]))
    with np.errstate(invalid="ignore", divide="ignore"):  # relative to the metal at stake: round-off reads ~1e-16
        check["relative_difference"] = np.where(scale > 0, np.abs(check["difference"]) / scale, 0.0)
    if not by_domain:
        check = check.drop(columns="domain")
    return check
