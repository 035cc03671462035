"""How long a simulated week of the demo building takes over MQTT, against the daemon.

Run from the repository root (needs Debian's mosquitto, as the broker tests)::

    .venv/bin/python benchmarks/bridge_week.py              # a week at one-minute steps
    .venv/bin/python benchmarks/bridge_week.py --days 1
    .venv/bin/python benchmarks/bridge_week.py --every-step   # ideal gateways
    .venv/bin/python benchmarks/bridge_week.py --protocol 3.1.1
    .venv/bin/python benchmarks/bridge_week.py --amqtt --days 1  # pure-Python broker

The demo building's gateways report on change (``reporting`` in
config/demo-building.yaml: about 6.7 messages a step on this week); with
``--every-step`` every point is published every step, unrounded (22 messages
a step), as before that section existed.

It starts a mosquitto on a free loopback port and ``ventsup run --sim-clock``
as its own process (with a fresh ledger in a temporary folder), then runs the
same week twice and prints both beside each other (see benchmarks/README.md):

- ``in process`` (the baseline): :func:`simulator.loop.run` with the decision
  core called in process;
- ``over MQTT``: the same loop with :class:`simulator.bridge.MqttController`,
  every step's point values published to the broker, the daemon deciding in
  lock-step with the simulated clock, its commands and states read back.

It then checks that the run over MQTT equals, step for step, the in-process
run with :class:`simulator.bridge.CommandedCore` (the core, its targets as
the commands carry them).

Besides the wall time it prints the CPU time of each process (simulator,
daemon, broker; from ``/proc``), which says what a step costs when the host is
busy with other work, and the bridge's counts. Nothing is asserted.
"""

from __future__ import annotations

import argparse
import os
import resource
import shutil
import socket
import subprocess
import sys
import tempfile
import time
from dataclasses import replace
from pathlib import Path

import pandas as pd

from simulator.bridge import CommandedCore, MqttController, open_hours
from simulator.building import Reporting, load_building
from simulator.loop import run
from simulator.weather import synthetic
from ventsup.config import load_config

ROOT = Path(__file__).resolve().parent.parent
PREFIX = "bench"
TZ = "America/Chicago"


def _free_port() -> int:
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        port: int = probe.getsockname()[1]
        return port


def _wait_for_port(port: int, process: subprocess.Popen[bytes], what: str) -> None:
    deadline = time.monotonic() + 10.0
    while True:
        if process.poll() is not None:
            raise SystemExit(f"{what} exited with code {process.returncode}")
        try:
            with socket.create_connection(("127.0.0.1", port), timeout=0.5):
                return
        except OSError:
            if time.monotonic() > deadline:
                raise SystemExit(f"{what} did not listen on port {port}") from None
            time.sleep(0.02)  # polling a port that is not open yet; not synchronisation


def _cpu_seconds(pid: int) -> float:
    """User + system CPU time of a running process [s] (Linux /proc)."""
    fields = Path(f"/proc/{pid}/stat").read_text().rpartition(")")[2].split()
    return (int(fields[11]) + int(fields[12])) / os.sysconf("SC_CLK_TCK")


def _site_text(port: int, ledger: Path, protocol: str) -> str:
    text = (ROOT / "config" / "demo-site.yaml").read_text(encoding="utf-8")
    text = text.replace("topic: qlc/", f"topic: {PREFIX}/qlc/")
    return text + (
        f"\nprefix: {PREFIX}/ctl\nmqtt: {{host: 127.0.0.1, port: {port}, protocol: {protocol}}}\n"
        f"controller: {{tick: 60 s, ledger: {ledger}}}\n"
    )


