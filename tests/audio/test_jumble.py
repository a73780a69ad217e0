"""Jumbled speech: pieces of a talker's recordings in random order, none a whole word."""

from __future__ import annotations

import numpy as np
import pytest

from wordspot.audio.jumble import JumbleSettings, jumbled_speech

RATE = 16000


def _tones(freqs, speech=0.6, lead=0.3):
    """Recordings of `lead` s of silence, then `speech` s of a pure tone, then silence."""
    out = []
    for f in freqs:
        t = np.arange(int(speech * RATE)) / RATE
        w = np.zeros(int((2 * lead + speech) * RATE), dtype=np.float32)
        w[int(lead * RATE):int(lead * RATE) + t.size] = 0.5 * np.sin(2 * np.pi * f * t)
        out.append(w)
    return out


def test_clips_hold_4_to_8_pieces_of_speech_between_room_tone():
    # Constructed recordings: 0.3 s of digital silence, a 0.6 s pure tone, 0.3 s of silence.
    # A clip is the silence before the first piece's tone (the room tone), 4-8 pieces of
    # 0.10-0.25 s, and that room tone again, so its non-zero samples add up to the pieces'
    # lengths (less the fades' first and last samples, which are exactly zero).
    waves = _tones([300.0, 500.0, 700.0, 900.0, 1100.0, 1300.0, 1500.0, 1700.0, 1900.0])
    clips = jumbled_speech(waves, RATE, 20, np.random.default_rng(5))
    assert len(clips) == 20 and all(c.dtype == np.float32 for c in clips)
    for clip in clips:
        tone = int(0.28 * RATE)  # 0.3 s of lead-in less the 20 ms kept before the speech
        assert np.all(clip[:tone] == 0) and np.all(clip[-tone:] == 0)
        speech = np.count_nonzero(clip) / RATE
        assert 4 * 0.10 - 0.01 <= speech <= 8 * 0.25


def test_each_piece_is_one_recording_at_most_half_its_speech():
    # One piece a clip (pieces=(1, 1)) makes every piece's source and length readable:
    # the tone's frequency is the peak of numpy's real FFT (1 Hz bins with n = RATE), and
    # the piece lies between the first and last non-zero sample.
    freqs = [400.0, 1000.0, 2500.0]
    waves = _tones(freqs, speech=0.3)
    clips = jumbled_speech(waves, RATE, 30, np.random.default_rng(2), JumbleSettings(pieces=(1, 1)))
    seen = set()
    for clip in clips:
        loud = np.flatnonzero(clip)
        piece = clip[loud[0] - 1:loud[-1] + 2]  # with the fades' zero end samples
        assert 0.10 * RATE <= piece.size <= 0.5 * 0.3 * RATE + 1  # at most half of the 0.3 s tone
        peak = int(np.argmax(np.abs(np.fft.rfft(piece, n=RATE))))
        source = min(freqs, key=lambda f: abs(f - peak))
        assert abs(peak - source) < 15
        seen.add(source)
        # linear 10 ms fades: the first 5 ms stay below half the tone's amplitude (0.5)
        assert np.max(np.abs(piece[:int(0.005 * RATE)])) <= 0.5 * 0.5 + 1e-6
    assert seen == set(freqs)


def test_same_seed_same_clips_and_too_little_speech_gives_none():
    waves = _tones([300.0, 600.0, 900.0, 1200.0])
    a = jumbled_speech(waves, RATE, 3, np.random.default_rng(9))
    b = jumbled_speech(waves, RATE, 3, np.random.default_rng(9))
    assert all(np.array_equal(x, y) for x, y in zip(a, b))
    assert jumbled_speech(waves[:1], RATE, 3, np.random.default_rng(9)) == []
    assert jumbled_speech([np.zeros(RATE, dtype=np.float32)] * 3, RATE, 3, np.random.default_rng(9)) == []
