"""``knotwork-screen``: screen many candidate models in one batch job.

Reads CSV, Parquet or Arrow files (or folders of them, or a JSON manifest naming files and
options), sends each to the service (only its local summary with ``--summary-only``), writes
one JSON report per model and a combined CSV table, and exits with a status a pipeline can
gate on:

    0  every model passed the threshold rule
    1  at least one model breaks it (a VIF above the threshold, an aliased column, or a
       multi-column term whose scaled GVIF is above sqrt(threshold))
    2  the command line or the manifest is wrong (nothing was sent)
    3  at least one model could not be assessed (unreadable file, rejected input, service
       unreachable); reports for the others are still written

With ``--report-html`` each assessed model also gets its HTML report (``OUT/<model>.html``, from
the service's report route) and ``OUT/index.html`` lists every model with its status, its
largest VIF and a link to its page.

The threshold is a rule of thumb (VIF 5 or 10 is common practice); decisions on regulated
models follow local rules and qualified review.
"""

from __future__ import annotations

import argparse
import csv
import html
import json
import math
import os
import re
import sys
import threading
import time
from collections.abc import Sequence
from concurrent.futures import ThreadPoolExecutor, as_completed
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, TextIO
from urllib.parse import quote

import httpx
from tqdm import tqdm

from knotwork_contract import DETAILS, FAMILIES

from ._client import Client
from ._config import Retry
from ._encode import OPTION_NAMES, normalize_options
from ._exceptions import ServiceError
from ._summary import MISSING_POLICIES, summarize
from ._tables import TABLE_SUFFIXES

__all__ = ["main"]

PROG = "knotwork-screen"
EXIT_OK, EXIT_BREACH, EXIT_USAGE, EXIT_ERROR = 0, 1, 2, 3
DEFAULT_URL = "http://127.0.0.1:8000"
DEFAULT_THRESHOLD = 5.0  # the service's default; a rule of thumb

_TABLE_KEYS = ("response", "weights", "categorical", "columns", "missing", "offset", "trials")
#: Table keys that only a fit on rows uses (never part of a local summary).
_FIT_KEYS = ("offset", "trials")
_MODEL_KEYS = frozenset({"name", "path", "summary_only", *_TABLE_KEYS, *OPTION_NAMES})

CSV_FIELDS = (
    "model",
    "source",
    "status",
    "sent",
    "n",
    "p",
    "threshold",
    "max_vif",
    "worst",
    "above_threshold",
    "aliased",
    "breaches",
    "removal_drops",
    "warnings",
    "error",
    # With --uncertainty (empty otherwise): the method, the worst variable's interval and its
    # p-value (normal) or shares (bootstrap), the share of replicates keeping the proposed set,
    # and each dropped unit's share of replicates (bootstrap).
    "uncertainty",
    "worst_vif_low",
    "worst_vif_high",
    "worst_p_value",
    "worst_share_above",
    "worst_share_dropped",
    "kept_share",
    "drop_shares",
)


class UsageError(Exception):
    """The command line or a manifest cannot be used; nothing is sent."""


@dataclass
class Model:
    """One candidate model to screen: where its rows are and how to send them."""

    name: str
    path: Path
    summary_only: bool
    table: dict[str, Any] = field(default_factory=dict)
    options: dict[str, Any] = field(default_factory=dict)


@dataclass
class Outcome:
    """What happened to one model."""

    model: Model
    status: str  # "pass", "fail" or "error"
    report: dict[str, Any]
    row: dict[str, Any]
    page: str | None = None  # the HTML report's file name, when one was written


# --- command line ---------------------------------------------------------------------------


def _names(text: str) -> list[str]:
    return [t.strip() for t in text.split(",") if t.strip()]


