"""The report page: one self-contained HTML file a reviewer can audit.

Figures are embedded as base64 PNG, the style sheet is inline, and the page makes no network request
(no script, no external address). Every piece of text that comes from the data (hole ids, column
names, file names, values) goes through ``html.escape``.

``write_report(path, context)`` takes a dictionary with the keys listed in ``build_report``.
"""

from __future__ import annotations

import base64
import html
import math
from pathlib import Path

import numpy as np

from . import figures

CSS = """
body { font-family: "DejaVu Sans", Arial, sans-serif; font-size: 14px; color: #1d2329; margin: 0;
       background: #f4f5f6; }
main { max-width: 1180px; margin: 0 auto; padding: 18px 28px 40px; background: #fff; }
h1 { font-size: 22px; margin: 8px 0 2px; } h2 { font-size: 18px; border-bottom: 2px solid #1f5fa8;
     padding-bottom: 3px; margin-top: 30px; } h3 { font-size: 15px; margin: 18px 0 6px; }
.sub { color: #5a636b; margin: 0 0 12px; }
table { border-collapse: collapse; margin: 6px 0 12px; font-size: 13px; }
th, td { border: 1px solid #d4d8dc; padding: 3px 8px; text-align: left; vertical-align: top; }
th { background: #eef1f4; } td.n { text-align: right; font-variant-numeric: tabular-nums; }
.warn { border-left: 5px solid #c0262d; background: #fbeeee; padding: 8px 14px; margin: 10px 0; }
.ok { border-left: 5px solid #3a9a5b; background: #eef7f1; padding: 8px 14px; margin: 10px 0; }
.note { border-left: 5px solid #8a8a8a; background: #f3f3f3; padding: 8px 14px; margin: 10px 0; }
.flag { color: #c0262d; font-weight: bold; } .pass { color: #3a9a5b; font-weight: bold; }
img { max-width: 100%; height: auto; display: block; margin: 6px 0; }
nav a { margin-right: 12px; color: #1f5fa8; text-decoration: none; } nav { margin: 8px 0 4px; }
.caution { border: 2px solid #d9711c; background: #fdf4ec; padding: 10px 14px; }
code { background: #eef1f4; padding: 0 3px; }
.only { display: block; height: 0; }
"""
# report.html#only-KEY shows section KEY alone (the screenshots in docs/ are taken that way)
# (the summary keeps the title and the warnings that lead the page)
ONLY_CSS = "".join(
    f"body:has(#only-{key}:target) section:not(#{key})"
    + ("" if key == "summary" else f", body:has(#only-{key}:target) .lead") + " { display: none; }"
    for key in ("summary", "validation", "compositing", "stationarity", "variograms", "volume", "ellipsoid",
                "scene", "pattern", "provenance", "cautions"))

SECTIONS = [("summary", "Data"), ("validation", "Validation"), ("compositing", "Compositing"),
            ("stationarity", "Stationarity"), ("variograms", "Variograms and model"), ("volume", "Variogram volume"),
            ("ellipsoid", "Ellipsoid"), ("scene", "3D scene"), ("pattern", "Drill pattern"),
            ("provenance", "Provenance"), ("cautions", "Cautions")]


def e(value) -> str:
    """Escaped text of any value (None as an en dash)."""
    if value is None:
        return "&ndash;"
    if isinstance(value, (bool, np.bool_)):
        return "yes" if value else "no"
    return html.escape(str(value), quote=True)


def number(value, digits: int = 4) -> str:
    if value is None:
        return "&ndash;"
    if isinstance(value, (bool, np.bool_)):
        return "yes" if value else "no"
    if isinstance(value, (int, np.integer)):
        return f"{int(value):,}"
    try:
        v = float(value)
    except (TypeError, ValueError):
        return e(value)
    if not math.isfinite(v):
        return "&ndash;"
    if 1e4 <= abs(v) < 1e15:
        return e(f"{v:,.0f}")
    if 100 <= abs(v) < 1e4:
        return e(f"{v:,.1f}")
    return e(f"{v:.{digits}g}")


