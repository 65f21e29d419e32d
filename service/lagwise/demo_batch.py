"""The demo's laboratory batch: twelve invented analytes on the fictional Elmsworth depot.

The laboratory ran three panels on the demo's 260 soil cores: eight metals on every core,
three hydrocarbons on the cores within 200 m of the old engine shed and on about a third of
the others, and sulfate on about half of them. So the analytes are heterotopic: not every analyte was measured on every
core (``null`` in ``samples.variables``). The metals follow the lead pattern along the old
track, the hydrocarbons a patch of their own around the shed, and sulfate has no spatial
pattern at all (the batch must say so). A few mercury results are below the detection limit.
Everything is invented and seeded; it describes no real place or laboratory.

The batch goes to ``POST /v1/analyses`` in one call through the SDK; this module builds it,
sends it, and writes its part of the report (text lines and an HTML section).
"""

from __future__ import annotations

import html
import time
from pathlib import Path
from typing import Any

import numpy as np
from scipy.linalg import cho_factor

BATCH_SEED = 20261205
SHED_RANGE_M = 150.0  # practical range of the invented hydrocarbon patch (exponential)
MERCURY_LIMIT = 0.05  # mg/kg, invented detection limit of the mercury method
# name: (unit, panel, mean of the natural log, loading on the track pattern, on the shed patch, noise sd)
ANALYTES: dict[str, tuple[str, str, float, float, float, float]] = {
    "lead": ("mg/kg", "metals", 0.0, 1.0, 0.0, 0.0),  # the demo's own lead results
    "zinc": ("mg/kg", "metals", 4.3, 0.8, 0.0, 0.30),
    "copper": ("mg/kg", "metals", 3.4, 0.7, 0.0, 0.35),
    "cadmium": ("mg/kg", "metals", -0.4, 0.6, 0.0, 0.45),
    "arsenic": ("mg/kg", "metals", 2.4, 0.4, 0.0, 0.40),
    "nickel": ("mg/kg", "metals", 3.0, 0.3, 0.0, 0.30),
    "chromium": ("mg/kg", "metals", 3.5, 0.2, 0.0, 0.25),
    "mercury": ("mg/kg", "metals", -1.6, 0.6, 0.0, 0.50),
    "naphthalene": ("mg/kg", "hydrocarbons", 0.3, 0.0, 1.4, 0.40),
    "toluene": ("mg/kg", "hydrocarbons", -0.8, 0.0, 1.1, 0.60),
    "xylene": ("mg/kg", "hydrocarbons", -0.4, 0.0, 1.2, 0.50),
    "sulfate": ("mg/kg", "sulfate", 5.0, 0.0, 0.0, 0.35),
}
JOINT_METALS = ("lead", "zinc", "copper", "cadmium")
BATCH_FIGURES = ("variogram", "cross_validation")
NUGGET_CORRELATION = (
    "Where the pure nugget is selected, each held-out core is estimated by the mean of the others, which "
    "falls as the held-out value rises: its cross-validation correlation is -1 by construction, not a fault."
)


def _shed_patch(points: np.ndarray, centre: tuple[float, float], rng: np.random.Generator) -> np.ndarray:
    """A smooth patch around ``centre`` plus an isotropic exponential field (Cholesky, scipy)."""
    h = np.hypot(*(points[:, None, :] - points[None, :, :]).transpose(2, 0, 1))
    covariance = 0.35 * np.exp(-3.0 * h / SHED_RANGE_M) + 1e-9 * np.eye(len(points))
    factor, _ = cho_factor(covariance, lower=True)
    bump = 1.6 * np.exp(-np.sum((points - centre) ** 2, axis=1) / (2 * 110.0**2))
    return bump + np.tril(factor) @ rng.standard_normal(len(points))