def _parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(
        prog=PROG,
        description=(
            "Screen candidate models for collinearity with a knotwork service: one JSON "
            "report per model plus a combined CSV; exit 1 when a model breaks the threshold "
            "rule, 3 when a model could not be assessed."
        ),
        epilog=(
            "Thresholds are rules of thumb; decisions on regulated models follow local rules "
            "and qualified review. The token is read from --token-file or KNOTWORK_TOKEN."
        ),
    )
    p.add_argument(
        "inputs",
        nargs="+",
        metavar="INPUT",
        help="CSV, Parquet or Arrow files, folders of them, or JSON manifests",
    )
    p.add_argument("--url", default=os.environ.get("KNOTWORK_URL", DEFAULT_URL))
    p.add_argument("--token-file", type=Path, help="file whose first line is the bearer token")
    p.add_argument("--out", type=Path, default=Path("knotwork-reports"), help="report folder")
    p.add_argument("--report-csv", type=Path, help="combined table (default OUT/screen.csv)")
    p.add_argument(
        "--report-html",
        action="store_true",
        help="also write each model's HTML report (OUT/<model>.html) and OUT/index.html",
    )
    p.add_argument(
        "--summary-only",
        action="store_true",
        help="send only each table's local summary (moments), never its rows",
    )
    p.add_argument("--response", help="response column")
    p.add_argument("--weights", help="frequency-weights column")
    p.add_argument("--categorical", type=_names, help="comma-separated categorical columns")
    p.add_argument("--columns", type=_names, help="comma-separated columns to use")
    p.add_argument("--missing", choices=MISSING_POLICIES)
    p.add_argument("--threshold", type=float, help="VIF threshold (service default 5)")
    p.add_argument("--protect", type=_names, help="comma-separated columns never dropped")
    p.add_argument("--no-intercept", action="store_true", help="regression through the origin")
    p.add_argument("--repair", choices=("reject", "nearest"))
    p.add_argument(
        "--detail",
        choices=DETAILS,
        help="summary (the service's default: O(p) of every section) or full (every table)",
    )
    p.add_argument("--sections", type=_names, help="comma-separated result sections")
    p.add_argument(
        "--family",
        choices=FAMILIES,
        help="gaussian (least squares, the service's default) or a GLM fitted to --response, "
        "whose diagnostics are those of the design weighted at the fit",
    )
    p.add_argument(
        "--var-power", type=float, help="tweedie variance power, strictly between 1 and 2"
    )
    p.add_argument("--offset", help="offset column of a GLM (for example log exposure)")
    p.add_argument("--trials", help="binomial trials column (the response is then a proportion)")
    p.add_argument(
        "--uncertainty",
        choices=("normal", "bootstrap"),
        help=(
            "intervals for every VIF: normal (exact under normal predictors) or bootstrap "
            "(resampling rows; also the removal's stability; not with --summary-only)"
        ),
    )
    p.add_argument("--level", type=float, help="level of the intervals (service default 0.95)")
    p.add_argument("--replicates", type=int, help="bootstrap replicates (service default 1000)")
    p.add_argument("--seed", type=int, help="bootstrap seed (service default 0)")
    p.add_argument("--parallel", type=int, default=4, help="requests in flight (default 4)")
    p.add_argument("--timeout", type=float, default=60.0, help="seconds per request")
    p.add_argument("--attempts", type=int, default=4, help="tries per request, retries included")
    p.add_argument(
        "--progress",
        choices=("auto", "bar", "log", "none"),
        default="auto",
        help="a bar on a terminal, log lines otherwise (auto)",
    )
    return p


def _cli_defaults(args: argparse.Namespace) -> dict[str, Any]:
    given = {
        "summary_only": args.summary_only or None,
        "response": args.response,
        "weights": args.weights,
        "categorical": args.categorical,
        "columns": args.columns,
        "missing": args.missing,
        "threshold": args.threshold,
        "protect": args.protect,
        "intercept": False if args.no_intercept else None,
        "repair": args.repair,
        "detail": args.detail,
        "sections": args.sections,
        "family": args.family,
        "var_power": args.var_power,
        "offset": args.offset,
        "trials": args.trials,
        "uncertainty": _uncertainty(args),
    }
    return {k: v for k, v in given.items() if v is not None}


def _uncertainty(args: argparse.Namespace) -> dict[str, Any] | None:
    settings = {"level": args.level, "replicates": args.replicates, "seed": args.seed}
    given = {k: v for k, v in settings.items() if v is not None}
    if args.uncertainty is None:
        if given:
            flags = ", ".join(f"--{k}" for k in given)
            raise UsageError(f"{flags} set the intervals of --uncertainty; add --uncertainty")
        return None
    return {"method": args.uncertainty, **given}


