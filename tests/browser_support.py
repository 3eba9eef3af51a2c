"""Helpers for the browser tests of the map page (not a test module; benchmarks use it too).

- :func:`ensure_chromium`: Debian's ``chromium`` at ``/usr/bin/chromium``, installed with apt-get
  when missing (CI runs as root on a fresh clone).
- :func:`ensure_node_modules`: the pinned web map library (``npm ci`` when ``node_modules`` lacks it).
- :class:`DemoServer`: ``stressmap serve --demo --port 0`` in a subprocess on loopback.
- :func:`launch_chromium`: headless Chromium driven by Playwright (the ``playwright`` package from
  PyPI; its own browser download is never used).
"""

from __future__ import annotations

import json
import os
import queue
import re
import shutil
import signal
import subprocess
import sys
import threading
import time
import urllib.request
from pathlib import Path

REPO = Path(__file__).resolve().parent.parent
CHROMIUM = Path("/usr/bin/chromium")
STRESSMAP = Path(sys.executable).with_name("stressmap")
#: Flags for a closed network and a throw-away profile (no background connections, no GPU).
CHROMIUM_ARGS = ["--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                 "--disable-background-networking", "--disable-component-update",
                 "--disable-sync", "--disable-dev-shm-usage"]


def ensure_chromium() -> Path:
    """Path of Debian's Chromium; installs the ``chromium`` package when it is missing."""
    if not CHROMIUM.exists():
        apt = shutil.which("apt-get")
        if apt is None or os.geteuid() != 0:
            raise RuntimeError("the map page tests need Debian's chromium at /usr/bin/chromium: "
                               "run `apt-get install -y chromium` as root")
        env = dict(os.environ, DEBIAN_FRONTEND="noninteractive")
        subprocess.run([apt, "update", "-qq"], check=True, env=env, timeout=900)
        subprocess.run([apt, "install", "-y", "-qq", "chromium"], check=True, env=env,
                       timeout=1800)
    return CHROMIUM


def ensure_node_modules() -> Path:
    """``node_modules`` of the repository with the pinned map library (``npm ci`` if needed)."""
    modules = REPO / "node_modules"
    if not (modules / "leaflet" / "dist" / "leaflet.js").is_file():
        npm = shutil.which("npm")
        if npm is None:
            raise RuntimeError("npm is needed to install the map page's library (package.json)")
        subprocess.run([npm, "ci", "--no-audit", "--no-fund"], cwd=REPO, check=True, timeout=600)
    return modules


class DemoServer:
    """``stressmap serve --demo --port 0`` with its own data directory, in its own process group.

    ``base`` is the site root (``http://127.0.0.1:PORT``); ``model_id`` the ready demo model.
    """

    def __init__(self, data_dir: Path, timeout_s: float = 180.0, **env):
        environ = dict(os.environ, STRESSMAP_DATA_DIR=str(data_dir), STRESSMAP_JOB_WORKERS="1",
                       **{f"STRESSMAP_{k}": str(v) for k, v in env.items()})
        if "API_TOKEN" not in env:
            environ.pop("STRESSMAP_API_TOKEN", None)
        self.proc = subprocess.Popen([str(STRESSMAP), "serve", "--port", "0", "--demo"],
                                     stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True,
                                     env=environ, start_new_session=True)
        self.lines: queue.Queue = queue.Queue()
        self.seen: list[str] = []
        threading.Thread(target=self._pump, daemon=True).start()
        deadline = time.monotonic() + timeout_s
        self.base = None
        while not any("press Ctrl-C" in line for line in self.seen):
            try:
                line = self.lines.get(timeout=max(deadline - time.monotonic(), 0.01))
            except queue.Empty:
                self.stop()
                raise AssertionError("server did not start: " + "".join(self.seen)) from None
            self.seen.append(line)
            m = re.search(r"listening on (http://127\.0\.0\.1:\d+)", line)
            if m:
                self.base = m.group(1)
        if self.base is None:
            self.stop()
            raise AssertionError("no listening address printed: " + "".join(self.seen))
        models = self.get_json("/api/v1/models")["models"]
        self.model_id = next(m["id"] for m in models if m["status"] == "ready")
        self.data_dir = Path(data_dir)

    def _pump(self):
        for line in self.proc.stdout:
            self.lines.put(line)

    def get_json(self, path: str):
        with urllib.request.urlopen(self.base + path, timeout=60) as resp:
            return json.loads(resp.read())

    def post_json(self, path: str, body: dict, token: str | None = None):
        req = urllib.request.Request(self.base + path, data=json.dumps(body).encode(),
                                     headers={"Content-Type": "application/json"}, method="POST")
        if token:
            req.add_header("Authorization", f"Bearer {token}")
        with urllib.request.urlopen(req, timeout=60) as resp:
            return json.loads(resp.read())

    def stop(self):
        if self.proc.poll() is None:
            self.proc.send_signal(signal.SIGINT)
            try:
                self.proc.wait(timeout=20)
            except subprocess.TimeoutExpired:
                os.killpg(self.proc.pid, signal.SIGKILL)
                self.proc.wait(timeout=20)
        self.proc.stdout.close()


def launch_chromium(playwright):
    """Headless Debian Chromium under Playwright (fresh temporary profile per launch)."""
    return playwright.chromium.launch(executable_path=str(ensure_chromium()), headless=True,
                                      args=CHROMIUM_ARGS)
