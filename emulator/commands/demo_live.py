"""``railrig demo`` with the dashboard: the rig in a child process, the view in this one.

The child is ``railrig serve --controller reference --program demo`` in real time with
its monitor on a private Unix socket; this process runs the dashboard on it. Quitting
the dashboard stops the child (SIGTERM, then SIGKILL after a grace period) and nothing
else; the child's own report is printed after the screen closes.
"""

from __future__ import annotations

import os
import shutil
import signal
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable
from pathlib import Path

START_TIMEOUT_S = 120.0  # the first start compiles the plant kernel
STOP_GRACE_S = 10.0


def start_rig(profile: Path, where: Path, target_kmh: float, stop_at_m: float,
              log_path: Path, extra: tuple[str, ...] = ()) -> tuple[subprocess.Popen, str]:
    """Start the rig child (``extra``: more ``railrig serve`` options); returns it and its
    monitor address."""
    address = str(where / "monitor.sock")
    log = log_path.open("w")
    child = subprocess.Popen(
        [sys.executable, "-m", "emulator.cli", "serve", "--profile", str(profile),
         "--controller", "reference", "--program", "demo", "--mode", "realtime",
         "--target-kmh", f"{target_kmh:g}", "--stop-at-m", f"{stop_at_m:g}",
         "--monitor", address, *extra],
        stdout=log, stderr=subprocess.STDOUT, stdin=subprocess.DEVNULL)
    log.close()
    return child, address


def wait_for_socket(child: subprocess.Popen, address: str, timeout_s: float) -> bool:
    """True once the monitor socket exists; False if the child died or time ran out."""
    deadline = time.monotonic() + timeout_s
    while time.monotonic() < deadline:
        if os.path.exists(address):
            return True
        if child.poll() is not None:
            return False
        time.sleep(0.1)
    return False


def stop_rig(child: subprocess.Popen) -> int:
    """SIGTERM (as Ctrl-C on ``serve``), then SIGKILL after the grace period."""
    if child.poll() is None:
        child.send_signal(signal.SIGTERM)
        try:
            child.wait(STOP_GRACE_S)
        except subprocess.TimeoutExpired:
            child.kill()
            child.wait()
    return child.returncode


def run_live_demo(profile: Path, target_kmh: float, stop_at_m: float,
                  say: Callable[[str], None]) -> int:
    """Rig child + dashboard; returns 0, or 2 if the rig could not be started."""
    from tui.app import RigDashboard

    where = Path(tempfile.mkdtemp(prefix="railrig-demo-"))
    log_path = where / "rig.log"
    child, address = start_rig(profile, where, target_kmh, stop_at_m, log_path)
    try:
        if not wait_for_socket(child, address, START_TIMEOUT_S):
            say(f"the rig did not start; its output:\n{log_path.read_text()[-3000:]}")
            return 2
        RigDashboard(address).run()
    finally:
        code = stop_rig(child)
        output = log_path.read_text() if log_path.exists() else ""
        shutil.rmtree(where, ignore_errors=True)
    say(f"rig stopped (exit {code}); its report:\n{output[-2000:].strip()}")
    return 0