def _model(name: str, path: Path, settings: dict[str, Any]) -> Model:
    return Model(
        name=name,
        path=path,
        summary_only=bool(settings.get("summary_only", False)),
        table={k: settings[k] for k in _TABLE_KEYS if settings.get(k) is not None},
        options={k: settings[k] for k in OPTION_NAMES if settings.get(k) is not None},
    )


def _from_manifest(path: Path, cli: dict[str, Any]) -> list[Model]:
    try:
        doc = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise UsageError(f"manifest {path}: cannot be read as JSON ({exc})") from None
    if isinstance(doc, list):
        doc = {"models": doc}
    if not isinstance(doc, dict) or not isinstance(doc.get("models"), list):
        raise UsageError(f"manifest {path}: expected {{'models': [...]}} or a list of models")
    extra = sorted(set(doc) - {"defaults", "models"})
    if extra:
        raise UsageError(f"manifest {path}: unknown top-level keys {extra}")
    defaults = doc.get("defaults", {})
    if not isinstance(defaults, dict):
        raise UsageError(f"manifest {path}: 'defaults' must be an object")
    unknown = sorted(set(defaults) - (_MODEL_KEYS - {"name", "path"}))
    if unknown:
        raise UsageError(f"manifest {path}: unknown keys in defaults: {unknown}")
    models = []
    for i, entry in enumerate(doc["models"]):
        where = f"manifest {path}: models[{i}]"
        if isinstance(entry, str):
            entry = {"path": entry}
        if not isinstance(entry, dict) or "path" not in entry:
            raise UsageError(f"{where}: each model needs a 'path'")
        unknown = sorted(set(entry) - _MODEL_KEYS)
        if unknown:
            raise UsageError(f"{where}: unknown keys {unknown}; allowed: {sorted(_MODEL_KEYS)}")
        target = Path(entry["path"])
        if not target.is_absolute():
            target = path.parent / target
        settings = {**cli, **defaults, **entry}
        models.append(_model(str(entry.get("name") or target.stem), target, settings))
    return models


def _collect(inputs: Sequence[str], cli: dict[str, Any]) -> list[Model]:
    models: list[Model] = []
    for text in inputs:
        path = Path(text)
        if path.is_dir():
            files = sorted(
                f for f in path.iterdir() if f.is_file() and f.suffix.lower() in TABLE_SUFFIXES
            )
            if not files:
                raise UsageError(f"{path}: no .csv, .parquet or .arrow files in this folder")
            models += [_model(f.stem, f, cli) for f in files]
        elif path.suffix.lower() == ".json":
            models += _from_manifest(path, cli)
        elif path.suffix.lower() in TABLE_SUFFIXES:
            if not path.is_file():
                raise UsageError(f"{path}: no such file")
            models.append(_model(path.stem, path, cli))
        else:
            raise UsageError(f"{path}: not a table file (.csv, .parquet, .arrow), folder or .json")
    for m in models:
        try:
            checked = normalize_options(m.options)
        except (TypeError, ValueError) as exc:
            raise UsageError(f"model {m.name!r}: {exc}") from None
        fitted = m.options.get("family", "gaussian") != "gaussian"
        if m.summary_only and (fitted or any(k in m.table for k in _FIT_KEYS)):
            raise UsageError(
                f"model {m.name!r}: a GLM family (and its offset and trials) is fitted to the "
                "rows, which --summary-only never sends; leave out one or the other"
            )
        method = (checked.get("uncertainty") or {}).get("method")
        if m.summary_only and method == "bootstrap":
            raise UsageError(
                f"model {m.name!r}: the bootstrap resamples rows, and --summary-only sends "
                "none; use --uncertainty normal, or send the rows"
            )
    seen: dict[str, int] = {}
    for m in models:
        base = re.sub(r"[^A-Za-z0-9._-]+", "_", m.name) or "model"
        count = seen.get(base, 0)
        seen[base] = count + 1
        m.name = base if count == 0 else f"{base}-{count + 1}"
    return models


# --- judging --------------------------------------------------------------------------------


