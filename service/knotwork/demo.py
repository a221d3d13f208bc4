"""A generated demonstration: weekly takings of a fictional chain of garden centres.

Every number is made up here with a fixed seed. Several predictors are tangled on purpose:
bigger centres have more floor area, more glasshouse area, more checkout lanes, more staff
hours and bigger car parks, so those measure much the same thing.

Run ``python -m knotwork.demo`` (or ``make demo``) to see the core's assessment printed.
"""

from __future__ import annotations

import argparse
import math
import sys
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

if TYPE_CHECKING:
    from knotwork_contract import Assessment

REGIONS = ("hills", "lakes", "plains", "shore")


def garden_centres(n: int = 240, seed: int = 7) -> pd.DataFrame:
    """Generate the demo table: one row per centre-week.

    Columns: ``floor_area`` (m^2), ``glasshouse_area`` (m^2), ``checkout_lanes``,
    ``staff_hours`` (per week), ``car_park_spaces``, ``local_households`` (thousands within
    20 minutes), ``region`` (categorical) and the response ``weekly_takings`` (currency units).
    """
    rng = np.random.default_rng(seed)
    size = rng.lognormal(mean=0.0, sigma=0.35, size=n)
    floor = 4000 * size + rng.normal(0, 150, n)
    glass = 0.3 * floor + rng.normal(0, 60, n)
    lanes = np.maximum(2, np.round(floor / 900 + rng.normal(0, 0.4, n)))
    staff = 95 * lanes + 0.04 * floor + rng.normal(0, 25, n)
    parking = 0.045 * floor + rng.normal(0, 12, n)
    region = rng.choice(REGIONS, size=n, p=[0.2, 0.25, 0.35, 0.2])
    households = rng.gamma(6.0, 4.0, n) + 6.0 * (region == "plains")
    takings = (
        2.1 * floor
        + 3.0 * glass
        + 850 * lanes
        + 22 * staff
        + 160 * households
        + 1500 * (region == "shore")
        + rng.normal(0, 1800, n)
    )
    return pd.DataFrame(
        {
            "floor_area": floor.round(1),
            "glasshouse_area": glass.round(1),
            "checkout_lanes": lanes,
            "staff_hours": staff.round(1),
            "car_park_spaces": parking.round(),
            "local_households": households.round(2),
            "region": region,
            "weekly_takings": takings.round(2),
        }
    )


def _fmt(x: float | None, width: int = 10) -> str:
    if x is None:
        return "aliased".rjust(width)
    if x == 0 or 1e-3 <= abs(x) < 1e6:
        return f"{x:{width}.3f}"
    return f"{x:{width}.3e}"


