"""The demo scenario: invented soil-lead data from the fictional town of Elmsworth.

A former rail depot of about 800 m x 500 m is to become housing. 260 soil samples
of lead (mg/kg) were taken on a loose, irregular grid with extra samples near the
old engine shed; contamination is elongated along the old track (azimuth about 60
degrees) and the values are roughly lognormal. Everything here is invented and
generated deterministically from a seed; it describes no real place.
"""

from __future__ import annotations

import html
import json
import time
from pathlib import Path

import numpy as np
from scipy.linalg import cho_factor

from .demo_batch import batch_html, batch_lines, elmsworth_batch, model_text, run_batch

SEED = 20261204
WIDTH_M, HEIGHT_M = 800.0, 500.0
ENGINE_SHED = (560.0, 330.0)
TRACK_AZIMUTH = 60.0
CAUTION = (
    "Estimates are statistical. Decisions about contaminated land follow local regulations "
    "and the judgement of a qualified professional."
)
# The batch runs the whole chain twelve times in one request: about a minute of CPU on this
# project's 2-core machine, so the demo waits longer than the client's default and the service
# started by `manage.py run` allows it (LAGWISE_DEADLINE_SECONDS, see manage.py).
DEMO_TIMEOUT_SECONDS = 900.0
ACTION_LEVEL = 300.0  # mg/kg, an INVENTED action level for the demo
UNIT_SIZE_M = 100.0  # side of the invented remediation units (5 x 5 nodes of the 20 m grid)
LIMIT_CAUTION = (
    f"The action level of {ACTION_LEVEL:g} mg/kg and the 90 % decision rule are invented for this demo. "
    "A real limit and the rule for acting on these probabilities come from local regulation and a "
    "qualified professional, not from this report."
)


def _anisotropic_distance(a: np.ndarray, b: np.ndarray, azimuth: float, ratio: float) -> np.ndarray:
    theta = np.radians(azimuth)
    along = np.array([np.sin(theta), np.cos(theta)])
    across = np.array([np.cos(theta), -np.sin(theta)])
    h = a[:, None, :] - b[None, :, :]
    return np.hypot(h @ along, (h @ across) / ratio)


def depot_field() -> tuple[np.ndarray, np.ndarray]:
    """The 260 invented sample locations (metres) and the log-lead at each (natural log of mg/kg)."""
    rng = np.random.default_rng(SEED)
    gx, gy = np.meshgrid(np.linspace(20, WIDTH_M - 20, 20), np.linspace(20, HEIGHT_M - 20, 12))
    grid = np.column_stack([gx.ravel(), gy.ravel()]) + rng.normal(0, 9.0, (240, 2))
    shed = np.array(ENGINE_SHED) + rng.normal(0, 28.0, (20, 2))
    points = np.clip(np.vstack([grid, shed]), 1.0, [WIDTH_M - 1, HEIGHT_M - 1])
    # Log-lead field: exponential covariance, practical range 250 m along the track
    # and 100 m across it, plus a small nugget; simulated by Cholesky factorisation.
    h = _anisotropic_distance(points, points, TRACK_AZIMUTH, 0.4)
    covariance = 0.55 * np.exp(-3.0 * h / 250.0) + 0.08 * np.eye(len(points))
    factor, _ = cho_factor(covariance, lower=True)
    field = np.tril(factor) @ rng.standard_normal(len(points))
    shed_bump = 0.9 * np.exp(-np.sum((points - ENGINE_SHED) ** 2, axis=1) / (2 * 70.0**2))
    return points, 4.7 + field + shed_bump


def elmsworth_samples() -> dict:
    """The 260 invented lead samples: ``{"x", "y", "values", "ids"}`` (metres, mg/kg)."""
    points, log_lead = depot_field()
    return {
        "x": np.round(points[:, 0], 1).tolist(),
        "y": np.round(points[:, 1], 1).tolist(),
        "values": np.round(np.exp(log_lead), 1).tolist(),
        "ids": [f"ELM-{i + 1:03d}" for i in range(len(points))],
    }