def breaches(doc: dict[str, Any], threshold: float) -> list[str]:
    """Names that break the threshold rule in an assessment document.

    A column counts unless it belongs to a multi-column term; it breaks the rule when it is
    aliased or above the threshold. A multi-column term breaks it when it is aliased or its
    scaled GVIF is missing (not finite) or exceeds sqrt(threshold), the comparison of
    Fox & Monette (1992).
    """
    grouped: set[str] = set()
    out: list[str] = []
    for term in doc.get("terms") or []:
        cols = term.get("columns") or []
        if len(cols) < 2:
            continue
        grouped.update(cols)
        scaled = term.get("gvif_scaled")
        if term.get("aliased") or scaled is None or scaled > math.sqrt(threshold):
            out.append(str(term.get("name")))
    for var in doc.get("variables") or []:
        if var.get("name") in grouped:
            continue
        if var.get("aliased") or var.get("above_threshold"):
            out.append(str(var.get("name")))
    return out


def _threshold(doc: dict[str, Any], options: dict[str, Any]) -> float:
    removal = doc.get("removal") or {}
    for value in (doc.get("threshold"), options.get("threshold"), removal.get("threshold")):
        if value is not None:
            return float(value)
    return DEFAULT_THRESHOLD


def _max_vif(doc: dict[str, Any]) -> tuple[float | None, str | None]:
    worst: tuple[float, str] | None = None
    for var in doc.get("variables") or []:
        vif = math.inf if var.get("vif") is None else float(var["vif"])
        if worst is None or vif > worst[0]:
            worst = (vif, str(var.get("name")))
    return (None, None) if worst is None else worst


# --- running --------------------------------------------------------------------------------


def _screen(client: Client, model: Model, pages: Path | None = None) -> Outcome:
    base: dict[str, Any] = {"model": model.name, "source": str(model.path)}
    page: str | None = None
    try:
        if model.summary_only:
            table = dict(model.table)
            summary = summarize(model.path, **table)
            payload = client._assess_payload(summary, dict(model.options))
        else:
            payload = client._assess_payload(model.path, {**model.table, **model.options})
        doc = client._post_assess(payload)
        if pages is not None and isinstance(doc, dict):
            # The same body again: the page is drawn from the same summary and options.
            page = f"{model.name}.html" if model.name != "index" else "index.model.html"
            client._post_report(payload, pages / page)
    except Exception as exc:  # one bad model must not stop the batch; it is reported instead
        error: dict[str, Any] = {"kind": type(exc).__name__, "message": str(exc)}
        if isinstance(exc, ServiceError):
            error["status"] = exc.status
            error["problem"] = {
                "type": exc.problem.type,
                "title": exc.problem.title,
                "status": exc.problem.status,
                "detail": exc.problem.detail,
                "errors": [{"pointer": e.pointer, "reason": e.reason} for e in exc.problem.errors],
            }
        report = {**base, "status": "error", "error": error}
        row = {**base, "status": "error", "error": str(exc).splitlines()[0] if str(exc) else ""}
        return Outcome(model, "error", report, row)
    if not isinstance(doc, dict):
        report = {**base, "status": "error", "error": {"message": "answer is not an object"}}
        return Outcome(model, "error", report, {**base, "status": "error"})
    threshold = _threshold(doc, model.options)
    broken = breaches(doc, threshold)
    status = "fail" if broken else "pass"
    max_vif, worst = _max_vif(doc)
    removal = doc.get("removal") or {}
    report = {
        **base,
        "status": status,
        "sent": payload.kind,
        "threshold": threshold,
        "breaches": broken,
        "assessment": doc,
    }
    row = {
        **base,
        "status": status,
        "sent": payload.kind,
        "n": doc.get("n"),
        "p": doc.get("p"),
        "threshold": threshold,
        "max_vif": "inf" if max_vif == math.inf else max_vif,
        "worst": worst,
        "above_threshold": sum(bool(v.get("above_threshold")) for v in doc.get("variables", [])),
        "aliased": sum(bool(v.get("aliased")) for v in doc.get("variables", [])),
        "breaches": ";".join(broken),
        "removal_drops": ";".join(str(s.get("drop")) for s in removal.get("steps") or []),
        "warnings": ";".join(str(w.get("code")) for w in doc.get("warnings") or []),
        "error": "",
        **_uncertainty_columns(doc, worst),
    }
    return Outcome(model, status, report, row, page)


