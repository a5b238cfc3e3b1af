"""``bandwise serve`` refuses bad settings with one line each, before anything starts.

In process: :func:`service.cli.main` returns before it configures logging or
binds a port when a setting is invalid, so it can be called here directly.
The port-in-use and unknown-variable cases start a real process
(``tests/system/test_serve_process.py``).
"""

from __future__ import annotations

import pytest

from service.cli import main
from service.runtime.settings import COMPANION_VARIABLES, unknown_variables


def test_an_invalid_flag_is_named_with_where_to_set_it_and_no_traceback(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["serve", "--workers", "0"]) == 2
    err = capsys.readouterr().err
    assert "invalid setting workers = 0 (--workers or BANDWISE_WORKERS)" in err
    assert "greater than or equal to 1" in err
    assert "Traceback" not in err


def test_every_invalid_variable_is_reported_and_an_api_key_is_not_echoed(capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("BANDWISE_MAX_POINTS", "-3")
    monkeypatch.setenv("BANDWISE_API_KEYS", "my-plain-secret-key")
    monkeypatch.setenv("BANDWISE_LOG_LEVEL", "loud")
    assert main(["serve", "--port", "0"]) == 2
    err = capsys.readouterr().err
    lines = [line for line in err.splitlines() if line.startswith("bandwise: invalid setting")]
    assert {line.split()[3] for line in lines} == {"max_points", "api_keys", "log_level"}
    assert "(BANDWISE_MAX_POINTS)" in err and "(--log-level or BANDWISE_LOG_LEVEL)" in err
    assert "my-plain-secret-key" not in err


def test_unknown_variables_are_found_with_the_closest_setting() -> None:
    environ = {
        "BANDWISE_WORKRS": "3",  # typo
        "bandwise_max_point": "10",  # case-insensitive, like the settings themselves
        "BANDWISE_SOMETHING_ELSE": "1",
        "BANDWISE_WORKERS": "2",  # a setting
        "PATH": "/bin",
        **{name: "x" for name in COMPANION_VARIABLES},  # the client's and the gateway's
    }
    assert unknown_variables(environ) == [
        ("BANDWISE_SOMETHING_ELSE", None),
        ("BANDWISE_WORKRS", "BANDWISE_WORKERS"),
        ("bandwise_max_point", "BANDWISE_MAX_POINTS"),
    ]
