#!/usr/bin/env python3
"""Real phrases by the dev voices: multi-word bakery commands synthesised on the fly.

The dev sets of ``tune_filler.py`` hold the dev voices' single commands and stand-ins made
by joining them; real phrases are quicker and coarticulated, which the stand-ins are not.
This module synthesises ``n`` phrases (2-4 words, the demo generator's phrase list drawn
with another seed than the test set's: its fixed everyday commands and other numbers) with the dev voices (``dev_candidate`` in
``recordings/voices.csv``: voices of the training split, never a test voice), through the
demo generator (``recordings/synthesize.py``: the same engines, random rate and pitch,
trimming, levels and room tone), in memory, nothing written to the checkout. It needs the
text-to-speech engines (espeak-ng, flite, festival, sox); without them it returns nothing.

    python tests/benchmarks/dev_phrases.py   # prints how many it made and how long they are
"""

from __future__ import annotations

import shutil
import sys
import tempfile
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
REPO = HERE.parents[1]

#: Seed of the dev phrases (the test set's phrase list uses the demo generator's own seed).
DEV_PHRASE_SEED = 20261202


_ENGINES = ("espeak-ng", "flite", "festival", "sox")


def demo_generator(what: str):
    """The demo generator module (``recordings/synthesize.py``), or None (with a note naming
    ``what`` is missing) when a text-to-speech engine is not installed."""
    if not all(shutil.which(p) for p in _ENGINES):
        print(f"note: text-to-speech engines missing (see recordings/README.md); no {what}")
        return None
    sys.path.insert(0, str(REPO / "recordings"))
    import synthesize

    return synthesize


def said_by_dev_voices(demo, folder: str, texts, file_name, seed: int) -> list[np.ndarray]:
    """Each of ``texts`` said by the dev voices in turn, as 16 kHz float32 waveforms.

    ``file_name(i, text)`` names take ``i`` within ``folder`` (the name seeds its rate,
    pitch and room tone through the generator's ``draw_for``).
    """
    voices = [v for v in demo.VOICES if v.dev_candidate]
    assert voices and all(v.split == "train" for v in voices)
    takes = [demo.Take(folder, voices[i % len(voices)], text, 1,
                       f"{folder}/{voices[i % len(voices)].voice_id}/{file_name(i, text)}")
             for i, text in enumerate(texts)]
    with tempfile.TemporaryDirectory(prefix=f"wordspot-{folder}-") as tmp:
        raw = {t.rel_path: Path(tmp) / f"raw-{i:04d}.wav" for i, t in enumerate(takes)}
        demo.synthesize_raw([(t.voice, t.text, demo.draw_for(seed, t.rel_path), raw[t.rel_path]) for t in takes], 2)
        out = []
        for t in takes:
            _, q, _, _ = demo.finish_take(t, raw[t.rel_path], seed)
            out.append((q / 32768.0).astype(np.float32))
    return out


def dev_phrase_set(n: int = 90, seed: int = DEV_PHRASE_SEED) -> list[tuple[np.ndarray, list[str]]]:
    """``n`` (waveform at 16 kHz, words) pairs, or [] when an engine is missing."""
    demo = demo_generator("dev phrases")
    if demo is None:
        return []
    texts = demo.phrase_list(seed, n_phrases=n)  # the same commands can be said by other voices
    waves = said_by_dev_voices(demo, "dev-phrases", texts,
                               lambda i, text: f"p{i + 1:03d}-{demo.slug(text)}.flac", seed)
    return [(w, text.split()) for w, text in zip(waves, texts)]


if __name__ == "__main__":
    got = dev_phrase_set()
    secs = sum(len(w) for w, _ in got) / 16000
    print(f"{len(got)} dev phrases, {secs:.0f} s, {sum(len(ws) for _, ws in got)} words; first: {got[0][1] if got else None}")