def run_demo(base_url: str, out_dir: Path) -> Path:
    """Run the demo through the SDK against a running service; write the report folder.

    The folder holds ``samples.json``, ``batch.json`` (the laboratory batch's samples),
    ``report.json`` (every response), ``figures/`` (SVG; ``figures/analytes/<analyte>/`` for
    the batch), ``index.html`` (a one-page summary) and ``summary.txt``. Returns the path of
    the text summary.
    """
    from lagwise_client import Lagwise

    out_dir.mkdir(parents=True, exist_ok=True)
    samples = elmsworth_samples()
    (out_dir / "samples.json").write_text(json.dumps(samples, indent=1))
    batch_samples = elmsworth_batch(*depot_field(), ENGINE_SHED)
    (out_dir / "batch.json").write_text(json.dumps(batch_samples, indent=1))
    log_samples = dict(samples, values=np.log(samples["values"]).tolist())
    with Lagwise(base_url, timeout=DEMO_TIMEOUT_SECONDS) as client:
        omni = client.experimental_variogram(samples, lags={"auto": "equal_width"})
        directional = client.experimental_variogram(
            log_samples,
            lags={"width": 40.0, "count": 10},
            directions=[
                {"azimuth": TRACK_AZIMUTH, "tolerance": 22.5},
                {"azimuth": TRACK_AZIMUTH + 90.0, "tolerance": 22.5},
            ],
        )
        started = time.perf_counter()
        analysis = client.analyze(
            samples,
            transform="log",
            variogram={"directions": "auto"},
            cross_validation={"neighbourhood": {"max_points": 24, "min_points": 4}},
            prediction={
                "grid": {"origin": [10.0, 10.0], "spacing": [20.0, 20.0], "shape": [40, 25]},
                "thresholds": [ACTION_LEVEL],
                "simulation": {"realisations": 100, "seed": 1, "blocks": {"size": [UNIT_SIZE_M, UNIT_SIZE_M]}},
            },
            figures=[
                "variogram",
                "variogram_map",
                "cross_validation",
                "prediction_map",
                "standard_deviation_map",
                "probability_map",
            ],
            variable={"name": "lead", "unit": "mg/kg"},
            coordinate_unit="m",
        )
        seconds = time.perf_counter() - started
        batch = run_batch(client, batch_samples, out_dir / "figures" / "analytes")
    report = {
        "scenario": "Elmsworth former rail depot, soil lead (mg/kg) - invented data",
        "caution": CAUTION,
        "limit_caution": LIMIT_CAUTION,
        "omnidirectional_lead": omni.to_dict(),
        "directional_log_lead": directional.to_dict(),
        "analysis": analysis.to_dict(),
        "batch": batch["batch"].to_dict(),
        "batch_joint_metals": batch["joint"].to_dict(),
    }
    (out_dir / "report.json").write_text(json.dumps(report, indent=1))
    analysis.save_figures(out_dir / "figures")
    (out_dir / "index.html").write_text(_html(omni, analysis, batch_html(batch)))
    summary_path = out_dir / "summary.txt"
    summary_path.write_text(_summary_text(omni, directional, analysis, seconds, batch_lines(batch)))
    return summary_path


def _table(direction) -> list[str]:
    lines = ["    lower    upper  mean_dist   pairs       value"]
    for c in direction.classes:
        value = "    (none)" if c.value is None else f"{c.value:12.4g}"
        flag = "  sparse" if c.sparse else ""
        mean = "      -" if c.mean_distance is None else f"{c.mean_distance:9.1f}"
        lines.append(f"{c.lower:9.1f} {c.upper:8.1f} {mean} {c.pairs:7d} {value}{flag}")
    return lines


def _ratio_along_across(directional) -> str:
    along, across = (d.classes for d in directional.directions)
    short_along = next((c.value for c in along if c.value is not None and c.lower >= 80), None)
    short_across = next((c.value for c in across if c.value is not None and c.lower >= 80), None)
    if short_along is None or short_across is None:
        return "not enough pairs to compare the two directions"
    return (
        f"at 80-120 m the semivariance of log-lead is {short_along:.3f} along azimuth {TRACK_AZIMUTH:g} "
        f"and {short_across:.3f} across it: continuity is longer along the old track"
        if short_along < short_across
        else f"at 80-120 m along {short_along:.3f} vs across {short_across:.3f}: no clear elongation"
    )


