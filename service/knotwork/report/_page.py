"""The report page: one self-contained HTML document for one assessment.

Nothing on the page is fetched: the style sheet is inline, the charts are inline SVG, no
script, font or image comes from anywhere. Every text that comes from the request (names, the
options) is escaped with :func:`html.escape`. The renderer reads the assessment by attribute
with defaults (``getattr``), so records that an assessment may or may not carry (a fitted
model's record, VIF intervals) are shown when present and skipped otherwise.
"""

from __future__ import annotations

import json
import math
from collections.abc import Iterable, Sequence
from datetime import datetime
from html import escape
from typing import Any

from knotwork.core import checkpoint

from ._charts import (
    Chart,
    conditioning_chart,
    inflation_charts,
    removal_chart,
    ridge_chart,
    terms_chart,
)
from ._media import CONTENT_SECURITY_POLICY

__all__ = ["format_vif", "render_report"]


_CSS = """
:root { color-scheme: light; --ink: #111; --muted: #555; --line: #c8c8c8; --mark: #D55E00;
  --calm: #0072B2; --band: #f4f4f2; }
* { box-sizing: border-box; }
body { margin: 0 auto; max-width: 52rem; padding: 1.5rem 1.25rem 3rem; color: var(--ink);
  background: #fff; font: 15px/1.5 system-ui, -apple-system, "Segoe UI", "DejaVu Sans",
  sans-serif; }
h1 { font-size: 1.55rem; margin: 0 0 .2rem; letter-spacing: -.01em; }
h2 { font-size: 1.15rem; margin: 2.2rem 0 .6rem; padding-top: .6rem;
  border-top: 2px solid var(--ink); }
h3 { font-size: 1rem; margin: 1.4rem 0 .4rem; }
p { margin: .5rem 0; }
.sub { color: var(--muted); margin: 0 0 1.2rem; }
.finding { font-size: 1.05rem; border-left: 4px solid var(--calm); padding: .2rem 0 .2rem .9rem; }
figure { margin: 1rem 0 1.4rem; break-inside: avoid; page-break-inside: avoid; }
figcaption { color: var(--muted); font-size: .85rem; margin-top: .2rem; }
svg.chart { display: block; width: 100%; height: auto; max-height: 225mm; }
table { border-collapse: collapse; width: 100%; font-size: .86rem; margin: .6rem 0 1rem;
  font-variant-numeric: tabular-nums; }
caption { text-align: left; font-weight: 600; padding-bottom: .3rem; }
th, td { padding: .28rem .5rem; text-align: left; vertical-align: top;
  border-bottom: 1px solid var(--line); }
th { font-weight: 600; border-bottom: 1.5px solid var(--ink); }
td.num, th.num { text-align: right; white-space: nowrap; }
tr.flag td:first-child { box-shadow: inset 3px 0 0 var(--mark); }
.tag { font-size: .78rem; padding: 0 .35rem; border: 1px solid currentColor;
  border-radius: .2rem; white-space: nowrap; }
.tag.high { color: var(--mark); }
ul { padding-left: 1.3rem; }
code, .mono { font-family: ui-monospace, "DejaVu Sans Mono", monospace; font-size: .84rem;
  overflow-wrap: anywhere; }
pre { background: var(--band); padding: .6rem .8rem; overflow-x: auto; font-size: .8rem; }
dl { display: grid; grid-template-columns: max-content 1fr; gap: .25rem 1rem; }
dt { font-weight: 600; }
dd { margin: 0; }
.cautions { background: var(--band); padding: .4rem 1rem; }
@page { margin: 14mm 14mm 16mm; }
@media print {
  body { max-width: none; padding: 0; font-size: 10.5pt; }
  h2 { break-after: avoid; page-break-after: avoid; }
  figure, table, .cautions, dl { break-inside: avoid; page-break-inside: avoid; }
  tr { break-inside: avoid; page-break-inside: avoid; }
  a { color: inherit; text-decoration: none; }
}
"""


#: Names a sentence of the finding lists before it says how many more (the tables list all).
FINDING_NAMES = 8


def _get(record: Any, name: str, default: Any = None) -> Any:
    return getattr(record, name, default) if record is not None else default


def format_vif(value: float | None) -> str:
    """A VIF as the page shows it: two decimals (scientific from 100,000); aliased: infinite."""
    if value is None or not math.isfinite(value):
        return "infinite"
    return f"{value:.2f}" if abs(value) < 1e5 else f"{value:.3e}"


