"""Long test recordings glued from demo recordings, with their time labels.

Used by tests/stream, tests/cli and the scan benchmark and tuning scripts. The recording is
a noise bed (Gaussian noise through a one-pole low-pass, so it is darker than white) at
``noise_dbfs``, with demo recordings added at random times (gaps drawn uniformly from
``gap``) and, if asked, short clatter bursts (``clatter`` per minute, 0.05-0.3 s of noise
15-25 dB above the bed) in the gaps. The labels come from the demo manifests'
``speech_start`` / ``speech_end`` columns. The file is written piece by piece, so an hour
takes no more memory than a minute.
"""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np
import soundfile as sf
from scipy.signal import lfilter

from wordspot.evaluation.time_labels import LabelledRecording, TimedCommand

REPO = Path(__file__).resolve().parents[1]
RECORDINGS = REPO / "recordings"
RATE = 16000

DEV_VOICES = ("flite-awb", "espeak-en-gb-m3", "espeak-en-gb-x-gbclan-f5")


def demo_items(manifest: str = "test.csv", voices=None):
    """``(path, words, speech_start, speech_end)`` of a demo manifest's rows (some voices)."""
    with open(RECORDINGS / manifest, newline="", encoding="utf-8") as f:
        rows = list(csv.DictReader(f))
    return [(RECORDINGS / r["path"], tuple(r["transcript"].split()), float(r["speech_start"]),
             float(r["speech_end"])) for r in rows if voices is None or r["speaker"] in voices]


class _Bed:
    """The noise bed, drawn piece by piece with the filter state carried on."""

    def __init__(self, rng, dbfs: float, pole: float = 0.9):
        self.rng, self.pole = rng, pole
        # one-pole low-pass of unit-variance noise has variance 1 / (1 - pole^2)
        self.scale = 10 ** (dbfs / 20) * np.sqrt(1 - pole**2)
        self.state = np.zeros(1)

    def take(self, n: int) -> np.ndarray:
        y, self.state = lfilter([1.0], [1.0, -self.pole], self.rng.normal(size=n), zi=self.state)
        return self.scale * y


def glue(out: Path, items, rng, *, minutes: float | None = None, gap=(2.0, 12.0), noise_dbfs: float = -50.0,
         clatter: float = 0.0, lead: float = 1.0) -> LabelledRecording:
    """Write a long 16 kHz WAV file at ``out``; return its labels.

    ``items`` are placed in order (cycled when ``minutes`` asks for more) until ``minutes``
    of audio are filled (or every item is used once when ``minutes`` is None).
    """
    bed = _Bed(rng, noise_dbfs)
    commands = []
    pos = 0
    limit = None if minutes is None else int(minutes * 60 * RATE)
    with sf.SoundFile(out, "w", samplerate=RATE, channels=1, subtype="PCM_16") as f:

        def write_gap(seconds):
            nonlocal pos
            n = int(seconds * RATE)
            if limit is not None:
                n = min(n, limit - pos)
            x = bed.take(n)
            for _ in range(rng.poisson(clatter * seconds / 60.0)):
                m = int(rng.uniform(0.05, 0.3) * RATE)
                if m < n:
                    at = int(rng.integers(0, n - m))
                    x[at:at + m] += 10 ** ((noise_dbfs + rng.uniform(15, 25)) / 20) * rng.normal(size=m)
            f.write(np.clip(x, -1, 1))
            pos += n

        write_gap(lead)
        i = 0
        while items and ((limit is None and i < len(items)) or (limit is not None and pos < limit)):
            path, words, s0, s1 = items[i % len(items)]
            speech, rate = sf.read(path, dtype="float64")
            assert rate == RATE
            if limit is not None and pos + speech.size > limit:
                break
            f.write(np.clip(speech + bed.take(speech.size), -1, 1))
            commands.append(TimedCommand(round(pos / RATE + s0, 3), round(pos / RATE + s1, 3), words))
            pos += speech.size
            i += 1
            write_gap(rng.uniform(*gap))
        if limit is not None and pos < limit:
            write_gap((limit - pos) / RATE)
    return LabelledRecording(Path(out), tuple(commands))
