"""A slow, obvious compositing reference: plain Python loops over holes, runs and samples.

Same rules as engine.composite (docs/methods.md): runs break at domain changes; fixed-length
composites from the top of each run; the residual rules merge / drop / keep; equal-length splits;
values averaged over the sampled length with length or length x density weights.
"""

import math


def runs_of(samples, domain=None):
    """samples: list of dicts with hole, from, to, values...; returns a list of runs (lists of samples)."""
    by_hole = {}
    for s in samples:
        by_hole.setdefault(s["hole"], []).append(s)
    runs = []
    for hole in sorted(by_hole):
        rows = sorted(by_hole[hole], key=lambda s: s["from"])
        current = [rows[0]]
        for s in rows[1:]:
            if domain is not None and s[domain] != current[-1][domain]:
                runs.append(current)
                current = [s]
            else:
                current.append(s)
        runs.append(current)
    return runs


def edges_of(top, bottom, length, residual="merge", merge_below=0.5, equal=False):
    """[(from, to, is_residual)] of one run."""
    span = bottom - top
    if equal:
        count = max(1, round(span / length))
        step = span / count
        return [(top + i * step, bottom if i == count - 1 else top + (i + 1) * step, False) for i in range(count)]
    full = math.floor(span / length + 1e-9 / length)
    rest = span - full * length
    pieces = [[top + i * length, top + (i + 1) * length, False] for i in range(full)]
    if rest > 1e-9:
        if residual == "merge" and rest < merge_below * length and full >= 1:
            pieces[-1][1] = bottom
        else:
            pieces.append([top + full * length, bottom, True])
    elif pieces:
        pieces[-1][1] = bottom
    return [tuple(p) for p in pieces]


def composite_reference(samples, value_columns, length, domain=None, residual="merge", merge_below=0.5,
                        equal=False, density=None):
    """Every composite of every run (nothing left out): dicts with hole, from, to, domain,
    coverage, is_residual, and per value column its value, sampled length and metal."""
    out = []
    for run in runs_of(samples, domain):
        top = run[0]["from"]
        bottom = max(s["to"] for s in run)
        for a, b, is_residual in edges_of(top, bottom, length, residual, merge_below, equal):
            row = {"hole": run[0]["hole"], "from": a, "to": b, "is_residual": is_residual,
                   "domain": run[0][domain] if domain else None, "coverage": 0.0}
            for s in run:
                overlap = min(b, s["to"]) - max(a, s["from"])
                if overlap > 1e-9:  # round-off slivers between edges are not samples
                    row["coverage"] += overlap
            for column in value_columns:
                sampled = mass = metal = 0.0
                for s in run:
                    overlap = min(b, s["to"]) - max(a, s["from"])
                    x = s[column]
                    if overlap > 1e-9 and x == x:  # not NaN
                        w = overlap * (s[density] if density and column != density else 1.0)
                        sampled += overlap
                        mass += w
                        metal += w * x
                row[column] = metal / mass if mass > 0 else float("nan")
                row[column + "_sampled"] = sampled
                row[column + "_metal"] = metal
            out.append(row)
    return out