def table(headers, rows, numeric=None) -> str:
    numeric = set(numeric or [])
    head = "".join(f"<th>{e(h)}</th>" for h in headers)
    body = []
    for row in rows:
        cells = []
        for i, cell in enumerate(row):
            if i in numeric:
                cells.append(f'<td class="n">{number(cell)}</td>')
            else:
                cells.append(f"<td>{e(cell)}</td>")
        body.append("<tr>" + "".join(cells) + "</tr>")
    return f"<table><thead><tr>{head}</tr></thead><tbody>{''.join(body)}</tbody></table>"


def image(data: bytes, alt: str) -> str:
    encoded = base64.b64encode(data).decode("ascii")
    return f'<img alt="{e(alt)}" src="data:image/png;base64,{encoded}">'


def box(kind: str, sentences) -> str:
    items = "".join(f"<li>{e(s)}</li>" for s in sentences)
    return f'<div class="{kind}"><ul>{items}</ul></div>' if sentences else ""


def _flag(on: bool) -> str:
    return '<span class="flag">flagged</span>' if on else '<span class="pass">not flagged</span>'


# --------------------------------------------------------------------------------------------
# sections
# --------------------------------------------------------------------------------------------


def _summary(c) -> str:
    rows = [(k, v) for k, v in c.get("data_summary", {}).items()]
    return table(["item", "value"], rows, numeric=[1])


def _validation(c) -> str:
    findings = c.get("findings")
    if findings is None or len(findings) == 0:
        return '<div class="ok">The tables passed every validation rule: no errors and no warnings.</div>'
    counts = findings.groupby(["severity", "problem"], sort=False).size().reset_index(name="rows")
    parts = [f"<p>{len(findings):,} finding(s); the first 40 are listed. All are in <code>findings.csv</code>.</p>",
             table(["severity", "problem", "rows"], counts.head(30).itertuples(index=False), numeric=[2]),
             table(list(findings.columns), findings.head(40).itertuples(index=False))]
    return "".join(parts)


def _compositing(c) -> str:
    s = c.get("composite")
    if not s:
        return '<div class="note">The composites were read from a file: no compositing was run here.</div>'
    rows = [("composites", s["composites"]), ("from samples", s["samples"]), ("runs", s["runs"]),
            ("length (m)", s["options"].get("length_m")), ("residual rule", s["options"].get("residual")),
            ("residuals dropped", s["left_out"]["residuals_dropped"]),
            ("below the minimum coverage", s["left_out"]["below_min_coverage"]),
            ("largest metal difference (in - out - left out)", s["largest_metal_difference"]),
            ("the same, relative to the metal at stake", s.get("largest_relative_metal_difference"))]
    parts = [f"<p>Weighting: {e(s['weighting'])}.</p>", table(["item", "value"], rows, numeric=[1])]
    check = c.get("composite_check")
    if check is not None and len(check):
        by = [k for k in ("domain", "value") if k in check.columns]
        totals = check.groupby(by, sort=True)[["input_metal", "composite_metal", "left_out_metal",
                                               "difference"]].sum().reset_index()
        parts.append("<h3>Metal reconciliation (sampled length x value, x density when weighted)</h3>")
        parts.append(table(list(totals.columns), totals.itertuples(index=False),
                           numeric=range(len(by), len(totals.columns))))
    for cap in s.get("caps", []):
        parts.append(f"<p>Cap {e(cap['column'])} at {number(cap['cap'])}: {number(cap['samples_capped'])} sample(s), "
                     f"metal removed {number(cap['metal_removed'])}.</p>")
    return "".join(parts)


