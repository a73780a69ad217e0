"""A small trained model and a spoken sequence of commands, for the page's Listen tests.

:func:`train_small_model` adapts the shipped starter model to the demo's training takes of
four bakery words by five voices (no sound scorer tuning, no background items: a few
seconds), and writes it where the recording page looks for it (``words.model`` in the
takes folder). :func:`said_commands` glues demo recordings of those words with quiet
between them, at any rate, by a voice the model was adapted to but in takes it was not
adapted on: a person listened to by a model trained on their own earlier takes, which is
how wordspot is meant to be used (the default adaptation follows its speakers closely, so
a voice it never heard is recognised less surely). The words and the times they are said
come from the demo manifest (``speech_start`` / ``speech_end``).
"""

from __future__ import annotations

import csv
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import soundfile as sf
import soxr

REPO = Path(__file__).resolve().parents[1]
RECORDINGS = REPO / "recordings"

#: The words of the small model.
WORDS = ("oven", "start", "stop", "timer")
#: The voices whose training takes the model is adapted to.
TRAIN_VOICES = ("flite-slt", "festival-slt", "espeak-en-us-f1", "espeak-en-gb-f3")
#: The voice of the commands said to it (a dev voice of the demo): the model is adapted to
#: its takes other than :data:`SAID_TAKE`, which are the ones said to it.
SAID_VOICE = "flite-awb"
SAID_TAKE = 1


@dataclass(frozen=True)
class Said:
    """A command in a glued recording: its words and where they are said (seconds)."""

    words: tuple[str, ...]
    start: float
    end: float


def _rows(manifest: str):
    with open(RECORDINGS / manifest, newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


def small_lexicon(path: Path) -> Path:
    """The bakery lexicon's lines for :data:`WORDS`, written to ``path``."""
    lines = (REPO / "lexicon" / "bakery.txt").read_text(encoding="utf-8").splitlines()
    path.write_text("".join(line + "\n" for line in lines if line.split(" ", 1)[0] in WORDS), encoding="utf-8")
    return path


def train_small_model(folder: Path) -> Path:
    """Adapt the starter to the demo takes of :data:`WORDS`; return ``folder/words.model``."""
    from wordspot import api
    from wordspot.training.adapt import AdaptationConfig

    folder.mkdir(parents=True, exist_ok=True)
    manifest = folder / "model-takes.csv"
    with open(manifest, "w", newline="", encoding="utf-8") as fh:
        out = csv.writer(fh)
        out.writerow(["path", "transcript", "speaker"])
        for r in _rows("train.csv"):
            if r["transcript"] in WORDS and (r["speaker"] in TRAIN_VOICES or (
                    r["speaker"] == SAID_VOICE and not r["path"].endswith(f"-t{SAID_TAKE}.flac"))):
                out.writerow([str(RECORDINGS / r["path"]), r["transcript"], r["speaker"]])
    model = folder / "words.model"
    api.train(manifest, small_lexicon(folder / "model-words.txt"), out=model, start="starter",
              config=AdaptationConfig(scorer=None, background_share=0.0))
    return model


def said_commands(words, *, rate: int, pause: float = 1.5, take: int = SAID_TAKE, level: float = 0.0):
    """``(samples, [Said])``: the demo takes of ``words`` by :data:`SAID_VOICE`, ``pause``
    seconds of quiet before, between and after them, at ``rate`` (float32, mono).

    ``level`` adds steady noise (dBFS) under everything, so the quiet is not digital silence.
    """
    rows = {r["transcript"]: r for r in _rows("train.csv")
            if r["speaker"] == SAID_VOICE and r["path"].endswith(f"-t{take}.flac")}
    quiet = np.zeros(int(pause * rate), dtype=np.float32)
    pieces, said, at = [quiet], [], quiet.size
    for w in words:
        r = rows[w]
        wave, file_rate = sf.read(RECORDINGS / r["path"], dtype="float32", always_2d=True)
        wave = wave.mean(axis=1)
        if file_rate != rate:
            wave = soxr.resample(wave, file_rate, rate).astype(np.float32)
        said.append(Said(tuple(r["transcript"].split()), at / rate + float(r["speech_start"]),
                         at / rate + float(r["speech_end"])))
        pieces += [wave, quiet]
        at += wave.size + quiet.size
    samples = np.concatenate(pieces)
    if level:
        noise = np.random.default_rng(20261202).normal(size=samples.size) * 10 ** (level / 20)
        samples = (samples + noise).astype(np.float32)
    return samples, said


def fake_microphone_commands(target: Path, words, *, rate: int = 48000, pause: float = 1.5) -> tuple[Path, list]:
    """A 16-bit WAV of :func:`said_commands` for Chromium's fake microphone; its labels."""
    samples, said = said_commands(words, rate=rate, pause=pause, level=-60.0)
    sf.write(target, samples, rate, subtype="PCM_16")
    return target, said
