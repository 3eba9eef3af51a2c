"""Progress output of long CLI commands (stressmap/cli/_progress.py): plain lines, once each,
when stderr is not a terminal; a bar without stray separators on a terminal."""

from __future__ import annotations

import io
import os
import subprocess
import sys

from stressmap.cli._progress import PlainProgress, progress_bar


class _Tty(io.StringIO):
    def isatty(self):
        return True


def _drive(update):
    for f, msg in ((0.0, "validating"), (0.05, "meshing"), (0.05, "meshing"),
                   (0.3, "assembling the sheet"), (1.0, "done")):
        update(f, msg)


def test_plain_lines_once_each_when_not_a_terminal():
    out = io.StringIO()
    bar, update = progress_bar("build", stream=out)
    assert isinstance(bar, PlainProgress)
    _drive(update)
    bar.close()
    assert out.getvalue().splitlines() == [
        "build:   0% validating", "build:   5% meshing", "build:  30% assembling the sheet",
        "build: 100% done"]
    assert "\r" not in out.getvalue()


def test_terminal_bar_shows_the_step_without_a_stray_separator():
    out = _Tty()
    bar, update = progress_bar("build", stream=out)
    update(0.3, "assembling the sheet")
    bar.close()
    text = out.getvalue()
    assert "| assembling the sheet" in text
    assert ", assembling" not in text and text.count("assembling the sheet") == 1


def test_build_command_logs_each_step_once(tmp_path):
    """End to end: `stressmap build` with stderr to a file (as in CI)."""
    import json
    from pathlib import Path

    import stressmap

    doc = json.loads((Path(stressmap.__file__).parent / "data" / "demo_plate.json").read_text())
    doc["mesh"] = {"edge_km": 250.0}  # coarse: the steps are the point, not the mesh
    demo = tmp_path / "demo.json"
    demo.write_text(json.dumps(doc))
    err = tmp_path / "err.log"
    with open(err, "w") as fh:
        subprocess.run([sys.executable, "-c", "import sys; from stressmap.cli import main; "
                        "sys.exit(main(sys.argv[1:]))", "build", str(demo), "-o",
                        str(tmp_path / "m")], stderr=fh, stdout=subprocess.DEVNULL, check=True,
                       env={**os.environ, "PYTHONWARNINGS": "ignore"})
    lines = err.read_text().splitlines()
    progress = [ln for ln in lines if ln.startswith("build:")]
    assert len(progress) >= 5 and len(progress) == len(set(progress))  # each step once
    assert not any("%, " in ln or "% , " in ln for ln in progress)
    assert "\r" not in err.read_text()