def _stationarity(c) -> str:
    st = c["stationarity"]
    ch = st["checks"]
    variable = st["variable"]
    parts = []
    rows = [(name.replace("_", " "), "flagged" if check["flag"] else "not flagged", check["sentence"])
            for name, check in ch.items()]
    parts.append(table(["check", "result", "finding"], rows))
    t = ch["trend"]
    parts.append("<h3>Trend: swaths and the slope test</h3>")
    parts.append("<p>The slope's standard error allows for spatial correlation: an exponential covariance fitted to "
                 "the residuals' variogram enters the variance of the least-squares slope (see docs/methods.md). "
                 f"Flag: p below {number(t['alpha'])} / {t['tests']} and a change over the extent of at least "
                 f"{number(c.get('options_stationarity', {}).get('min_trend_sd', 0.25))} standard deviations.</p>")
    parts.append(table(["axis", "slope per 100 m", "standard error", "effective samples", "p",
                        "change over extent (sd)", "result"],
                       [(a["name"], a["slope_per_100m"], a["slope_standard_error_per_100m"], a["effective_samples"],
                         a["p"], a["change_in_sd"], "flagged" if a["flag"] else "not flagged") for a in t["axes"]],
                       numeric=[1, 2, 3, 4, 5]))
    made = c.get("figures") or {}
    parts.append(image(made.get("swaths") or figures.swaths(t, variable), "swaths along each axis"))
    if "model_axes_trend" in st:
        m = st["model_axes_trend"]
        parts.append("<p>Along the fitted model's axes:</p>")
        parts.append(table(["axis", "slope per 100 m", "p", "change over extent (sd)", "result"],
                           [(a["name"], a["slope_per_100m"], a["p"], a["change_in_sd"],
                             "flagged" if a["flag"] else "not flagged") for a in m["axes"]], numeric=[1, 2, 3]))
        parts.append(image(figures.swaths(m, variable), "swaths along the model axes"))
    p = ch["proportional_effect"]
    parts.append("<h3>Proportional effect: local mean against local standard deviation</h3>")
    parts.append(f"<p>{_flag(p['flag'])}. Correlation {number(p.get('correlation'), 3)}, slope "
                 f"{number(p.get('slope'), 3)}, ratio of local standard deviation to local mean "
                 f"{number(p.get('ratio_sd_to_mean'), 3)}, over {p['windows']} windows.</p>")
    if p["windows"]:
        parts.append(image(made.get("proportional_effect") or figures.proportional_effect(p, variable),
                           "local mean against local sd"))
    m = ch["mixture"]
    parts.append("<h3>Populations</h3>")
    parts.append(f"<p>{_flag(m['flag'])}. {e(m['sentence'])}</p>")
    if c.get("values") is not None:
        parts.append(image(made.get("mixture") or figures.mixture(m, c["values"], variable), "histogram with mixture"))
    if m.get("domains"):
        parts.append("<p>Per domain (all composites of the domain column):</p>")
        parts.append(table(["domain", "composites", "mean", "sd", "cv", "median"],
                           [(d["domain"], d["count"], d["mean"], d["sd"], d["cv"], d["median"]) for d in m["domains"]],
                           numeric=[1, 2, 3, 4, 5]))
    s = ch["sill"]
    parts.append("<h3>The sill test</h3>")
    parts.append(f"<p>{_flag(s['flag'])}. {e(s['sentence'])}</p>")
    parts.append(table(["set", "lags used", "last third / variance", "rise over the last third / variance"],
                       [(x["name"], x["lags_used"], x.get("tail_ratio"), x.get("tail_rise")) for x in s["sets"]],
                       numeric=[1, 2, 3]))
    parts.append(image(made.get("sill") or figures.sill(s, variable), "variograms to half the extent"))
    h = ch["halves"]
    parts.append("<h3>Split halves</h3>")
    parts.append(f"<p>{_flag(h['flag'])}. Split at the median along trend {number(h['trend'], 3)}: means differ "
                 f"by {number(h['mean_difference_sd'], 3)} standard deviations; variances "
                 f"{number(h['variance_ratio'], 3)}-fold; variograms by "
                 f"{number(None if h['variogram_difference'] is None else 100 * h['variogram_difference'], 3)}% on "
                 "average.</p>")
    if c.get("xyz") is not None:
        parts.append(image(made.get("halves") or figures.halves(h, c["xyz"], variable), "split halves"))
    if st.get("detrend"):
        d = st["detrend"]
        parts.append("<h3>Detrending</h3>")
        centre = ", ".join(f"{v:.1f}" for v in d["centre"])
        parts.append(f"<p>A {e(d['kind'])} trend in the coordinates (centred on {e(centre)}, in units of "
                     f"{number(d['unit_m'])} m) explains {number(100 * d['r_squared'], 3)}% of the variance. "
                     "The model was fitted to the residuals (value minus trend); the trend is in "
                     "<code>trend.csv</code>.</p>")
        parts.append(table(["term", "coefficient"], zip(d["terms"], d["coefficients"]), numeric=[1]))
        r = d.get("residual_flags")
        if r is not None:
            parts.append(f"<p>Checks on the residuals: {e(', '.join(r) if r else 'none flagged')}.</p>")
    return "".join(parts)


