"""The batch command line, against the in-memory stand-in service."""

from __future__ import annotations

import csv
import io
import json

import msgspec
import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from kc_support import bakery_frame

from knotwork_client._cli import breaches, main

TANGLED = ["oven_hours", "flour_kg", "staff_shifts", "van_trips", "market_stalls"]
CLEAN = ["oven_hours", "staff_shifts", "market_stalls"]


class TTY(io.StringIO):
    def isatty(self) -> bool:
        return True


@pytest.fixture
def models(tmp_path):
    """A folder of candidate models: one clean, one tangled, in three formats."""
    frame = bakery_frame()
    folder = tmp_path / "models"
    folder.mkdir()
    frame[[*CLEAN, "loaves"]].to_csv(folder / "clean.csv", index=False)
    pq.write_table(pa.Table.from_pandas(frame[[*TANGLED, "loaves"]]), folder / "tangled.parquet")
    table = pa.Table.from_pandas(frame[[*CLEAN, "loaves"]], preserve_index=False)
    with (
        pa.OSFile(str(folder / "clean_too.arrow"), "wb") as sink,
        pa.ipc.new_file(sink, table.schema) as writer,
    ):
        writer.write_table(table)
    (folder / "notes.txt").write_text("not a table")
    return folder


def run(stand_in, *args, stderr=None):
    err = stderr if stderr is not None else io.StringIO()
    code = main([*args], transport=stand_in.transport, stderr=err)
    return code, err.getvalue()


def test_folder_screen_writes_reports_and_gates(stand_in, models, tmp_path):
    out = tmp_path / "out"
    code, log = run(stand_in, str(models), "--out", str(out), "--response", "loaves")
    assert code == 1  # the tangled model breaks the rule (common-practice threshold 5)
    assert sorted(p.name for p in out.iterdir()) == [
        "clean.json",
        "clean_too.json",
        "screen.csv",
        "tangled.json",
    ]
    tangled = json.loads((out / "tangled.json").read_text())
    assert tangled["status"] == "fail"
    assert tangled["sent"] == "table"
    assert set(tangled["breaches"]) == {"oven_hours", "flour_kg", "staff_shifts", "van_trips"}
    assert tangled["assessment"]["variables"][0]["a_field_from_the_future"] == {
        "kept": "as unknown"
    }
    with (out / "screen.csv").open() as fh:
        rows = list(csv.DictReader(fh))
    assert [r["model"] for r in rows] == ["clean", "clean_too", "tangled"]
    assert [r["status"] for r in rows] == ["pass", "pass", "fail"]
    assert rows[2]["worst"] in ("oven_hours", "flour_kg")  # r = 0.99 by construction
    assert float(rows[2]["max_vif"]) > 5
    # Not a terminal: one plain line per model and a closing count.
    lines = log.strip().splitlines()
    assert len(lines) == 4
    assert any(line.startswith("knotwork-screen: [") and "tangled: fail" in line for line in lines)
    assert lines[-1].startswith("knotwork-screen: 3 models in")
    assert "1 break the threshold rule" in lines[-1]


def test_summary_only_sends_no_rows(stand_in, models, tmp_path):
    out = tmp_path / "out"
    code, _ = run(
        stand_in,
        str(models / "tangled.parquet"),
        "--summary-only",
        "--response",
        "loaves",
        "--threshold",
        "100",
        "--detail",
        "full",
        "--out",
        str(out),
    )
    assert code == 0  # nothing above 100
    (request,) = stand_in.requests
    body = msgspec.json.decode(request.content)
    assert body["input"]["kind"] == "moments"
    assert body["options"] == {"threshold": 100.0, "detail": "full"}
    report = json.loads((out / "tangled.json").read_text())
    assert report["sent"] == "moments" and report["threshold"] == 100.0


def test_manifest_with_defaults_and_overrides(stand_in, models, tmp_path):
    manifest = tmp_path / "screen.json"
    manifest.write_text(
        json.dumps(
            {
                "defaults": {"response": "loaves", "summary_only": True, "threshold": 10},
                "models": [
                    {
                        "name": "narrow",
                        "path": "models/tangled.parquet",
                        "columns": ["oven_hours", "staff_shifts"],
                    },
                    {"name": "wide", "path": str(models / "tangled.parquet"), "threshold": 1000},
                    "models/clean.csv",
                ],
            }
        )
    )
    out = tmp_path / "out"
    code, _ = run(stand_in, str(manifest), "--out", str(out))
    assert code == 0
    sent = [msgspec.json.decode(r.content) for r in stand_in.requests]
    by_names = {tuple(b["input"]["names"]): b["options"] for b in sent}
    assert by_names[("oven_hours", "staff_shifts", "loaves")] == {"threshold": 10.0}
    assert {"threshold": 1000.0} in by_names.values()
    assert sorted(p.stem for p in out.glob("*.json")) == ["clean", "narrow", "wide"]