def elmsworth_batch(points: np.ndarray, log_lead: np.ndarray, shed: tuple[float, float]) -> dict:
    """The invented batch as a ``samples`` document with ``variables``, ``units`` and mercury censoring.

    Parameters
    ----------
    points : (n, 2) array, metres
        The demo's core locations.
    log_lead : (n,) array
        Natural log of the demo's lead (mg/kg) at each core: the track pattern the metals share.
    shed : (x, y), metres
        Centre of the hydrocarbon patch.
    """
    rng = np.random.default_rng(BATCH_SEED)
    xy, lead = points, log_lead
    track = (lead - lead.mean()) / lead.std()
    patch = _shed_patch(xy, shed, rng)
    near_shed = np.hypot(*(xy - shed).T) < 200.0
    measured = {
        "metals": np.ones(len(xy), dtype=bool),
        "hydrocarbons": near_shed | (rng.random(len(xy)) < 0.33),
        "sulfate": rng.random(len(xy)) < 0.5,
    }
    variables: dict[str, list] = {}
    for name, (_, panel, mean, on_track, on_patch, noise) in ANALYTES.items():
        logs = lead if name == "lead" else mean + on_track * 0.8 * track + on_patch * patch
        values = np.exp(logs + noise * rng.standard_normal(len(xy)))
        variables[name] = [round(float(v), 3) if m else None for v, m in zip(values, measured[panel], strict=True)]
    below = [v is not None and v < MERCURY_LIMIT for v in variables["mercury"]]
    variables["mercury"] = [MERCURY_LIMIT if b else v for v, b in zip(variables["mercury"], below, strict=True)]
    return {
        "x": np.round(xy[:, 0], 1).tolist(),
        "y": np.round(xy[:, 1], 1).tolist(),
        "ids": [f"ELM-{i + 1:03d}" for i in range(len(xy))],
        "variables": variables,
        "units": {name: spec[0] for name, spec in ANALYTES.items()},
        "censored": {"mercury": below},
        "detection_limits": {"mercury": [MERCURY_LIMIT if b else None for b in below]},
    }


def run_batch(client: Any, samples: dict, figures_dir: Path) -> dict:
    """Send the batch in one analyses call and a joint fit of the metals; save each analyte's figures.

    Returns ``{"batch": BatchAnalysis, "seconds": wall seconds of the analyses call, "joint":
    JointFit of the log metals, "cores": number of cores}``; figures go to ``figures_dir/<analyte>/<figure>.svg``.
    """
    started = time.perf_counter()
    batch = client.analyze(
        samples,
        transform="log",
        figures=list(BATCH_FIGURES),
        coordinate_unit="m",
    )
    seconds = time.perf_counter() - started
    for name, analysis in zip(batch.names, batch.variables, strict=True):
        analysis.save_figures(figures_dir / name)
    logs = {
        "x": samples["x"],
        "y": samples["y"],
        **{name: [float(np.log(v)) for v in samples["variables"][name]] for name in JOINT_METALS},
    }
    joint = client.fit_joint_model(logs, variables=list(JOINT_METALS), families=["spherical", "exponential"])
    return {"batch": batch, "seconds": seconds, "joint": joint, "cores": len(samples["x"])}


def model_text(model, unit: str = "m") -> str:
    """The model in words: nugget, then each structure's family, partial sill, range and anisotropy."""
    parts = [f"nugget {model.nugget:.3f}"]
    for s in model.structures:
        turn = f", azimuth {s.azimuth:.0f}, ratio {s.ratio:.2f}" if s.ratio != 1.0 else ""
        parts.append(f"{s.family} (partial sill {s.partial_sill:.3f}, range {s.range:.0f} {unit}{turn})")
    return " + ".join(parts)


def _selected(analysis) -> str:
    chosen = [s["name"] for s in (analysis.selection or {}).get("strategies", []) if s["selected"]]
    return chosen[0].replace("_", " ") if chosen else "-"


def _statistic(analysis, name: str) -> float | None:
    return ((analysis.cross_validation or {}).get("statistics") or {}).get(name)


def _number(value: float | None, digits: int = 3) -> str:
    return "-" if value is None else f"{value:.{digits}g}"