def _variograms(c) -> str:
    model = c.get("model")
    if not model:
        return '<div class="note">No model was fitted.</div>'
    parts = []
    rows = [("nugget (composite support)", model["nugget"], "", "", "")]
    for s in model["structures"]:
        r = s["ranges"]
        rows.append((s["shape"], s["sill"], r["major"], r["semi_major"], r["minor"]))
    parts.append(f"<p>Variance of the composites {number(model['variance'])}; {number(model['pairs_used'])} pairs "
                 f"along the principal axes; transform: {e(model.get('transform', 'none'))}.</p>")
    parts.append(table(["structure", "sill", "major range (m)", "semi-major range (m)", "minor range (m)"],
                       rows, numeric=[1, 2, 3, 4]))
    grade = model.get("model_in_grade_units")
    if grade:
        rows = [("nugget", grade["nugget"], "", "", "")]
        for s in grade["structures"]:
            r = s["ranges"]
            rows.append((s["shape"], s["sill"], r["major"], r["semi_major"], r["minor"]))
        parts.append(f"<h3>The model back in grade units</h3><p>The model above is of the {e(model.get('transform'))} "
                     f"values. In grade units, by the {e(grade['method'])}: {e(grade['assumption'])}. Fitted to that "
                     f"relation at 90 lags along the axes; largest relative misfit "
                     f"{number(100 * grade['largest_relative_misfit'], 3)}%.</p>")
        parts.append(table(["structure", "sill", "major range (m)", "semi-major range (m)", "minor range (m)"],
                           rows, numeric=[1, 2, 3, 4]))
        parts.append(image(figures.both_models(model, grade, model["variable"], model.get("transform")),
                           "the model fitted and back in grade units"))
    d = model.get("declustering")
    if d:
        cell = f"cells of {number(d['cell_m'])} m" if d.get("cell_m") else "no declustering"
        parts.append(f"<p>Statistics of the values fitted, naive beside declustered ({cell}; {e(d.get('rule', ''))}). "
                     "The sill is compared with the declustered variance.</p>")
        parts.append(table(["statistic", "naive", "declustered"],
                           [("mean", d["naive_mean"], d["mean"]), ("variance", d["naive_variance"], d["variance"])],
                           numeric=[1, 2]))
        if len(d.get("scan", {}).get("cell_m", [])) > 1:
            parts.append(image(figures.declustering(d, model["variable"]), "declustered mean against cell size"))
    if c.get("fit_variograms") is not None:
        parts.append(image(figures.fitted_variograms(c["fit_variograms"], model, model["variable"]),
                           "experimental variograms and model"))
    fit = model.get("fit", {})
    support = model.get("nugget_support") or {}
    if support:
        sample = support.get("sample_support")
        along = support.get("along_holes") or {}
        parts.append("<p>The nugget: " + e(support.get("method", "")) + ". At composite support "
                     f"{number(support.get('composite_support'))}"
                     + (f"; at sample support {number(sample)}, with "
                        f"{number(support.get('mean_effective_samples_per_composite'))} effective samples per "
                        "composite on average" if sample is not None else "")
                     + f". Down the holes: {e(along.get('shape', ''))} structure, sill {number(along.get('sill'))}, "
                     f"range {number(along.get('range_m'))} m, from {number(along.get('pairs'))} pairs.</p>")
    parts.append(f"<p>Lag {number(fit.get('lag_m'))} m; weights: {e(fit.get('weights'))}; choice: "
                 f"{e(fit.get('criterion'))}.</p>")
    if fit.get("candidates"):
        keys = [k for k in fit["candidates"][0] if not isinstance(fit["candidates"][0][k], (dict, list))]
        parts.append(table(keys, [[cand.get(k) for k in keys] for cand in fit["candidates"]],
                           numeric=[i for i, k in enumerate(keys)
                                    if isinstance(fit["candidates"][0][k], (int, float))]))
    parts.append(box("warn", fit.get("problems", []) + fit.get("warnings", [])))
    return "".join(parts)


def _volume(c) -> str:
    if not c.get("volume") or not c.get("model"):
        return '<div class="note">No variogram volume.</div>'
    return ("<p>Slices of the variogram volume through zero lag. The white curve is the distance at which the "
            "model reaches 95% of its sill in that plane.</p>" + image(figures.volume_slices(c["volume"], c["model"]),
                                                                         "variogram volume slices"))


