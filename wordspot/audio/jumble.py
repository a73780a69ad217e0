"""Jumbled speech: a talker's own recordings cut into short pieces and joined in random order.

The confidence calibration needs words heard where no command was said, in the user's own
voice. Pieces of 100-250 ms hold one to three phones, never a whole command word (a piece
is at most half of its recording's speech), so a word the recognizer finds in a clip of
such pieces from different recordings is a false accept, much as a command word found in
other talk is: the phones are the talker's own, in an order that spells no command.

Each clip: the room tone before the first piece's recording's speech, then 4-8 pieces,
each from another recording, each faded in and out over 10 ms (linear) so the joins do not
click, then the same room tone again. Everything comes from a seeded
``numpy.random.Generator``; the same seed and recordings give the same clips.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np

from wordspot.audio.augment import speech_span

__all__ = ["JumbleSettings", "jumbled_speech"]


@dataclass(frozen=True)
class JumbleSettings:
    """How jumbled clips are cut and joined (defaults chosen on dev material).

    Evidence: docs/experiments/2026-12-02-per-phone-measures-and-jumbled-speech.md.

    Parameters
    ----------
    pieces : (int, int)
        Fewest and most pieces in a clip (each from another recording; fewer when there
        are fewer recordings).
    piece_seconds : (float, float)
        Range of a piece's length, drawn uniformly.
    max_share : float in (0, 1)
        A piece is at most this share of its recording's speech.
    fade_seconds : float
        Linear fade in and out of every piece (at most a quarter of the piece).
    tone_seconds : float
        Shortest room tone before and after the pieces (taken from the start of the first
        recording; up to 20 ms before its speech).
    """

    pieces: tuple[int, int] = (4, 8)
    piece_seconds: tuple[float, float] = (0.10, 0.25)
    max_share: float = 0.5
    fade_seconds: float = 0.010
    tone_seconds: float = 0.05


def jumbled_speech(waves: Sequence[np.ndarray], sample_rate: int, n: int, rng: np.random.Generator,
                   settings: JumbleSettings = JumbleSettings()) -> list[np.ndarray]:
    """``n`` clips of jumbled speech (float32) from ``waves`` (one talker's recordings).

    Returns an empty list when fewer than two recordings hold any speech.
    """
    usable = []
    for w in waves:
        w = np.asarray(w, dtype=np.float32)
        a, b = speech_span(w, sample_rate)
        if b - a >= int(0.04 * sample_rate) and np.any(w[a:b]):  # digital silence holds no speech
            usable.append((w, a, b))
    if len(usable) < 2 or n <= 0:
        return []
    low, high = settings.pieces
    lead = int(0.02 * sample_rate)
    clips = []
    for _ in range(n):
        k = min(int(rng.integers(low, high + 1)), len(usable))
        picks = rng.choice(len(usable), size=k, replace=False)
        first, a0, _ = usable[picks[0]]
        tone = first[:max(a0 - lead, int(settings.tone_seconds * sample_rate))]
        parts = [tone]
        for j in picks:
            w, a, b = usable[j]
            length = min(int(rng.uniform(*settings.piece_seconds) * sample_rate), int((b - a) * settings.max_share))
            start = int(rng.integers(a, b - length + 1))
            piece = w[start:start + length].copy()
            fade = min(int(settings.fade_seconds * sample_rate), length // 4)
            if fade > 0:
                ramp = np.linspace(0.0, 1.0, fade, dtype=np.float32)
                piece[:fade] *= ramp
                piece[-fade:] *= ramp[::-1]
            parts.append(piece)
        parts.append(tone)
        clips.append(np.concatenate(parts).astype(np.float32))
    return clips