def _broker(tmp: Path, port: int, amqtt: bool) -> list[str]:
    """The broker's command line, its configuration written to ``tmp``."""
    if amqtt:  # pure Python, MQTT 3.1.1 only (see ../shared/LIBRARY-NOTES.md)
        binary = Path(sys.executable).parent / "amqtt"
        if not binary.exists():
            raise SystemExit("amqtt is not installed: .venv/bin/pip install amqtt")
        config = f"listeners:\n  default:\n    type: tcp\n    bind: 127.0.0.1:{port}\n"
        (tmp / "amqtt.yaml").write_text(config, encoding="utf-8")
        return [str(binary), "-c", str(tmp / "amqtt.yaml")]
    binary = shutil.which("mosquitto") or "/usr/sbin/mosquitto"
    if not os.access(binary, os.X_OK):
        raise SystemExit("mosquitto is not installed: run `make broker`")
    lines = [
        f"listener {port} 127.0.0.1",
        "allow_anonymous true",
        "persistence false",
        "set_tcp_nodelay true",
        *(["user root"] if os.geteuid() == 0 else []),
    ]
    (tmp / "mosquitto.conf").write_text("\n".join(lines) + "\n", encoding="utf-8")
    return [binary, "-c", str(tmp / "mosquitto.conf")]


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--days", type=float, default=7.0)
    parser.add_argument("--step", type=float, default=60.0)
    parser.add_argument(
        "--every-step",
        action="store_true",
        help="publish every point every step, unrounded (ignore the building's reporting)",
    )
    parser.add_argument(
        "--amqtt",
        action="store_true",
        help="the pure-Python broker amqtt (pip install amqtt) with MQTT 3.1.1, not mosquitto",
    )
    parser.add_argument(
        "--protocol", choices=("5", "3.1.1"), default=None, help="the daemon's (site's) MQTT"
    )
    parser.add_argument(
        "--gateway-protocol",
        choices=("3.1.1", "5"),
        default="3.1.1",
        help="the simulator's own MQTT version (as python -m simulator --mqtt; default 3.1.1)",
    )
    args = parser.parse_args()
    protocol = args.protocol or ("3.1.1" if args.amqtt else "5")
    start = pd.Timestamp("2024-07-01", tz=TZ)
    end = start + pd.Timedelta(days=args.days)
    with tempfile.TemporaryDirectory() as folder:
        tmp = Path(folder)
        port = _free_port()
        broker_command = _broker(tmp, port, args.amqtt)
        site_path = tmp / "site.yaml"
        site_path.write_text(_site_text(port, tmp / "ledger.db", protocol), encoding="utf-8")
        site = load_config(site_path)
        building = load_building(ROOT / "config" / "demo-building.yaml", site)
        if args.every_step:
            building = replace(building, reporting=Reporting())
        weather = synthetic(
            41.2, -88.1, TZ, start - pd.Timedelta(days=1), end + pd.Timedelta(days=1), seed=0
        )
        steps = int((end - start) / pd.Timedelta(seconds=args.step))
        gateways = (
            "every point every step"
            if not building.reporting.on_change
            else f"points reported on change, repeated every {building.reporting.repeat:g} s"
        )
        print(
            f"demo building, {args.days:g} days at {args.step:g} s steps ({steps} steps); "
            f"{gateways}; MQTT {site.mqtt.protocol} for the daemon, "
            f"{args.gateway_protocol} for the simulator; broker {Path(broker_command[0]).name}"
        )

        began = time.perf_counter()
        run(site, building, weather, start=start, end=end, step=args.step)
        in_process = time.perf_counter() - began

        broker = subprocess.Popen(
            broker_command,
            stdout=subprocess.DEVNULL,
            stderr=subprocess.DEVNULL,
        )
        daemon: subprocess.Popen[bytes] | None = None
        log = (tmp / "daemon.log").open("wb")
        try:
            _wait_for_port(port, broker, "mosquitto")
            daemon = subprocess.Popen(
                [sys.executable, "-m", "ventsup.cli", "run", str(site_path), "--sim-clock"],
                stdout=log,
                stderr=subprocess.STDOUT,
            )
            cpu_self = resource.getrusage(resource.RUSAGE_SELF)
            with MqttController(site, timeout=60.0, protocol=args.gateway_protocol) as controller:
                cpu_daemon, cpu_broker = _cpu_seconds(daemon.pid), _cpu_seconds(broker.pid)
                began = time.perf_counter()
                result = run(
                    site, building, weather, start=start, end=end, step=args.step,
                    controller=controller,
                )  # fmt: skip
                over_mqtt = time.perf_counter() - began
                cpu_daemon = _cpu_seconds(daemon.pid) - cpu_daemon
                cpu_broker = _cpu_seconds(broker.pid) - cpu_broker
            after = resource.getrusage(resource.RUSAGE_SELF)
            cpu_simulator = (after.ru_utime - cpu_self.ru_utime) + (
                after.ru_stime - cpu_self.ru_stime
            )
        finally:
            for process in (daemon, broker):
                if process is not None:
                    process.terminate()
                    process.wait(10)
            log.close()
        stats = controller.stats
        per_step = over_mqtt / steps * 1e3
        print(
            f"in process (baseline): {in_process:8.2f} s  ({in_process / steps * 1e3:.3f} ms a step)"
        )
        print(
            f"over MQTT:             {over_mqtt:8.2f} s  ({per_step:.2f} ms a step, "
            f"{over_mqtt / in_process:.0f}x the baseline; a week would take "
            f"{per_step * 10080 / 1e3:.0f} s)"
        )
        print(
            f"CPU over MQTT: simulator {cpu_simulator:.1f} s, daemon {cpu_daemon:.1f} s, "
            f"broker {cpu_broker:.1f} s ({(cpu_simulator + cpu_daemon + cpu_broker) / steps * 1e3:.2f} ms a step in all)"
        )
        print(
            f"bridge: {stats.published} messages out, {stats.outputs} outputs in, "
            f"{stats.accepted} values accepted and {stats.rejected} rejected by the daemon, "
            f"{stats.waited:.1f} s waiting for it"
        )
        print(
            f"per step: {stats.published / steps:.1f} messages out (QoS 0, one burst), "
            f"{stats.outputs / steps:.2f} outputs and one acknowledgement in: one round trip"
        )
        # The same week in process with the targets as the commands carry them.
        commanded = run(
            site, building, weather, start=start, end=end, step=args.step,
            controller=CommandedCore(site),
        )  # fmt: skip
        same = all(result.zones[z].equals(commanded.zones[z]) for z in result.zones)
        print(f"free-cooling open hours over MQTT: {open_hours(result)}")
        print(f"the same as the core in process, step for step (targets as commanded): {same}")
        print(f"load average while measuring: {os.getloadavg()[0]:.1f} on {os.cpu_count()} CPUs")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