def _num(value: Any, digits: int = 4) -> str:
    if value is None:
        return "—"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        if not math.isfinite(value):
            return "infinite" if value > 0 else ("—" if math.isnan(value) else "−infinite")
        return f"{value:.{digits}g}"
    return escape(str(value))


def _names(names: Iterable[str], limit: int | None = None) -> str:
    """Names in a sentence; past ``limit`` of them, the first ones and how many more."""
    items = [escape(n) for n in names]
    if limit is not None and len(items) > limit:
        return ", ".join(items[:limit]) + f" and {len(items) - limit} more"
    if len(items) <= 2:
        return " and ".join(items)
    return ", ".join(items[:-1]) + " and " + items[-1]


def _table(
    caption: str,
    head: Sequence[str],
    rows: Iterable[Sequence[str]],
    numeric: set[int],
    flagged: Sequence[bool] | None = None,
) -> str:
    cells = "".join(
        f'<th scope="col"{" class=num" if i in numeric else ""}>{escape(h)}</th>'
        for i, h in enumerate(head)
    )
    body = []
    for index, row in enumerate(rows):
        flag = ' class="flag"' if flagged is not None and flagged[index] else ""
        tds = "".join(
            f"<td{' class=num' if i in numeric else ''}>{cell}</td>" for i, cell in enumerate(row)
        )
        body.append(f"<tr{flag}>{tds}</tr>")
    return (
        f"<table><caption>{escape(caption)}</caption><thead><tr>{cells}</tr></thead>"
        f"<tbody>{''.join(body)}</tbody></table>"
    )


def _figure(chart: Chart | None) -> str:
    if chart is None:
        return ""
    # The chart's title and its text alternative (numbers in words) are inside the SVG, where a
    # screen reader finds them; the tables beside the chart give the same numbers to the eye.
    return f"<figure>{chart.svg}</figure>"


def _plural(count: int, one: str, many: str) -> str:
    return f"{count} {one if count == 1 else many}"


def _finding(a: Any) -> str:
    """The first paragraph: the finding in plain words."""
    variables = list(_get(a, "variables", ()))
    threshold = float(_get(a, "threshold", math.nan))
    above = [v.name for v in variables if v.above_threshold and not v.aliased]
    aliased = [v.name for v in variables if v.aliased]
    sentences = []
    if above:
        sentences.append(
            f"Of {_plural(len(variables), 'predictor', 'predictors')}, {len(above)} "
            f"{'has' if len(above) == 1 else 'have'} a variance inflation factor above the "
            f"threshold of {threshold:g}: {_names(above, FINDING_NAMES)}."
        )
    else:
        sentences.append(
            f"None of the {_plural(len(variables), 'predictor', 'predictors')} has a variance "
            f"inflation factor above the threshold of {threshold:g}"
            + (" among those with a finite one." if aliased else ".")
        )
    if aliased:
        sentences.append(
            f"{_names(aliased)} {'is' if len(aliased) == 1 else 'are'} in an exact linear "
            "dependency (the VIF is infinite)."
        )
    conditioning = _get(a, "conditioning")
    tangles = list(_get(conditioning, "tangles", ()))
    if conditioning is not None:
        if tangles:
            sets = "; ".join(
                f"{', '.join(escape(v) for v in t.variables)} (condition index {t.index:.3g})"
                for t in tangles
            )
            sentences.append(
                f"The condition indices show {_plural(len(tangles), 'tangled set', 'tangled sets')}"
                f": {sets}."
            )
        else:
            sentences.append("No set of predictors is tangled by the condition-index rule.")
    removal = _get(a, "removal")
    if removal is not None:
        drops = [s.drop for s in removal.steps]
        if drops:
            sentences.append(
                f"The removal sequence proposes dropping {_names(drops, FINDING_NAMES)}, in that "
                "order, which "
                f"leaves the largest VIF at {format_vif(removal.max_vif_left)}"
                + (
                    f"; still above the threshold: {_names(removal.still_high, FINDING_NAMES)}."
                    if removal.still_high
                    else "."
                )
            )
        else:
            sentences.append("The removal sequence proposes no drop.")
    return f'<p class="finding">{" ".join(sentences)}</p>'