def test_errors_get_their_own_report_and_a_distinct_code(stand_in, models, tmp_path):
    bad = models / "broken.parquet"
    bad.write_bytes(b"PAR1 this is not parquet")
    out = tmp_path / "out"
    code, log = run(stand_in, str(models), "--out", str(out), "--response", "loaves")
    assert code == 3  # errors win over a breach: the gate cannot be trusted
    report = json.loads((out / "broken.json").read_text())
    assert report["status"] == "error" and report["error"]["kind"]
    assert json.loads((out / "tangled.json").read_text())["status"] == "fail"
    assert "broken: error" in log


def test_rejected_input_keeps_the_problem_document(stand_in, models, tmp_path):
    from kc_support import problem

    doc = problem(422, "/input/columns/flour_kg", "is constant; drop it")
    stand_in.script = [lambda r: __import__("httpx").Response(422, json=doc)]
    out = tmp_path / "out"
    code, _ = run(stand_in, str(models / "clean.csv"), "--out", str(out), "--attempts", "1")
    assert code == 3
    report = json.loads((out / "clean.json").read_text())
    assert report["error"]["status"] == 422
    assert report["error"]["problem"]["errors"] == doc["errors"]


def test_progress_bar_on_a_terminal(stand_in, models, tmp_path):
    tty = TTY()
    code, log = run(
        stand_in, str(models), "--out", str(tmp_path / "o"), "--parallel", "2", stderr=tty
    )
    assert code == 1
    assert "\r" in log and "[" in log and "3/3" in log
    assert log.rstrip().splitlines()[-1].startswith("knotwork-screen: 3 models")


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (["missing.parquet"], "missing.parquet: no such file"),
        (["x.xlsx"], "not a table file"),
        (["--parallel", "0", "{folder}"], "--parallel must be at least 1"),
        (["{folder}/notes.txt"], "not a table file"),
        (["{manifest}"], "unknown keys ['thresold']"),
        (["--token-file", "{empty}", "{folder}"], "the first line is empty"),
    ],
)
def test_usage_errors_exit_2_and_send_nothing(stand_in, models, tmp_path, args, message):
    manifest = tmp_path / "m.json"
    manifest.write_text(json.dumps({"models": [{"path": "models/clean.csv", "thresold": 3}]}))
    empty = tmp_path / "token"
    empty.write_text("\n")
    filled = [a.format(folder=models, manifest=manifest, empty=empty) for a in args]
    code, log = run(stand_in, *filled, "--out", str(tmp_path / "o"))
    assert code == 2
    assert message in log
    assert stand_in.requests == []


def test_token_is_read_from_a_file(stand_in, models, tmp_path):
    token = tmp_path / "token"
    token.write_text("t0ken\nignored\n")
    run(
        stand_in,
        str(models / "clean.csv"),
        "--token-file",
        str(token),
        "--out",
        str(tmp_path / "o"),
    )
    assert stand_in.requests[0].headers["authorization"] == "Bearer t0ken"


def test_breach_rule_for_terms_and_aliased_columns():
    doc = {
        "variables": [
            {"name": "a", "vif": 2.0, "above_threshold": False, "aliased": False},
            {"name": "b", "vif": None, "above_threshold": True, "aliased": True},
            {"name": "r[x]", "vif": 7.0, "above_threshold": True, "aliased": False},
            {"name": "r[y]", "vif": 7.0, "above_threshold": True, "aliased": False},
        ],
        "terms": [
            {
                "name": "r",
                "columns": ["r[x]", "r[y]"],
                "df": 2,
                "gvif": 3.0,
                "gvif_scaled": 3.0**0.25,
            }
        ],
    }
    # Columns of a multi-column term are judged by their scaled GVIF against sqrt(threshold).
    assert breaches(doc, 5.0) == ["b"]
    assert breaches(doc, 1.5) == ["r", "b"]


def test_python_dash_m_runs_the_command_line():
    import subprocess
    import sys

    done = subprocess.run(
        [sys.executable, "-m", "knotwork_client", "--help"],
        capture_output=True,
        text=True,
        timeout=60,
    )
    assert done.returncode == 0 and "exit 1 when a model breaks" in " ".join(done.stdout.split())


def test_the_console_script_is_installed():
    import subprocess
    import sys
    from pathlib import Path

    script = Path(sys.executable).parent / "knotwork-screen"
    assert script.exists(), f"{script} is not installed"
    done = subprocess.run([str(script), "--help"], capture_output=True, text=True, timeout=60)
    assert done.returncode == 0 and done.stdout.startswith("usage: knotwork-screen")