def _class_rows(analysis) -> list[tuple[str, int, float | None]]:
    """(meaning, count, share) of the remediation units by probability class, or [] when not computed."""
    if not (analysis.prediction or {}).get("classes"):
        return []
    return [(r["meaning"], r["count"], r["share"]) for r in analysis.probability_classes(ACTION_LEVEL)]


def _units_text(analysis) -> str:
    table = (analysis.prediction or {}).get("classes") or [{}]
    kind = (
        f"{UNIT_SIZE_M:.0f} m x {UNIT_SIZE_M:.0f} m remediation units (simulated block averages)"
        if table[0].get("method") == "simulation"
        else "grid nodes (kriging)"
    )
    return kind


def _share_above(analysis) -> str | None:
    simulated = (analysis.prediction or {}).get("simulation")
    if not simulated or not simulated["above"]:
        return None
    f = simulated["above"][0]["fraction"]
    return (
        f"share of the site above {ACTION_LEVEL:g} mg/kg: {f['mean'] * 100:.0f} % on average over "
        f"{simulated['realisations']} conditional simulations (P10 {f['p10'] * 100:.0f} %, "
        f"P90 {f['p90'] * 100:.0f} %)"
    )


def _decision_lines(analysis) -> list[str]:
    rows = _class_rows(analysis)
    if not rows:
        return ["Threshold decision: not computed (no prediction)"]
    lines = [f"Threshold decision at an INVENTED action level of {ACTION_LEVEL:g} mg/kg, {_units_text(analysis)}:"]
    lines += [f"  {count:4d} ({(share or 0) * 100:3.0f} %)  {meaning}" for meaning, count, share in rows]
    share = _share_above(analysis)
    lines.append("  " + (share or "share of the site above the level: not simulated (see warnings)"))
    lines.append("  " + LIMIT_CAUTION)
    return lines


def _summary_text(omni, directional, analysis, seconds, batch: list[str]) -> str:
    s = omni.summary
    cv = analysis.cross_validation["statistics"]
    estimate = [v for v in analysis.prediction["estimate"] if v is not None]
    anisotropy = analysis.experimental["anisotropy"]
    lines = [
        "Elmsworth former rail depot - soil lead (mg/kg), INVENTED demo data",
        "",
        f"samples {s['samples']}, mean {s['mean']:.1f} mg/kg, variance {s['variance']:.1f}, "
        f"range {s['minimum']:.1f}-{s['maximum']:.1f} mg/kg, largest separation {s['max_distance']:.0f} m",
        "",
        "Omnidirectional semivariance of lead (auto equal-width classes):",
        *_table(omni.directions[0]),
        "",
        f"Log-lead, direction classes at azimuth {TRACK_AZIMUTH:g} and {TRACK_AZIMUTH + 90:g} (tolerance 22.5):",
        f"  along the track ({directional.directions[0].azimuth:g}):",
        *_table(directional.directions[0]),
        f"  across the track ({directional.directions[1].azimuth:g}):",
        *_table(directional.directions[1]),
        "",
        "Finding: " + _ratio_along_across(directional),
        "",
        f"One-call analysis of log-lead ({seconds:.2f} s through the SDK):",
        f"  model ({len(analysis.fit['candidates'])} candidates ranked): " + model_text(analysis.model),
        f"  anisotropy from 6 direction classes: azimuth {anisotropy['azimuth']:.0f}, ratio {anisotropy['ratio']:.2f}"
        if anisotropy
        else "  anisotropy: not estimated",
        "  leave-one-out (24 neighbours): " + ", ".join(f"{k} {v:.3f}" for k, v in cv.items() if isinstance(v, float)),
        f"  kriging map: {len(estimate)} nodes of 20 m, estimated lead {min(estimate):.0f}-{max(estimate):.0f} mg/kg (lognormal back-transform)",
        "  strategies compared by cross-validation: "
        + "; ".join(
            f"{s['name']}{' (selected)' if s['selected'] else ''}"
            for s in (analysis.selection or {}).get("strategies", [])
        ),
        f"  verdict ({analysis.verdict['level']}): " + analysis.verdict["text"],
        "",
        *_decision_lines(analysis),
        "",
        "Warnings: " + ("; ".join(analysis.warnings) if analysis.warnings else "none"),
        "",
        *batch,
        "",
        "CAUTION: " + CAUTION,
        "",
    ]
    return "\n".join(lines)