def _ellipsoid(c) -> str:
    model = c.get("model")
    if not model:
        return ""
    o = model["orientation"]
    boot = model.get("bootstrap") or {}
    angle = boot.get("axis_angle_deg", {})
    ranges = boot.get("range_m", {})
    rows = []
    for name in ("major", "semi_major", "minor"):
        r = max(s["ranges"][name] for s in model["structures"])
        ri = ranges.get(name, {})
        rows.append((name.replace("_", "-"), o[name]["trend"], o[name]["plunge"], r, ri.get("p2_5"), ri.get("p97_5"),
                     angle.get(name, {}).get("median"), angle.get(name, {}).get("p95")))
    parts = [f"<p>Plane of the major and semi-major axes: dip direction {number(o['plane']['dip_direction'], 4)}, dip "
             f"{number(o['plane']['dip'], 3)}; pitch of the major axis {number(o['pitch'], 3)} (conventions in "
             "docs/conventions.md).</p>",
             table(["axis", "trend", "plunge", "range (m)", "range 2.5%", "range 97.5%", "axis angle median (deg)",
                    "axis angle 95% (deg)"], rows, numeric=[1, 2, 3, 4, 5, 6, 7])]
    if boot:
        parts.append(f"<p>Bootstrap: {number(boot.get('replicates'))} replicates "
                     f"({number(boot.get('failed'))} failed); "
                     f"{e(boot.get('method'))}.</p>")
    parts.append(image(figures.orientation(model, c.get("pattern")), "axes on a stereonet"))
    return "".join(parts)


def _scene(c) -> str:
    drawn = c.get("scene") or {}
    if drawn.get("skipped"):
        return f'<div class="note">The 3D scene was not drawn: {e(drawn["skipped"])}</div>'
    images = drawn.get("images") or {}
    if not images:
        return '<div class="note">No 3D scene.</div>'
    parts = ["<p>The ellipsoid at the fitted ranges (95% of the sill) over the holes, with its axes; the pairs of one "
             "lag bin along an axis, coloured by their squared difference; the variogram volume's isosurfaces "
             "beside the data, in lag space at the same scale. Each view shows the holes and pairs within a slab "
             "about the centre. The interactive scene is <code>scene.html</code>; the datasets are in "
             "<code>scene.vtm</code>.</p>"]
    p = drawn.get("pairs")
    if p:
        parts.append(f"<p>Pairs: {number(p['pairs_drawn'])} of the {number(p['pairs_in_bin'])} in lag bin "
                     f"{number(p['lag_bin'])} ({number(p['lag_m'], 3)} m) along {e(p['along'])}, within "
                     f"{number(p['angle_tolerance_deg'])} degrees of it.</p>")
    for view, caption in (("minor", "looking down the minor axis"), ("plan", "plan view"),
                          ("section", "vertical section along the major axis")):
        if view in images:
            parts.append(f"<h3>{e(caption.capitalize())}</h3>" + image(images[view], caption))
    return "".join(parts)


def _pattern(c) -> str:
    p = c.get("pattern")
    if not p:
        return ""
    parts = []
    spacing = p.get("collar_spacing_m", {})
    lines = p.get("lines") or {}
    hd = p.get("hole_direction") or {}
    ten_ninety = f"{spacing.get('p10', 0):.1f} - {spacing.get('p90', 0):.1f}"
    rows = [("holes", p.get("holes")), ("composites", p.get("composites")),
            ("collar spacing, median (m)", spacing.get("median")), ("collar spacing, 10-90% (m)", ten_ninety),
            ("drill-line trend", lines.get("trend")), ("drill-line strength (0-1)", lines.get("strength")),
            ("spacing along / across lines (m)", f"{lines.get('along_m', 0):.1f} / {lines.get('across_m', 0):.1f}"),
            ("mean hole trend / plunge", f"{hd.get('trend', 0):.1f} / {hd.get('plunge', 0):.1f}")]
    parts.append(table(["item", "value"], rows, numeric=[1]))
    axes = p.get("model_axes", {})
    if axes:
        parts.append(table(["axis", "range (m)", "sample spacing along it (m)", "spacings within the range",
                            "first lag with enough pairs (m)", "supported", "angle to drill lines", "angle to holes"],
                           [(k.replace("_", "-"), a.get("range_m"), a.get("sample_spacing_m"),
                             a.get("spacings_within_range"), a.get("first_supported_lag_m"), a.get("supported"),
                             a.get("angle_to_drill_lines_deg"), a.get("angle_to_holes_deg")) for k, a in axes.items()],
                           numeric=[1, 2, 3, 4, 6, 7]))
    parts.append(box("warn", p.get("warnings", [])) or '<div class="ok">The ranges are supported by the drill '
                                                        'spacing and no axis follows the drill pattern.</div>')
    if c.get("xyz") is not None:
        parts.append(image(figures.drill_pattern(c["xyz"], c["hole"], p, c.get("model")), "plan of the drilling"))
    return "".join(parts)