def _inflation_section(a: Any) -> str:
    variables = list(_get(a, "variables", ()))
    if not variables:
        return ""
    with_intervals = any(_get(v, "vif_interval") is not None for v in variables)
    with_design = any(_get(v, "design_vif") is not None for v in variables)
    head = ["predictor", "VIF", "tolerance", "R²", "SE inflation"]
    if with_intervals:
        head.append("VIF interval")
    if with_design:
        head.append("unweighted VIF")
    head.append("flag")
    rows = []
    for v in variables:
        flag = (
            '<span class="tag high">aliased</span>'
            if v.aliased
            else ('<span class="tag high">above</span>' if v.above_threshold else "")
        )
        row = [
            escape(v.name),
            format_vif(v.vif),
            _num(v.tolerance),
            _num(v.r_squared),
            _num(v.se_inflation),
        ]
        if with_intervals:
            interval = _get(v, "vif_interval")
            row.append(
                "—" if not interval else f"{format_vif(interval[0])} – {format_vif(interval[1])}"
            )
        if with_design:
            row.append(format_vif(_get(v, "design_vif")))
        row.append(flag)
        rows.append(row)
    numeric = set(range(1, len(head) - 1))
    flagged = [bool(v.aliased or v.above_threshold) for v in variables]
    parts = [
        '<section id="inflation"><h2>Variance inflation</h2>',
        "<p>How many times larger each coefficient's variance is than it would be with "
        "uncorrelated predictors; the threshold is a rule of thumb.</p>",
        *(_figure(c) for c in inflation_charts(a)),
        _table("Variance inflation by predictor", head, rows, numeric, flagged),
    ]
    terms = [t for t in _get(a, "terms", ()) if len(t.columns) > 1]
    if terms:
        limit = math.sqrt(float(a.threshold))
        parts.append(_figure(terms_chart(a)))
        parts.append(
            _table(
                f"Multi-column terms (scaled GVIF against {limit:.3g}, the square root of the "
                "threshold)",
                ["term", "columns", "GVIF", "scaled GVIF", "flag"],
                [
                    [
                        escape(t.name),
                        str(t.df),
                        format_vif(t.gvif),
                        _num(t.gvif_scaled),
                        '<span class="tag high">above</span>' if t.above_threshold else "",
                    ]
                    for t in terms
                ],
                {1, 2, 3},
                [bool(t.above_threshold) for t in terms],
            )
        )
    parts.append("</section>")
    return "".join(parts)


def _conditioning_section(a: Any) -> str:
    conditioning = _get(a, "conditioning")
    if conditioning is None:
        return ""
    parts = [
        '<section id="conditioning"><h2>Condition indices</h2>',
        f"<p>Eigen-decomposition of the {escape(conditioning.basis.replace('_', ' '))} matrix; "
        f"the largest condition index is {_num(conditioning.condition_number)}. A component "
        f"above {conditioning.index_threshold:g} with two or more variance proportions above "
        f"{conditioning.proportion_threshold:g} marks a tangled set (both rules of thumb).</p>",
        _figure(conditioning_chart(conditioning)),
    ]
    tangles = list(conditioning.tangles)
    if tangles:
        parts.append(
            _table(
                "Tangled sets",
                ["condition index", "variables and their proportions"],
                [
                    [
                        _num(t.index),
                        ", ".join(
                            f"{escape(n)} {p:.2f}"
                            for n, p in zip(t.variables, t.proportions, strict=True)
                        ),
                    ]
                    for t in tangles
                ],
                {0},
            )
        )
    parts.append("</section>")
    return "".join(parts)


def _dependencies_section(a: Any) -> str:
    dependencies = list(_get(a, "dependencies", ()))
    if not dependencies:
        return ""
    rows = []
    for d in dependencies:
        terms = " ".join(
            f"{'+' if w >= 0 else '−'} {abs(w):.4g}·z({escape(n)})"
            for n, w in zip(d.variables, d.weights, strict=True)
        )
        rows.append([_names(d.variables), f"<span class=mono>{terms.lstrip('+ ')} = 0</span>"])
    return (
        '<section id="dependencies"><h2>Exact dependencies</h2>'
        "<p>Relations that hold in every row (z: the standardized variable).</p>"
        + _table("Exact linear dependencies", ["variables", "relation"], rows, set())
        + "</section>"
    )