def render(a: Assessment) -> str:
    """Render an assessment as readable text (for the demo and the command line)."""
    lines = [
        f"knotwork assessment: {a.p} predictors, n = {a.n:g}, input {a.input_kind}, "
        f"intercept {'yes' if a.intercept else 'no'}, threshold {a.threshold:g}",
        "",
        f"{'variable':<22}{'VIF':>10}{'tolerance':>11}{'R^2':>9}{'SE x':>9}  flag",
    ]
    for v in a.variables:
        flag = "aliased" if v.aliased else ("HIGH" if v.above_threshold else "")
        se = "-" if v.se_inflation is None else f"{v.se_inflation:.2f}"
        lines.append(
            f"{v.name:<22}{_fmt(v.vif)}{v.tolerance:>11.4f}{v.r_squared:>9.4f}{se:>9}  {flag}"
        )
    for t in a.terms:
        lines.append(
            f"term {t.name} ({t.df} columns): GVIF {_fmt(t.gvif).strip()}, "
            f"scaled {_fmt(t.gvif_scaled).strip()}, compare with {math.sqrt(a.threshold):.3f}"
        )
    c = a.conditioning
    if c is not None:
        lines += [
            "",
            f"conditioning ({c.basis}): condition number {_fmt(c.condition_number).strip()}",
        ]
        for tangle in c.tangles:
            lines.append(f"  index {tangle.index:9.1f}: {', '.join(tangle.variables)}")
    if a.dependencies:
        lines.append("")
        for d in a.dependencies:
            terms = " + ".join(f"{w:.4g}*{v}" for v, w in zip(d.variables, d.weights, strict=True))
            lines.append(f"exact relation (standardized): {terms} = 0")
    removal = a.removal
    if removal is not None:
        lines += ["", f"removal at threshold {removal.threshold:g}:"]
        for step in removal.steps:
            vif = "aliased" if step.vif is None else f"{step.vif:.3f}"
            after = "-" if step.max_vif_after is None else f"{step.max_vif_after:.3f}"
            lines.append(f"  drop {step.drop:<20} VIF {vif:>10}  largest left {after}")
        lines.append(f"  kept: {', '.join(removal.kept)}")
    ridge = a.ridge
    if ridge is not None:
        picks = ", ".join(
            f"{ch.rule} k={ch.k:.4g}"
            for ch in ridge.choices
            if ch.k is not None and math.isfinite(ch.k)
        )
        lines += ["", f"ridge (k on the {ridge.k_scale} scale): {picks}"]
    comp = a.components
    if comp is not None:
        lines.append(
            f"principal components: keep {len(comp.kept)} of {len(comp.eigenvalues)} "
            f"by rule {comp.rule} (limit {comp.limit:g}), largest VIF left {comp.max_vif:.3f}"
        )
    if a.warnings:
        lines += ["", "warnings:"] + [f"  [{w.code}] {w.message}" for w in a.warnings]
    lines += ["", "cautions:"] + [f"  - {c}" for c in a.cautions]
    return "\n".join(lines)


def request_body(frame: pd.DataFrame, threshold: float) -> dict[str, object]:
    """The demo table as a JSON assessment request (``kind: table``)."""
    numeric = frame.select_dtypes("number")
    return {
        "input": {
            "kind": "table",
            "columns": {name: numeric[name].tolist() for name in numeric.columns},
            "categorical": {"region": frame["region"].tolist()},
            "response": "weekly_takings",
        },
        "options": {"threshold": threshold},
    }


def _post(url: str, body: dict[str, object], token: str | None) -> object:
    """POST the body to a running service and decode the answer into attribute records."""
    import json
    import urllib.error
    import urllib.request
    from types import SimpleNamespace

    headers = {"Content-Type": "application/json"}
    if token:
        headers["Authorization"] = f"Bearer {token}"
    req = urllib.request.Request(
        url.rstrip("/") + "/v1/assess", data=json.dumps(body).encode(), headers=headers
    )
    try:
        with urllib.request.urlopen(req, timeout=60) as answer:
            text = answer.read()
    except urllib.error.HTTPError as err:
        raise SystemExit(f"the service answered {err.code}: {err.read().decode()}") from None
    return json.loads(text, object_hook=lambda d: SimpleNamespace(**d))


def main(argv: list[str] | None = None) -> int:
    import os

    from knotwork.core import Options, assess, from_frame

    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=240, help="centre-weeks to generate")
    parser.add_argument("--seed", type=int, default=7, help="random seed")
    parser.add_argument("--threshold", type=float, default=5.0, help="VIF threshold")
    parser.add_argument(
        "--url",
        help="post the data to a running service (e.g. http://127.0.0.1:8000) instead of "
        "computing in process; a token is read from KNOTWORK_TOKEN",
    )
    args = parser.parse_args(argv)
    frame = garden_centres(args.rows, args.seed)
    if args.url:
        result = _post(
            args.url, request_body(frame, args.threshold), os.environ.get("KNOTWORK_TOKEN")
        )
        print(render(result))  # type: ignore[arg-type]
        return 0
    summary = from_frame(frame, response="weekly_takings")
    print(render(assess(summary, Options(threshold=args.threshold))))
    return 0


if __name__ == "__main__":
    sys.exit(main())