def _uncertainty_columns(doc: dict[str, Any], worst: str | None) -> dict[str, Any]:
    """The CSV's interval and share columns (empty without ``uncertainty`` in the answer)."""
    record = doc.get("uncertainty")
    if not isinstance(record, dict):
        return {}
    var: dict[str, Any] = next(
        (v for v in doc.get("variables") or [] if v.get("name") == worst), {}
    )
    interval = var.get("vif_interval") or [None, None]
    terms = doc.get("terms") or []
    # A term's columns share its removal share: name the term once, not each column.
    grouped = {c for t in terms if len(t.get("columns") or []) > 1 for c in t["columns"]}
    units = [v for v in doc.get("variables") or [] if v.get("name") not in grouped]
    shares = [
        (str(u.get("name")), u.get("share_dropped"))
        for u in [*units, *terms]
        if u.get("share_dropped")
    ]
    return {
        "uncertainty": record.get("method"),
        "worst_vif_low": interval[0],
        "worst_vif_high": interval[1],
        "worst_p_value": var.get("threshold_p_value"),
        "worst_share_above": var.get("share_above_threshold"),
        "worst_share_dropped": var.get("share_dropped"),
        "kept_share": record.get("share_same_kept"),
        "drop_shares": ";".join(f"{name}={share:g}" for name, share in shares),
    }


class _Progress:
    """A progress bar (tqdm) on a terminal, one plain line per model otherwise."""

    def __init__(self, total: int, mode: str, stream: TextIO) -> None:
        if mode == "auto":
            mode = "bar" if stream.isatty() else "log"
        self.mode, self.total, self.stream = mode, total, stream
        self.counts = {"pass": 0, "fail": 0, "error": 0}
        self.done = 0
        self.started = time.monotonic()
        self._lock = threading.Lock()
        self._bar: tqdm[None] | None = None
        if self.mode == "bar":
            self._bar = tqdm(total=total, file=stream, desc=PROG, unit="model", leave=True)

    def update(self, outcome: Outcome) -> None:
        with self._lock:
            self.done += 1
            self.counts[outcome.status] += 1
            if self._bar is not None:
                self._bar.set_postfix(self.counts, refresh=False)
                self._bar.update(1)
            elif self.mode == "log":
                detail = ""
                if outcome.status == "fail":
                    detail = f" (breaks the rule: {outcome.row['breaches'].replace(';', ', ')})"
                elif outcome.status == "error":
                    detail = f" ({outcome.row.get('error', '')})"
                self._line(
                    f"[{self.done}/{self.total}] {outcome.model.name}: {outcome.status}{detail}"
                )

    def _line(self, text: str) -> None:
        self.stream.write(f"{PROG}: {text}\n")
        self.stream.flush()

    def finish(self) -> None:
        c = self.counts
        took = time.monotonic() - self.started
        if self._bar is not None:
            self._bar.close()
        if self.mode != "none":
            self._line(
                f"{self.total} models in {took:.1f} s: {c['pass']} pass, {c['fail']} break the "
                f"threshold rule, {c['error']} could not be assessed"
            )


def _token(args: argparse.Namespace) -> str | None:
    if args.token_file is not None:
        try:
            lines = args.token_file.read_text(encoding="utf-8").splitlines()
        except OSError as exc:
            raise UsageError(f"--token-file: {exc}") from None
        token = lines[0].strip() if lines else ""
        if not token:
            raise UsageError(f"--token-file {args.token_file}: the first line is empty")
        return token
    return os.environ.get("KNOTWORK_TOKEN") or None


def _write_reports(outcomes: list[Outcome], out: Path, table: Path) -> None:
    out.mkdir(parents=True, exist_ok=True)
    for o in outcomes:
        (out / f"{o.model.name}.json").write_text(
            json.dumps(o.report, indent=2, allow_nan=False) + "\n", encoding="utf-8"
        )
    table.parent.mkdir(parents=True, exist_ok=True)
    with table.open("w", newline="", encoding="utf-8") as fh:
        writer = csv.DictWriter(fh, fieldnames=CSV_FIELDS, extrasaction="ignore")
        writer.writeheader()
        for o in outcomes:
            writer.writerow({k: ("" if o.row.get(k) is None else o.row.get(k)) for k in CSV_FIELDS})