def _provenance(c) -> str:
    pv = c.get("provenance", {})
    parts = [table(["input", "file", "rows", "SHA-256"],
                   [(i["role"], i["path"], i.get("rows"), i["sha256"]) for i in pv.get("inputs", [])], numeric=[2])]
    parts.append(table(["option", "value"], sorted(pv.get("options", {}).items())))
    parts.append(table(["software", "version"], sorted(pv.get("versions", {}).items())))
    parts.append(f"<p>Command: <code>{e(pv.get('command'))}</code>; written {e(pv.get('written'))}.</p>")
    return "".join(parts)


def build_report(context: dict) -> str:
    """The page as text. ``context`` keys: title, variable, domain, data_summary (dict), findings
    (DataFrame), composite (summary dict), composite_check (DataFrame), stationarity (dict), values,
    xyz, hole (arrays), model (model.json dict), fit_variograms (DataFrame), volume (dict of
    arrays), pattern (dict), provenance (dict), caution (text), warnings (list of text), figures
    (PNG bytes of the stationarity figures already drawn, by check name; drawn here when absent).

    ``report.html#only-KEY`` (KEY a section id) shows that section alone, with no script."""
    c = context
    st = c["stationarity"]
    title = c.get("title") or f"drillaxis report: {st['variable']}"
    lead = list(c.get("warnings", []))
    nav = "".join(f'<a href="#{key}">{e(name)}</a>' for key, name in SECTIONS)
    builders = {"summary": _summary, "validation": _validation, "compositing": _compositing,
                "stationarity": _stationarity, "variograms": _variograms, "volume": _volume,
                "ellipsoid": _ellipsoid, "scene": _scene, "pattern": _pattern, "provenance": _provenance}
    body = []
    for key, name in SECTIONS:
        if key == "cautions":
            continue
        body.append(f'<section id="{key}"><h2>{e(name)}</h2>{builders[key](c)}</section>')
    caution = (f'<section id="cautions"><h2>Cautions</h2><div class="caution"><p>{e(c.get("caution", ""))}</p>'
               "<p>Every flag and warning above is a prompt for the geologist's judgment, not a verdict; the "
               "thresholds behind them are stated in docs/methods.md.</p></div></section>")
    warnings = (f'<div class="warn"><strong>Read first:</strong><ul>{"".join(f"<li>{e(w)}</li>" for w in lead)}'
                "</ul></div>") if lead else '<div class="ok">No check was flagged and no warning was raised.</div>'
    anchors = "".join(f'<a class="only" id="only-{key}"></a>' for key, _ in SECTIONS)
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            "<meta http-equiv=\"Content-Security-Policy\" content=\"default-src 'none'; img-src data:; "
            "style-src 'unsafe-inline'\">"
            f"<title>{e(title)}</title><style>{CSS}{ONLY_CSS}</style></head><body><main>"
            f"{anchors}"
            f"<div class=\"lead\"><h1>{e(title)}</h1><p class=\"sub\">variable {e(st['variable'])}"
            f"{'; composites where ' + e(c['domain'].replace('=', ' = ')) if c.get('domain') else ''}; drillaxis "
            f"{e(c.get('provenance', {}).get('versions', {}).get('drillaxis', ''))}</p>"
            f"<nav>{nav}</nav>{warnings}</div>{''.join(body)}{caution}</main></body></html>\n")


def write_report(path, context: dict) -> Path:
    from engine.outputs import atomic_path

    text = build_report(context)
    with atomic_path(path) as temporary:
        temporary.write_text(text, encoding="utf-8")
    return Path(path)
