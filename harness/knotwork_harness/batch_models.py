"""Generated data for load and fault runs: the models of a batch job (files, reference VIFs),
request bodies of every size, and the batch command line run over them."""

from __future__ import annotations

import csv
import json
from pathlib import Path
from typing import Any

import numpy as np


def ferry_model(index: int, seed: int = 20261201) -> dict[str, list[float]]:
    """Columns of candidate model ``index``: 3 to 6 predictors, 30 to 80 rows, some tangled.

    Every model has its own column names and row count, so a result that went to the wrong
    model, or twice to one, shows in its names and n.
    """
    rng = np.random.default_rng([seed, index])
    rows = int(rng.integers(30, 81))
    p = int(rng.integers(3, 7))
    base = rng.normal(size=(rows, p))
    # Tangle the second predictor with the first, more so for some models than for others.
    base[:, 1] = base[:, 0] * rng.uniform(0.5, 4.0) + base[:, 1] * rng.uniform(0.2, 1.0)
    names = [f"m{index:03d}_route{j}" for j in range(p)]
    scale = rng.uniform(1.0, 50.0, p)
    shift = rng.uniform(-100.0, 100.0, p)
    return {
        name: (base[:, j] * scale[j] + shift[j]).round(6).tolist() for j, name in enumerate(names)
    }


def reference_vifs(columns: dict[str, list[float]]) -> list[float]:
    """VIFs from statsmodels 0.15.0's variance_inflation_factor on the design with a constant,
    centred explicitly (``standardize=True``: the constant stays, the other columns are
    standardized, which leaves the VIFs of a model with an intercept unchanged)."""
    import statsmodels.api as sm
    from statsmodels.stats.outliers_influence import variance_inflation_factor

    design = sm.add_constant(np.column_stack(list(columns.values())))
    return [
        variance_inflation_factor(design, j, standardize=True) for j in range(1, design.shape[1])
    ]


def correlation_body(p: int, n: int, seed: int, sections: list[str] | None = None) -> dict:
    """A valid correlation input of ``p`` predictors (from ``n`` generated rows)."""
    rng = np.random.default_rng(seed)
    x = rng.normal(size=(max(n, p + 2), p))
    if p > 1:
        x[:, 1] += 2.0 * x[:, 0]
    r = np.corrcoef(x, rowvar=False)
    r = (r + r.T) / 2
    np.fill_diagonal(r, 1.0)
    body: dict[str, Any] = {
        "input": {
            "kind": "correlation",
            "names": [f"c{i}" for i in range(p)],
            "matrix": r.tolist(),
            "n": float(x.shape[0]),
        }
    }
    if sections:
        body["options"] = {"sections": sections}
    return body


def table_body(rows: int, p: int, seed: int, sections: list[str] | None = None) -> dict:
    """A valid table input of ``rows`` x ``p`` generated numbers."""
    rng = np.random.default_rng(seed)
    x = rng.normal(size=(rows, p))
    if p > 1:
        x[:, 1] += x[:, 0]
    body: dict[str, Any] = {
        "input": {
            "kind": "table",
            "columns": {f"t{j}": x[:, j].round(5).tolist() for j in range(p)},
        }
    }
    if sections:
        body["options"] = {"sections": sections}
    return body


# --------------------------------------------------------------------------------------------
# A batch job of generated models through the client's command line


def write_models(folder: Path, count: int) -> dict[str, dict[str, list[float]]]:
    """Write ``count`` generated models as CSV files and a manifest (every third model sends
    only its local summary); return the columns of each model by name."""
    folder.mkdir(parents=True, exist_ok=True)
    models: dict[str, dict[str, list[float]]] = {}
    entries = []
    for index in range(count):
        name = f"model{index:03d}"
        columns = ferry_model(index)
        with (folder / f"{name}.csv").open("w", newline="", encoding="utf-8") as fh:
            writer = csv.writer(fh)
            writer.writerow(list(columns))
            writer.writerows(zip(*columns.values(), strict=True))
        models[name] = columns
        entries.append({"path": f"{name}.csv", "summary_only": index % 3 == 0})
    (folder / "manifest.json").write_text(json.dumps({"models": entries}), encoding="utf-8")
    return models


def run_screen(folder: Path, url: str, out: Path, *, parallel: int = 4) -> int:
    """Run ``knotwork-screen`` on the manifest in ``folder`` (token in ``folder/token``)."""
    from knotwork_client._cli import main as screen

    return screen(
        [
            str(folder / "manifest.json"),
            "--url",
            url,
            "--token-file",
            str(folder / "token"),
            "--out",
            str(out),
            "--parallel",
            str(parallel),
            "--attempts",
            "5",
            "--timeout",
            "30",
            "--sections",
            "variables,removal",
            "--progress",
            "none",
        ]
    )


def tally_reports(models: dict[str, dict[str, list[float]]], out: Path) -> dict[str, int]:
    """Count what a batch job's reports say against what was sent.

    ``lost``: models without a report or whose report is an error; ``duplicated``: reports or
    table rows beyond one per model; ``wrong``: reports about another model (names, n) or with
    VIFs that differ from statsmodels' by more than 1e-9 relative; ``pass`` and ``fail``: the
    threshold rule's verdicts.
    """
    counts = {"lost": 0, "duplicated": 0, "wrong": 0, "pass": 0, "fail": 0}
    reports = [p.stem for p in out.glob("*.json")]
    with (out / "screen.csv").open(encoding="utf-8") as fh:
        rows = [r["model"] for r in csv.DictReader(fh)]
    counts["duplicated"] = max(0, len(rows) - len(set(rows))) + len(set(reports) - set(models))
    for name, columns in models.items():
        path = out / f"{name}.json"
        if not path.exists() or name not in rows:
            counts["lost"] += 1
            continue
        report = json.loads(path.read_text(encoding="utf-8"))
        if report.get("status") not in ("pass", "fail"):
            counts["lost"] += 1
            continue
        counts[report["status"]] += 1
        doc = report["assessment"]
        # Source: statsmodels 0.15.0 variance_inflation_factor on the same rows with a constant.
        expected = reference_vifs(columns)
        got = [v["vif"] for v in doc["variables"]]
        right = (
            report["model"] == name
            and [v["name"] for v in doc["variables"]] == list(columns)
            and doc["n"] == len(next(iter(columns.values())))
            and all(g is not None for g in got)
            and np.allclose(got, expected, rtol=1e-9, atol=0)
        )
        counts["wrong"] += not right
    return counts


def check_reports(models: dict[str, dict[str, list[float]]], out: Path) -> dict[str, int]:
    """Every model has exactly one report, about itself, with the right VIFs; returns counts."""
    counts = tally_reports(models, out)
    assert counts["lost"] == counts["duplicated"] == counts["wrong"] == 0, counts
    return counts