_INDEX_STYLE = """
body { font: 15px/1.5 system-ui, "DejaVu Sans", sans-serif; max-width: 60rem; margin: 1.5rem auto;
  padding: 0 1rem; color: #111; }
table { border-collapse: collapse; width: 100%; font-variant-numeric: tabular-nums; }
th, td { text-align: left; padding: .3rem .6rem; border-bottom: 1px solid #c8c8c8; }
th { border-bottom: 1.5px solid #111; }
td.num { text-align: right; }
.fail, .error { color: #D55E00; font-weight: 600; }
"""


def _index_page(outcomes: list[Outcome]) -> str:
    """One row per model: status, largest VIF and a link to its page (escaped, self-contained)."""
    rows = []
    for o in outcomes:
        max_vif = o.row.get("max_vif")
        shown = "" if max_vif in (None, "") else (
            "infinite" if max_vif == "inf" else f"{float(max_vif):.2f}"
        )  # fmt: skip
        name = html.escape(o.model.name)
        link = f'<a href="{html.escape(quote(o.page))}">{name}</a>' if o.page else name
        note = html.escape(str(o.row.get("error") or o.row.get("breaches") or ""))
        rows.append(
            f"<tr><td>{link}</td><td class={o.status}>{html.escape(o.status)}</td>"
            f'<td class="num">{shown}</td><td>{note}</td></tr>'
        )
    return (
        '<!DOCTYPE html>\n<html lang="en"><head><meta charset="utf-8">'
        '<meta http-equiv="Content-Security-Policy" content="default-src \'none\'; '
        "style-src 'unsafe-inline'\"><title>Collinearity reports</title>"
        f"<style>{_INDEX_STYLE}</style></head><body><h1>Collinearity reports</h1>"
        f"<p>{len(outcomes)} models. Thresholds are rules of thumb; decisions on regulated "
        "models follow local rules and qualified review.</p>"
        "<table><thead><tr><th scope=col>model</th><th scope=col>status</th>"
        "<th scope=col>largest VIF</th><th scope=col>breaks the rule / error</th></tr></thead>"
        f"<tbody>{''.join(rows)}</tbody></table></body></html>\n"
    )


def main(
    argv: Sequence[str] | None = None,
    *,
    transport: httpx.BaseTransport | None = None,
    stderr: TextIO | None = None,
) -> int:
    """Run the command line; returns the exit status (see the module docstring)."""
    err = stderr if stderr is not None else sys.stderr
    parser = _parser()
    args = parser.parse_args(argv)
    try:
        if args.parallel < 1:
            raise UsageError("--parallel must be at least 1")
        if args.attempts < 1:
            raise UsageError("--attempts must be at least 1")
        if not (args.timeout > 0 and math.isfinite(args.timeout)):
            raise UsageError("--timeout must be a positive number of seconds")
        token = _token(args)
        models = _collect(args.inputs, _cli_defaults(args))
    except UsageError as exc:
        err.write(f"{PROG}: error: {exc}\n")
        return EXIT_USAGE
    progress = _Progress(len(models), args.progress, err)
    outcomes: list[Outcome | None] = [None] * len(models)
    client = Client(
        args.url,
        token=token,
        timeout=httpx.Timeout(args.timeout, connect=min(5.0, args.timeout)),
        transport=transport,
        retry=Retry(attempts=args.attempts, total=max(60.0, 4 * args.timeout)),
    )
    pages = args.out if args.report_html else None
    if pages is not None:
        pages.mkdir(parents=True, exist_ok=True)
    with client, ThreadPoolExecutor(max_workers=args.parallel) as pool:
        futures = {pool.submit(_screen, client, m, pages): i for i, m in enumerate(models)}
        for future in as_completed(futures):
            outcome = future.result()
            outcomes[futures[future]] = outcome
            progress.update(outcome)
    progress.finish()
    done = [o for o in outcomes if o is not None]
    _write_reports(done, args.out, args.report_csv or args.out / "screen.csv")
    if pages is not None:
        (pages / "index.html").write_text(_index_page(done), encoding="utf-8")
    if any(o.status == "error" for o in done):
        return EXIT_ERROR
    if any(o.status == "fail" for o in done):
        return EXIT_BREACH
    return EXIT_OK


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
