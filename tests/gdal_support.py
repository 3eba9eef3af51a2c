"""GDAL's command-line tools for the tests that read our outputs as a GIS would (not a test module).

:func:`gdal_tools` makes sure ``ogrinfo``, ``gdalinfo`` and ``gdalsrsinfo`` are on the PATH,
installing the Debian package ``gdal-bin`` once per session when they are missing (CI runs as
root on a fresh machine). Tests never skip for want of them: a machine that cannot install them
fails with the reason.
"""

from __future__ import annotations

import os
import shutil
import subprocess

import pytest

TOOLS = ("ogrinfo", "gdalinfo", "gdalsrsinfo")


def _install() -> None:
    if os.geteuid() != 0:
        raise RuntimeError("GDAL's command-line tools are missing and this user cannot install "
                           "them: run `sudo apt-get install -y gdal-bin` (Debian/Ubuntu)")
    env = dict(os.environ, DEBIAN_FRONTEND="noninteractive")
    for cmd in (["apt-get", "update", "-qq"], ["apt-get", "install", "-y", "-qq", "gdal-bin"]):
        subprocess.run(cmd, check=True, env=env, stdout=subprocess.DEVNULL, timeout=900)


@pytest.fixture(scope="session")
def gdal_tools() -> dict:
    """Paths of the GDAL command-line tools, installed when missing."""
    if not all(shutil.which(t) for t in TOOLS):
        _install()
    found = {t: shutil.which(t) for t in TOOLS}
    missing = [t for t, p in found.items() if p is None]
    assert not missing, f"GDAL tools still missing after installing gdal-bin: {missing}"
    return found


def run_tool(tools: dict, name: str, *args: str, check: bool = True) -> str:
    """Run one GDAL tool; its standard output (and error, for messages) as text."""
    proc = subprocess.run([tools[name], *args], capture_output=True, text=True, timeout=300,
                          env=dict(os.environ, CPL_DEBUG="OFF"))
    if check and proc.returncode != 0:
        raise AssertionError(f"{name} {' '.join(args)} failed ({proc.returncode}):\n"
                             f"{proc.stdout}\n{proc.stderr}")
    return proc.stdout + proc.stderr