def _removal_section(a: Any) -> str:
    removal = _get(a, "removal")
    if removal is None:
        return ""
    rows = [
        [
            str(i),
            escape(s.drop),
            escape(s.reason.replace("_", " ")),
            format_vif(s.vif),
            format_vif(s.max_vif_after),
        ]
        for i, s in enumerate(removal.steps, start=1)
    ]
    parts = [
        '<section id="removal"><h2>Removal path</h2>',
        f"<p>{escape(removal.rule)}</p>",
        _figure(removal_chart(removal)),
    ]
    if rows:
        parts.append(
            _table(
                "Drops in order",
                ["step", "dropped", "reason", "its VIF", "largest VIF left"],
                rows,
                {0, 3, 4},
            )
        )
    kept = ", ".join(escape(k) for k in removal.kept)
    parts.append(f"<p>Kept: {kept or 'nothing'}.</p>")
    if removal.still_high:
        parts.append(f"<p>Still above the threshold: {_names(removal.still_high)}.</p>")
    parts.append("</section>")
    return "".join(parts)


def _chosen_k(a: Any) -> tuple[str, float] | None:
    comparison = _get(a, "comparison")
    rule, k = _get(comparison, "ridge_rule"), _get(comparison, "ridge_k")
    if rule is not None and k is not None:
        return (str(rule), float(k))
    for choice in _get(_get(a, "ridge"), "choices", ()):
        if choice.k is not None:
            return (str(choice.rule), float(choice.k))
    return None


def _ridge_section(a: Any) -> str:
    ridge = _get(a, "ridge")
    if ridge is None:
        return ""
    names = [v.name for v in _get(a, "variables", ())]
    rows = [
        [
            escape(c.rule.replace("_", " ")),
            _num(c.k),
            format_vif(c.max_vif) if c.k is not None else "—",
            _num(c.effective_df),
            _num(c.r_squared),
            escape(c.note or c.reference),
        ]
        for c in ridge.choices
    ]
    return (
        '<section id="ridge"><h2>Ridge trace</h2>'
        "<p>k is on the correlation scale. The dotted line marks the k the remedies use.</p>"
        + _figure(ridge_chart(ridge, names, _chosen_k(a)))
        + _table(
            "Choices of k",
            ["rule", "k", "largest VIF", "effective df", "R²", "source or note"],
            rows,
            {1, 2, 3, 4},
        )
        + "</section>"
    )


def _remedies_section(a: Any) -> str:
    comparison = _get(a, "comparison")
    if comparison is None or not comparison.rows:
        return ""
    rows = [
        [
            escape(r.remedy),
            escape(r.setting),
            _num(r.parameters),
            format_vif(r.max_vif),
            _num(r.r_squared),
            _num(r.r_squared_lost),
        ]
        for r in comparison.rows
    ]
    # What each remedy does to the meaning of the coefficients, once, below the table.
    meanings = [r.meaning for r in comparison.rows if r.meaning]
    cautions = "".join(
        f"<li>{escape(c)}</li>" for c in dict.fromkeys(meanings or comparison.cautions)
    )
    return (
        '<section id="remedies"><h2>Remedies side by side</h2>'
        + _table(
            "Remedies",
            ["remedy", "setting", "parameters", "largest VIF", "R²", "R² lost"],
            rows,
            {2, 3, 4, 5},
        )
        + (
            f"<h3>What each remedy does to the coefficients</h3><ul>{cautions}</ul>"
            if cautions
            else ""
        )
        + "</section>"
    )


def _model_section(a: Any) -> str:
    model = _get(a, "model")
    if model is None:
        return ""
    fields = [
        ("family", "family"),
        ("link", "link"),
        ("variance power", "var_power"),
        ("converged", "converged"),
        ("iterations", "iterations"),
        ("deviance", "deviance"),
        ("dispersion", "dispersion"),
        ("observations", "n"),
        ("coefficients", "n_coefficients"),
    ]
    items = "".join(
        f"<dt>{escape(label)}</dt><dd>{_num(_get(model, name))}</dd>"
        for label, name in fields
        if _get(model, name) is not None
    )
    return (
        '<section id="model"><h2>Fitted model</h2>'
        "<p>Every diagnostic below describes the design weighted at this fit (its working "
        "weights); the unweighted VIF beside each one is that of the plain design.</p>"
        f"<dl>{items}</dl></section>"
    )


def _uncertainty_section(a: Any) -> str:
    unc = _get(a, "uncertainty")
    if unc is None:
        return ""
    level = float(_get(unc, "level", math.nan))
    method = str(_get(unc, "method", ""))
    how = (
        "from the sampling distribution of each squared multiple correlation under normal "
        "predictors"
        if method == "normal"
        else f"as percentiles of {_num(_get(unc, 'usable_replicates'))} bootstrap replicates "
        f"(seed {_num(_get(unc, 'seed'))})"
    )
    sentences = [f"The VIF intervals are {level:.0%} intervals, {escape(how)}."]
    share = _get(unc, "share_same_kept")
    if share is not None:
        kept = ", ".join(escape(k) for k in _get(unc, "kept", ()) or ()) or "none"
        sentences.append(
            f"The removal sequence kept the same set ({kept}) in {share:.0%} of the replicates."
        )
    notes = "".join(f"<li>{escape(n)}</li>" for n in _get(unc, "notes", ()))
    return (
        '<section id="uncertainty"><h2>How sure these numbers are</h2>'
        f"<p>{' '.join(sentences)}</p>" + (f"<ul>{notes}</ul>" if notes else "") + "</section>"
    )


