"""`ventsup check` and the other subcommands, in-process and through the installed command."""

from __future__ import annotations

import subprocess
import sys
from importlib import metadata
from pathlib import Path

import pytest

from ventsup.cli import main

from .sites import SITE, SITE_IP, edit


@pytest.fixture
def site_dir(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Path:
    """A working directory holding good.yaml, ip.yaml and bad.yaml."""
    monkeypatch.chdir(tmp_path)
    (tmp_path / "good.yaml").write_text(SITE, encoding="utf-8")
    (tmp_path / "ip.yaml").write_text(SITE_IP, encoding="utf-8")
    bad = edit(SITE, ("area: 4 m2", "area: -2 m2"), ("Europe/Berlin", "Europe/Berln"))
    (tmp_path / "bad.yaml").write_text(bad, encoding="utf-8")
    return tmp_path


BAD_LINES = [
    "bad.yaml:3 site.time_zone: got 'Europe/Berln', expected an IANA time zone name such as "
    "'Europe/Berlin' or 'America/Denver'",
    "bad.yaml:27 zones.hall.openings.north.area: got '-2 m2', expected a positive area such as "
    "'4 m2' or '40 ft2'",
    "FAILED: 2 problems in bad.yaml",
]


def test_check_good_site(site_dir: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["check", "good.yaml"]) == 0
    out, err = capsys.readouterr()
    assert err == ""
    assert out.startswith("Site       Larkfield Library\n")
    assert "open_above                   24.0 °C" in out
    assert out.endswith("OK: 7 points, 1 zones, 1 openings\n")


def test_check_ip_site_shows_ip_units(site_dir: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["check", "ip.yaml"]) == 0
    out, _ = capsys.readouterr()
    assert "open_above                   75.2 °F" in out
    assert "43.1 ft²" in out


def test_check_bad_site(site_dir: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["check", "bad.yaml"]) == 2
    out, err = capsys.readouterr()
    assert out == ""
    assert err.splitlines() == BAD_LINES


def test_check_missing_file(site_dir: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["check", "nowhere.yaml"]) == 2
    assert capsys.readouterr().err.splitlines() == [
        "nowhere.yaml: no such file; check the path",
        "FAILED: 1 problem in nowhere.yaml",
    ]


def test_version(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["--version"]) == 0
    assert capsys.readouterr().out == f"ventsup {metadata.version('ventsup')}\n"


def test_no_command_prints_help(capsys: pytest.CaptureFixture[str]) -> None:
    assert main([]) == 2
    assert "usage: ventsup" in capsys.readouterr().err


def test_usage_error(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["check"]) == 2
    assert "the following arguments are required: CONFIG" in capsys.readouterr().err


def _console_script() -> Path:
    script = Path(sys.executable).with_name("ventsup")
    if not script.exists():
        pytest.fail(
            f"the console script {script} is missing: install the project with "
            "`pip install -e '.[test]'` (make venv)",
            pytrace=False,
        )
    return script


def test_console_script_checks_a_site(site_dir: Path) -> None:
    good = subprocess.run(
        [str(_console_script()), "check", "good.yaml"],
        capture_output=True,
        text=True,
        encoding="utf-8",
        timeout=60,
        check=False,
    )
    assert (good.returncode, good.stderr) == (0, "")
    assert good.stdout.endswith("OK: 7 points, 1 zones, 1 openings\n")
    bad = subprocess.run(
        [sys.executable, "-m", "ventsup.cli", "check", "bad.yaml"],
        capture_output=True,
        text=True,
        encoding="utf-8",
        timeout=60,
        check=False,
    )
    assert (bad.returncode, bad.stdout) == (2, "")
    assert bad.stderr.splitlines() == BAD_LINES
