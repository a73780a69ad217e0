"""Start-up cost of the command line: what each path imports.

``wordspot recognize`` must not load the training stack, librosa or scipy.signal (each
costs a large part of a second to import), and ``wordspot --help`` loads no subcommand
module. Checked in a fresh interpreter, where ``sys.modules`` shows every import.
"""

from __future__ import annotations

import json
import subprocess
import sys

import numpy as np
import soundfile as sf

from decoding_helpers import tiny_model
from wordspot.model import save_model

HEAVY = ("librosa", "scipy.signal", "wordspot.training", "wordspot.audio.augment", "sklearn", "matplotlib")

_PROBE = """
import json, sys
from wordspot.cli import main
status = 0
try:
    status = main(sys.argv[1:])
except SystemExit as exc:
    status = exc.code
print(json.dumps({"status": status, "modules": sorted(sys.modules)}), file=sys.stderr)
"""


def _modules_after(argv):
    done = subprocess.run([sys.executable, "-c", _PROBE, *argv], capture_output=True, text=True, timeout=300)
    report = json.loads(done.stderr.strip().splitlines()[-1])
    return report["status"], set(report["modules"])


def _loaded(modules, name):
    return any(m == name or m.startswith(name + ".") for m in modules)


def test_recognize_loads_nothing_of_training(rng, tmp_path):
    entries = {"oven": [["AA", "B", "AA"]], "stop": [["S", "T", "AA", "B"]]}
    model = save_model(tiny_model(rng, entries, transcripts=[["oven", "stop"]]), tmp_path / "bakery.model")
    wav = tmp_path / "oven.wav"
    sf.write(wav, 0.1 * rng.normal(size=8000).astype(np.float32), 16000)
    status, modules = _modules_after(["recognize", "--model", str(model), str(wav), "-q"])
    assert status == 0
    assert "wordspot.decoding.kernels" in modules  # the probe did run the recognizer
    assert [name for name in HEAVY if _loaded(modules, name)] == []


def test_help_loads_no_subcommand():
    status, modules = _modules_after(["--help"])
    assert status == 0
    assert sorted(m for m in modules if m.startswith("wordspot.") and m != "wordspot.errors") == ["wordspot.cli"]
    assert not _loaded(modules, "numba") and not _loaded(modules, "scipy")
