"""A tiny synthetic training corpus for training tests: each phone is a tone.

Words are sequences of "phones"; each phone is a sine at its own frequency with a little
jitter and noise, words are framed by silence. Small enough to train in seconds.
"""

from contextlib import contextmanager
from pathlib import Path

import numpy as np
import soundfile as sf

TONES = {"AA": 300.0, "B": 700.0, "K": 1200.0, "IY": 2000.0, "S": 3500.0, "T": 5000.0}
WORDS = {"bake": ("B", "AA", "K"), "key": ("K", "IY"), "toss": ("T", "AA", "S"), "seat": ("S", "IY", "T")}
RATE = 16000


@contextmanager
def tones_scaled(factor: float):
    """Within the block every phone's tone is ``factor`` times higher (another "voice")."""
    saved = dict(TONES)
    try:
        for k in TONES:
            TONES[k] *= factor
        yield
    finally:
        TONES.update(saved)


def _phone(rng, freq, seconds):
    n = int(seconds * RATE)
    t = np.arange(n) / RATE
    return 0.3 * np.sin(2 * np.pi * freq * (1 + 0.03 * rng.normal()) * t)


def make_corpus(folder: Path, rng, n_utterances: int = 24, max_words: int = 2):
    """Write WAV files, ``train.csv`` and ``pronunciations.txt`` into ``folder``.

    Returns
    -------
    manifest : Path
    lexicon : Path
    """
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    rows = ["path,transcript,speaker"]
    names = sorted(WORDS)
    for i in range(n_utterances):
        words = [names[j] for j in rng.integers(0, len(names), size=int(rng.integers(1, max_words + 1)))]
        parts = [np.zeros(int(0.25 * RATE))]
        for w in words:
            parts += [_phone(rng, TONES[p], rng.uniform(0.06, 0.12)) for p in WORDS[w]]
            parts.append(np.zeros(int(rng.uniform(0.0, 0.08) * RATE)))
        parts.append(np.zeros(int(0.25 * RATE)))
        x = np.concatenate(parts)
        x = x + 0.003 * rng.normal(size=x.size)
        sf.write(folder / f"u{i:02d}.wav", x.astype(np.float32), RATE)
        rows.append(f"u{i:02d}.wav,{' '.join(words)},s{i % 3}")
    manifest = folder / "train.csv"
    manifest.write_text("\n".join(rows) + "\n")
    lexicon = folder / "pronunciations.txt"
    lexicon.write_text("".join(f"{w} {' '.join(p)}\n" for w, p in WORDS.items()))
    return manifest, lexicon


def add_row(manifest: Path, name: str, wave: np.ndarray, words: str):
    """Write ``wave`` as ``name`` beside the manifest and list it there."""
    sf.write(manifest.parent / name, wave.astype(np.float32), RATE)
    with open(manifest, "a") as f:
        f.write(f"{name},{words},extra\n")


def load_corpus(folder: Path, rng, n_utterances: int):
    """Write a corpus with :func:`make_corpus` and read it back.

    Returns
    -------
    utterances : list of wordspot.corpus.Utterance
    lexicon : wordspot.language.lexicon.Lexicon
    units : wordspot.acoustic.units.UnitSet
        The default unit set of the lexicon's phones.
    """
    from wordspot.corpus import read_manifest
    from wordspot.language.lexicon import read_lexicon
    from wordspot.acoustic.units import default_unit_set

    manifest, lexicon = make_corpus(folder, rng, n_utterances=n_utterances)
    lex = read_lexicon(lexicon)
    return read_manifest(manifest), lex, default_unit_set(sorted(lex.units_used()))