def _notes_section(a: Any) -> str:
    warnings = list(_get(a, "warnings", ()))
    cautions = list(_get(a, "cautions", ()))
    parts = ['<section id="notes"><h2>Warnings and cautions</h2>']
    if warnings:
        items = "".join(
            f"<li><code>{escape(w.code)}</code> {escape(w.message)}</li>" for w in warnings
        )
        parts.append(f"<ul>{items}</ul>")
    else:
        parts.append("<p>No warnings.</p>")
    fixed = [
        "Thresholds (VIF 5 or 10, condition index 30, proportion 0.5) are rules of thumb from "
        "common practice, not tests.",
        "Decisions on regulated models follow local rules and qualified review; this report is "
        "evidence for that review, not a substitute for it.",
    ]
    # The assessment states its cautions; an answer without them still gets the two fixed ones.
    items = "".join(f"<li>{escape(c)}</li>" for c in (cautions or fixed))
    parts.append(f'<div class="cautions"><ul>{items}</ul></div></section>')
    return "".join(parts)


def _provenance_section(a: Any, made_at: datetime) -> str:
    record = _get(a, "provenance")
    stamp = made_at.isoformat(timespec="seconds")
    items = [f'<dt>made at</dt><dd><time datetime="{stamp}">{escape(stamp)}</time></dd>']
    if record is not None:
        options = json.dumps(record.options, indent=2, sort_keys=True, ensure_ascii=False)
        items += [
            f"<dt>service version</dt><dd>{escape(record.service_version)}</dd>",
            f"<dt>fingerprint</dt><dd><span class=mono>{escape(record.fingerprint)}</span></dd>",
            f"<dt>options in force</dt><dd><pre>{escape(options)}</pre></dd>",
        ]
    return (
        '<section id="provenance"><h2>Provenance</h2>'
        "<p>The fingerprint digests the summary the diagnostics were computed from and the "
        "options; the same data and options give the same fingerprint in every encoding.</p>"
        f"<dl>{''.join(items)}</dl></section>"
    )


def render_report(assessment: Any, made_at: datetime) -> str:
    """The report page of ``assessment`` (an :class:`~knotwork_contract.Assessment`).

    Parameters
    ----------
    assessment
        The assessment, best at the full detail (the charts draw from every table); any object
        with the same attributes will do, and optional records are read with defaults.
    made_at
        When the report was made (shown under Provenance, with the offset it carries).

    Returns
    -------
    str
        The whole page.
    """
    response = _get(assessment, "response")
    n = _get(assessment, "n", math.nan)
    p = _get(assessment, "p", 0)
    kind = _get(assessment, "input_kind", "")
    sub = (
        f"{_plural(int(p), 'predictor', 'predictors')}, n = {_num(n, 6)}, from "
        f"{escape(kind or 'the input')}"
        + (f"; response {escape(response)}" if response else "")
        + f"; threshold {float(_get(assessment, 'threshold', math.nan)):g} (a rule of thumb)."
    )
    body = [
        "<header><h1>Collinearity report</h1>",
        f'<p class="sub">{sub}</p></header><main>',
        _finding(assessment),
    ]
    for section in (
        _model_section,
        _inflation_section,
        _uncertainty_section,
        _conditioning_section,
        _dependencies_section,
        _removal_section,
        _ridge_section,
        _remedies_section,
        _notes_section,
    ):
        checkpoint()  # a request past its time limit stops between charts
        body.append(section(assessment))
    body += [_provenance_section(assessment, made_at), "</main>"]
    return (
        '<!DOCTYPE html>\n<html lang="en"><head><meta charset="utf-8">'
        '<meta name="viewport" content="width=device-width, initial-scale=1">'
        f'<meta http-equiv="Content-Security-Policy" content="{CONTENT_SECURITY_POLICY}">'
        "<title>Collinearity report</title>"
        f"<style>{_CSS}</style></head><body>{''.join(body)}</body></html>\n"
    )