def _correlations(joint) -> list[tuple[str, list[list[float | None]]]]:
    """(label, correlation matrix) of the nugget and each structure of the joint model.

    The structural correlation of a and b is sill_ab / sqrt(sill_aa sill_bb) (None where a
    direct sill is zero), the usual reading of a linear model of coregionalisation."""
    model = joint.model
    matrices = [("nugget", model.nugget)] + [
        (f"{s['family']} (range {s['range']:.0f} m)", s["sills"]) for s in model.structures
    ]
    out = []
    for label, m in matrices:
        c = np.asarray(m, dtype=float)
        d = np.sqrt(np.clip(np.diag(c), 0.0, None))
        out.append(
            (
                label,
                [
                    [float(c[i, j] / (d[i] * d[j])) if d[i] * d[j] > 0 else None for j in range(len(d))]
                    for i in range(len(d))
                ],
            )
        )
    return out


def batch_lines(result: dict) -> list[str]:
    """The batch's part of summary.txt."""
    batch, joint = result["batch"], result["joint"]
    lines = [
        f"Laboratory batch: {len(batch.names)} analytes on {result['cores']} cores in one analyses call ({result['seconds']:.1f} s through the SDK; not every analyte on every core)",
        "  cross-validation statistics in natural-log units (the batch is log-transformed)",
        f"  {'analyte':<12} {'unit':<6} {'cores':>5}  {'verdict':<12} {'strategy':<24} {'RMSE':>6} {'RMSSE':>6}  model",
    ]
    for name, a in zip(batch.names, batch.variables, strict=True):
        lines.append(
            f"  {name:<12} {a.raw.get('unit') or '':<6} {a.summary['samples']:>5}  {a.verdict['level']:<12} "
            f"{_selected(a):<24} {_number(_statistic(a, 'root_mean_square_error')):>6} "
            f"{_number(_statistic(a, 'root_mean_square_standardized_error')):>6}  {model_text(a.model)}"
        )
    lines.append(f"  joint model of log {', '.join(JOINT_METALS)} (structural correlations with {JOINT_METALS[0]}):")
    for label, matrix in _correlations(joint):
        row = ", ".join(f"{n} {_number(r, 2)}" for n, r in zip(JOINT_METALS[1:], matrix[0][1:], strict=True))
        lines.append(f"    {label}: {row}")
    lines += [f"  {w}" for w in batch.warnings]
    return lines


def _cross_validation_rows(analysis) -> str:
    statistics = (analysis.cross_validation or {}).get("statistics") or {}
    return "".join(
        f"<tr><th>{html.escape(k.replace('_', ' '))}</th><td>{_number(v, 4)}</td></tr>"
        for k, v in statistics.items()
        if isinstance(v, float | int) and not isinstance(v, bool)
    )


def _own_warnings(batch, name: str, analysis) -> list[str]:
    """The analyte's warnings: its own and the batch's that name it."""
    return [w for w in batch.warnings if w.startswith(f"variable {name!r}")] + list(analysis.warnings)


def _analyte_section(name: str, analysis, warning_list: list[str], figures_href: str) -> str:
    unit = analysis.raw.get("unit") or ""
    strategies = "".join(
        f"<li>{html.escape(s['name'].replace('_', ' '))}{' <strong>(selected)</strong>' if s['selected'] else ''}: "
        f"{html.escape(s['why'])}</li>"
        for s in (analysis.selection or {}).get("strategies", [])
    )
    warnings = "".join(f"<li>{html.escape(w)}</li>" for w in warning_list) or "<li>none</li>"
    figures = "".join(
        f'<figure class="half"><figcaption>{html.escape(f.replace("_", " "))}</figcaption>'
        f'<img src="{figures_href}/{html.escape(name)}/{f}.svg" alt="{html.escape(f.replace("_", " "))} of {html.escape(name)}"></figure>'
        for f in analysis.figures
    )
    return (
        f'<section id="analyte-{html.escape(name)}"><h3>{html.escape(name)} ({html.escape(unit)})</h3>'
        f"<p><strong>Verdict: {html.escape(analysis.verdict['level'].replace('_', ' '))}.</strong> "
        f"{html.escape(analysis.verdict['text'])}</p>"
        f"<p>{analysis.summary['samples']} cores measured. Selected model (log units): "
        f"{html.escape(model_text(analysis.model))}.</p>"
        f"<details><summary>Strategies compared and cross-validation</summary><ul>{strategies}</ul>"
        f"<table>{_cross_validation_rows(analysis)}</table><p>Warnings:</p><ul>{warnings}</ul></details>"
        f'<div class="pair">{figures}</div></section>'
    )


