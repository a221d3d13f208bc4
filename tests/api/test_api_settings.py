"""Settings from KNOTWORK_* variables: defaults, parsing, and messages that say what to fix."""

from __future__ import annotations

from pathlib import Path

import pytest

from knotwork.settings import Settings, SettingsError, usable_cores

TOKEN_A = "alpha-token-0123456789"
TOKEN_B = "bravo-token-0123456789"


def test_defaults_are_safe() -> None:
    settings = Settings.from_env({})
    assert settings.tokens == ()
    assert settings.open and not settings.allow_open
    assert settings.max_body_bytes == 96 * 1024 * 1024
    assert settings.max_cells == 10_000_000
    assert settings.max_columns == 2000
    assert settings.max_batch_items == 500
    assert settings.workers == 1
    assert settings.concurrency == usable_cores()
    assert settings.queue == 2 * settings.concurrency
    assert settings.request_timeout_s == 30.0
    assert settings.log_level == "info"


def test_every_variable_is_read(tmp_path: Path) -> None:
    tokens = tmp_path / "tokens"
    tokens.write_text(f"# rotated monthly\n{TOKEN_A}\n\n")
    settings = Settings.from_env(
        {
            "KNOTWORK_TOKENS_FILE": str(tokens),
            "KNOTWORK_TOKENS": f" {TOKEN_B} ,",
            "KNOTWORK_ALLOW_OPEN": "yes",
            "KNOTWORK_MAX_BODY_BYTES": "1_000_000",
            "KNOTWORK_MAX_CELLS": "5000",
            "KNOTWORK_MAX_COLUMNS": "40",
            "KNOTWORK_MAX_BATCH_ITEMS": "7",
            "KNOTWORK_WORKERS": "2",
            "KNOTWORK_CONCURRENCY": "3",
            "KNOTWORK_QUEUE": "0",
            "KNOTWORK_REQUEST_TIMEOUT_S": "2.5",
            "KNOTWORK_RETRY_AFTER_S": "4",
            "KNOTWORK_BLAS_THREADS": "2",
            "KNOTWORK_LOG_LEVEL": "DEBUG",
        }
    )
    assert settings.tokens == (TOKEN_A, TOKEN_B)
    assert settings.allow_open and not settings.open
    assert (settings.max_body_bytes, settings.max_cells, settings.max_columns) == (
        1_000_000,
        5000,
        40,
    )
    assert (settings.max_batch_items, settings.workers, settings.concurrency) == (7, 2, 3)
    assert settings.queue == 0
    assert settings.request_timeout_s == 2.5
    assert (settings.retry_after_s, settings.blas_threads, settings.log_level) == (4, 2, "debug")


def test_tokens_never_show_in_repr() -> None:
    assert TOKEN_A not in repr(Settings.from_env({"KNOTWORK_TOKENS": TOKEN_A}))


def test_concurrency_defaults_to_cores_shared_by_workers() -> None:
    settings = Settings.from_env({"KNOTWORK_WORKERS": str(usable_cores() * 2)})
    assert settings.concurrency == 1


@pytest.mark.parametrize(
    ("env", "message"),
    [
        ({"KNOTWORK_MAX_CELLS": "lots"}, "KNOTWORK_MAX_CELLS must be a whole number, got 'lots'"),
        ({"KNOTWORK_MAX_COLUMNS": "0"}, "KNOTWORK_MAX_COLUMNS must be >= 1, got 0"),
        ({"KNOTWORK_MAX_BODY_BYTES": "10"}, "KNOTWORK_MAX_BODY_BYTES must be >= 1024, got 10"),
        ({"KNOTWORK_WORKERS": "1000"}, "KNOTWORK_WORKERS must be between 1 and 256, got 1000"),
        (
            {"KNOTWORK_REQUEST_TIMEOUT_S": "soon"},
            "KNOTWORK_REQUEST_TIMEOUT_S must be a number of seconds, got 'soon'",
        ),
        (
            {"KNOTWORK_REQUEST_TIMEOUT_S": "inf"},
            "KNOTWORK_REQUEST_TIMEOUT_S must be a finite number >= 0.001, got 'inf'",
        ),
        (
            {"KNOTWORK_ALLOW_OPEN": "maybe"},
            "KNOTWORK_ALLOW_OPEN must be true or false (also 1/0, yes/no), got 'maybe'",
        ),
        (
            {"KNOTWORK_LOG_LEVEL": "loud"},
            "KNOTWORK_LOG_LEVEL must be one of debug, info, warning, error, got 'loud'",
        ),
        (
            {"KNOTWORK_TOKENS": "short"},
            "KNOTWORK_TOKENS: token 1 is 5 characters long; tokens need at least 16",
        ),
        (
            {"KNOTWORK_TOKENS_FILE": "/nonexistent/tokens"},
            "KNOTWORK_TOKENS_FILE names '/nonexistent/tokens', which does not exist",
        ),
    ],
)
def test_bad_values_are_explained(env: dict[str, str], message: str) -> None:
    with pytest.raises(SettingsError) as info:
        Settings.from_env(env)
    assert any(problem.startswith(message) for problem in info.value.problems), info.value


def test_all_problems_are_reported_at_once() -> None:
    with pytest.raises(SettingsError) as info:
        Settings.from_env({"KNOTWORK_MAX_CELLS": "x", "KNOTWORK_MAX_COLUMNS": "y"})
    assert len(info.value.problems) == 2
    assert str(info.value).startswith("invalid settings:")


def test_a_token_in_a_bad_file_line_is_not_echoed(tmp_path: Path) -> None:
    tokens = tmp_path / "tokens"
    tokens.write_text("tiny-secret\n")
    with pytest.raises(SettingsError) as info:
        Settings.from_env({"KNOTWORK_TOKENS_FILE": str(tokens)})
    assert "line 1" in str(info.value)
    assert "tiny-secret" not in str(info.value)


def test_a_file_without_tokens_is_an_error(tmp_path: Path) -> None:
    tokens = tmp_path / "tokens"
    tokens.write_text("# nothing yet\n")
    with pytest.raises(SettingsError, match="holds no token"):
        Settings.from_env({"KNOTWORK_TOKENS_FILE": str(tokens)})


def test_cgroup_cpu_quota_caps_the_usable_cores(tmp_path) -> None:
    # cgroup v2 cpu.max: "<quota> <period>" in microseconds, or "max <period>" for no limit.
    from knotwork.settings import _cgroup_cpu_limit

    limited = tmp_path / "cpu.max"
    limited.write_text("150000 100000\n")
    assert _cgroup_cpu_limit(str(limited)) == 1.5
    unlimited = tmp_path / "open.max"
    unlimited.write_text("max 100000\n")
    assert _cgroup_cpu_limit(str(unlimited)) is None
    assert _cgroup_cpu_limit(str(tmp_path / "missing")) is None