def _html(omni, analysis, batch: str) -> str:
    """A one-page HTML summary: the lead analysis with inline SVG figures, then the ``batch`` section
    (whose figures are the SVG files under figures/analytes/)."""
    cv = analysis.cross_validation["statistics"]
    rows = "".join(
        f"<tr><th>{html.escape(k.replace('_', ' '))}</th><td>{v:.4g}</td></tr>"
        for k, v in cv.items()
        if isinstance(v, float)
    )
    warnings = "".join(f"<li>{html.escape(w)}</li>" for w in analysis.warnings) or "<li>none</li>"
    strategies = "".join(
        f"<li><strong>{html.escape(s['name'].replace('_', ' '))}</strong>{' (selected)' if s['selected'] else ''}: "
        f"{html.escape(s['why'])}</li>"
        for s in (analysis.selection or {}).get("strategies", [])
    )
    units = "".join(
        f"<tr><td>{html.escape(meaning)}</td><td>{count}</td><td>{(share or 0) * 100:.0f} %</td></tr>"
        for meaning, count, share in _class_rows(analysis)
    )
    share = _share_above(analysis)
    decision = (
        f"<h2>Threshold decision (invented action level {ACTION_LEVEL:g} mg/kg)</h2>"
        f'<p class="caution">{html.escape(LIMIT_CAUTION)}</p>'
        f"<p>{html.escape(_units_text(analysis))}:</p>"
        f"<table><tr><th>class</th><th>units</th><th>share</th></tr>{units}</table>"
        f"<p>{html.escape(share or 'share of the site above the level: not simulated')}</p>"
        if units
        else ""
    )
    figures = "".join(
        f"<figure><figcaption>{html.escape(name.replace('_', ' '))}</figcaption>{svg[svg.index('<svg') :]}</figure>"
        for name, svg in analysis.figures.items()
    )
    s = omni.summary
    return f"""<!doctype html>
<html lang="en"><head><meta charset="utf-8"><title>Elmsworth soil lead and laboratory batch - Lagwise report</title>
<style>body{{font-family:system-ui,sans-serif;color:#2f3e46;max-width:980px;margin:2em auto;padding:0 1em}}
.caution{{border-left:4px solid #8e4a7d;background:#f6eef4;padding:.6em 1em}}table{{border-collapse:collapse}}
th,td{{text-align:left;padding:.2em .8em;border-bottom:1px solid #e9eef0}}figure{{margin:1.5em 0}}svg{{max-width:100%;height:auto}}
.pair{{display:flex;gap:2%;flex-wrap:wrap}}figure.half{{width:48%;margin:.5em 0}}figure.half img{{width:100%;height:auto}}
section{{border-top:1px solid #e9eef0;margin-top:1.5em}}.level-no_structure,.level-review{{color:#8e4a7d;font-weight:600}}</style></head>
<body><h1>Elmsworth former rail depot: soil lead and a twelve-analyte batch</h1>
<p class="caution"><strong>Invented demo data.</strong> {html.escape(CAUTION)}</p>
<p>{s["samples"]} samples, mean {s["mean"]:.1f} mg/kg, values {s["minimum"]:.1f} to {s["maximum"]:.1f} mg/kg.</p>
<h2>Verdict: {html.escape(analysis.verdict["level"].replace("_", " "))}</h2><p>{html.escape(analysis.verdict["text"])}</p>
<h2>Strategies compared by cross-validation</h2><ul>{strategies}</ul>
<h2>Cross-validation (log-lead)</h2><table>{rows}</table>
{decision}
<h2>Warnings</h2><ul>{warnings}</ul>
<h2>Figures</h2>{figures}
{batch}
<p class="caution">{html.escape(CAUTION)}</p>
</body></html>
"""