def _joint_table(joint) -> str:
    head = "".join(f"<th>{html.escape(n)}</th>" for n in JOINT_METALS)
    blocks = []
    for label, matrix in _correlations(joint):
        rows = "".join(
            f"<tr><th>{html.escape(a)}</th>" + "".join(f"<td>{_number(v, 2)}</td>" for v in row) + "</tr>"
            for a, row in zip(JOINT_METALS, matrix, strict=True)
        )
        blocks.append(f"<h4>{html.escape(label)}</h4><table><tr><th></th>{head}</tr>{rows}</table>")
    return "".join(blocks)


def batch_html(result: dict, figures_href: str = "figures/analytes") -> str:
    """The batch's section of index.html: an overview table linking to one section per analyte."""
    batch, joint = result["batch"], result["joint"]
    overview = "".join(
        f'<tr><td><a href="#analyte-{html.escape(n)}">{html.escape(n)}</a></td><td>{html.escape(a.raw.get("unit") or "")}</td>'
        f'<td>{a.summary["samples"]}</td><td class="level-{a.verdict["level"]}">{html.escape(a.verdict["level"].replace("_", " "))}</td>'
        f"<td>{html.escape(_selected(a))}</td><td>{_number(_statistic(a, 'root_mean_square_error'))}</td>"
        f"<td>{_number(_statistic(a, 'root_mean_square_standardized_error'))}</td>"
        f"<td>{_number(_statistic(a, 'correlation'))}</td></tr>"
        for n, a in zip(batch.names, batch.variables, strict=True)
    )
    sections = "".join(
        _analyte_section(n, a, _own_warnings(batch, n, a), figures_href)
        for n, a in zip(batch.names, batch.variables, strict=True)
    )
    warnings = "".join(f"<li>{html.escape(w)}</li>" for w in batch.warnings) or "<li>none</li>"
    return (
        '<h2 id="batch">Laboratory batch: twelve analytes in one call</h2>'
        f"<p>{len(batch.names)} invented analytes on the {result['cores']} cores of one invented laboratory batch, sent in one "
        f"analyses call through the SDK ({result['seconds']:.1f} s). Not every analyte was measured on every "
        "core (the hydrocarbon and sulfate panels ran on part of them); each analyte gets its own transform "
        "(log), fit, strategy comparison, cross-validation and verdict. Cross-validation statistics are in "
        "natural-log units.</p>"
        "<table><tr><th>analyte</th><th>unit</th><th>cores</th><th>verdict</th><th>selected strategy</th>"
        f"<th>RMSE</th><th>RMSSE</th><th>correlation</th></tr>{overview}</table>"
        f"<p>{html.escape(NUGGET_CORRELATION)}</p>"
        f"<p>Batch warnings:</p><ul>{warnings}</ul>"
        f"<h3>How the metals vary together (joint model of log {', '.join(JOINT_METALS)})</h3>"
        "<p>Structural correlations of a linear model of coregionalisation fitted to the direct and cross "
        "variograms (one matrix for the nugget and one per structure). High correlations in a structure mean "
        "the metals share that scale of the pattern along the old track; the nugget's are those of the "
        "variation below the sample spacing.</p>"
        f"{_joint_table(joint)}{sections}"
    )
