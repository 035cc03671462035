"""`ventsup run`, `override` and `status`: the command lines, their errors and exit codes."""

from __future__ import annotations

import io
import json
import logging
import socket
import subprocess
import sys
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest

from ventsup.cli import main
from ventsup.edges.logfmt import JsonLineFormatter, configure_logging

from .daemon_site import write_site
from .harness import mosquitto_pub


def free_port() -> int:
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        port: int = probe.getsockname()[1]
        return port


@pytest.fixture
def site(tmp_path: Path) -> Path:
    """A site whose broker port has nothing listening."""
    return write_site(tmp_path, "cli", port=free_port())


def test_run_help_lists_the_options(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["run", "--help"]) == 0
    out = capsys.readouterr().out
    for option in ("--observe", "--ledger PATH", "--log-format {text,json}"):
        assert option in out


def test_run_with_a_bad_site_file(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    bad = tmp_path / "bad.yaml"
    bad.write_text("mqtt:\n  password: x\n", encoding="utf-8")
    assert main(["run", str(bad)]) == 2
    err = capsys.readouterr().err
    assert "mqtt.password: unknown key 'password': a password never goes in the site file" in err


def test_run_without_a_broker_fails_at_once_with_the_reason(site: Path) -> None:
    done = subprocess.run(
        [sys.executable, "-m", "ventsup.cli", "run", str(site), "--log-format", "json"],
        stdin=subprocess.DEVNULL,
        capture_output=True,
        text=True,
        timeout=60,
        check=False,
    )
    assert done.returncode == 1, done
    lines = [json.loads(line) for line in done.stderr.splitlines()]
    error = lines[-1]
    assert (error["level"], error["logger"]) == ("error", "ventsup.run")
    assert error["message"].startswith("cannot start: cannot connect to the MQTT broker at ")
    assert error["message"].endswith(
        "connection refused; is the broker running and listening on that port?"
    )


@pytest.mark.parametrize(
    ("argv", "error"),
    [
        (["attic", "open"], "unknown zone 'attic'; the zones are hall, room"),
        (["hall", "open", "--for", "2 parsecs"], "expected a duration"),
        (
            ["hall", "close", "--position", "0.3"],
            "--position applies to open and hold, not to close",
        ),
    ],
)
def test_override_refuses_a_bad_request_before_sending(
    site: Path, capsys: pytest.CaptureFixture[str], argv: list[str], error: str
) -> None:
    assert main(["override", str(site), *argv, "--reason", "test"]) == 2
    assert error in capsys.readouterr().err


def test_override_needs_a_reason(site: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["override", str(site), "hall", "open"]) == 2
    assert "the following arguments are required: --reason" in capsys.readouterr().err


def test_override_without_a_broker(site: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["override", str(site), "hall", "open", "--reason", "test"]) == 1
    assert "connection refused" in capsys.readouterr().err


@pytest.mark.broker
def test_override_and_status_without_a_controller(
    tmp_path: Path, mosquitto: Any, topic_prefix: str, capsys: pytest.CaptureFixture[str]
) -> None:
    site = write_site(tmp_path, topic_prefix, port=mosquitto.port)
    argv = ["override", str(site), "hall", "open", "--reason", "test", "--timeout", "0.5"]
    assert main(argv) == 1
    assert "no answer from the controller within 0.5 s; is `ventsup run` running" in (
        capsys.readouterr().err
    )
    assert main(["status", str(site), "--timeout", "0.3"]) == 1
    assert capsys.readouterr().out.splitlines() == [
        f"controller {topic_prefix}/ctl: unknown (no status published)",
        "hall  no state published",
        "room  no state published",
    ]
    # a retained state that is not JSON is shown as such, not a crash
    mosquitto_pub(mosquitto.host, mosquitto.port, f"{topic_prefix}/ctl/zones/hall/state", "?", "-r")
    mosquitto_pub(mosquitto.host, mosquitto.port, f"{topic_prefix}/ctl/status", "offline", "-r")
    assert main(["status", str(site), "--timeout", "0.5"]) == 1
    out = capsys.readouterr().out.splitlines()
    assert out[:3] == [
        f"controller {topic_prefix}/ctl: offline",
        "hall  ?: none",
        "      unreadable state payload",
    ]


# --------------------------------------------------------------------------- logs


@pytest.fixture
def root_logging() -> Iterator[None]:
    root = logging.getLogger()
    handlers, level = list(root.handlers), root.level
    yield
    for handler in list(root.handlers):
        root.removeHandler(handler)
    for handler in handlers:
        root.addHandler(handler)
    root.setLevel(level)


def test_json_log_lines(root_logging: None) -> None:
    stream = io.StringIO()
    configure_logging("json", stream=stream)
    log = logging.getLogger("ventsup.test")
    log.warning("rejected %s", "t_out", extra={"point": "t_out"})
    try:
        raise ValueError("boom")
    except ValueError:
        log.exception("failed")
    first, second = (json.loads(line) for line in stream.getvalue().splitlines())
    assert first["message"] == "rejected t_out"
    assert (first["level"], first["logger"], first["point"]) == ("warning", "ventsup.test", "t_out")
    assert first["time"].endswith("+00:00")
    assert second["exception"].startswith("Traceback") and "ValueError: boom" in second["exception"]
    assert JsonLineFormatter().format(logging.makeLogRecord({"msg": "x"})).startswith("{")


def test_text_log_lines(root_logging: None) -> None:
    stream = io.StringIO()
    configure_logging("text", stream=stream)
    logging.getLogger("ventsup.test").info("started")
    assert stream.getvalue().rstrip().endswith("INFO    ventsup.test: started")
    with pytest.raises(ValueError, match="expected 'text' or 'json'"):
        configure_logging("xml")  # type: ignore[arg-type]
