"""Trimming the quiet ends of a recorded take, and the checks a take should pass.

Silence is found as librosa's ``effects.trim`` defines it: short-time mean power in
frames (centred, zero-padded), in decibels relative to the loudest frame; frames more
than ``threshold_db`` below it are quiet. The take keeps everything from the first loud
frame to the end of the last one, plus ``margin`` seconds on each side (the recognizer's
pause model needs a little quiet around a word).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from wordspot.errors import AudioError

__all__ = ["TrimSettings", "TakeCheck", "loud_frames", "speech_bounds", "check_take"]


@dataclass(frozen=True)
class TrimSettings:
    """How a take is trimmed and judged.

    Attributes
    ----------
    frame_seconds, hop_seconds : float
        Analysis frame and step (25 ms / 10 ms, the usual speech framing).
    threshold_db : float
        A frame is quiet when its power is this far below the loudest frame.
    margin : float
        Seconds of quiet kept before and after the speech.
    clip_level : float
        A sample at or above this magnitude counts as clipped (one step below full scale
        in 16-bit audio).
    clip_fraction : float
        Share of clipped samples above which the take is flagged.
    quiet_peak_db : float
        A take whose peak is below this level (dB relative to full scale) is too quiet.
    min_speech : float
        Seconds of speech below which the take is too short.
    """

    frame_seconds: float = 0.025
    hop_seconds: float = 0.010
    threshold_db: float = 40.0
    margin: float = 0.25
    clip_level: float = 1.0 - 1.5 / 32768.0
    clip_fraction: float = 1e-3
    quiet_peak_db: float = -35.0
    min_speech: float = 0.15

    def __post_init__(self) -> None:
        for name in ("frame_seconds", "hop_seconds", "threshold_db"):
            if not getattr(self, name) > 0:
                raise AudioError(f"TrimSettings.{name} must be positive, got {getattr(self, name)!r}")
        if not self.margin >= 0:
            raise AudioError(f"TrimSettings.margin must be 0 or more seconds, got {self.margin!r}")


def loud_frames(wave: np.ndarray, frame_length: int, hop_length: int, threshold_db: float) -> np.ndarray:
    """Boolean per frame: power within ``threshold_db`` of the loudest frame.

    Frame ``k`` covers samples ``k * hop - frame_length // 2`` onward (zero padding at
    both ends), as librosa frames with ``center=True``.
    """
    x = np.asarray(wave, dtype=np.float64)
    half = frame_length // 2
    padded = np.pad(x, (half, half))
    frames = np.lib.stride_tricks.sliding_window_view(padded, frame_length)[::hop_length]
    power = np.mean(frames * frames, axis=1)
    floor = 1e-10  # the smallest power counted, as librosa's power_to_db amin
    db = 10.0 * np.log10(np.maximum(power, floor)) - 10.0 * np.log10(max(float(power.max()), floor))
    return db > -threshold_db


def speech_bounds(wave: np.ndarray, sample_rate: int, settings: TrimSettings | None = None,
                  *, margin: float | None = None) -> tuple[int, int]:
    """First and one-past-last sample of the speech, widened by the margin.

    Returns ``(0, 0)`` for an all-zero take.
    """
    s = settings or TrimSettings()
    x = np.asarray(wave, dtype=np.float64)
    if x.size == 0 or not np.any(x):
        return 0, 0
    frame = max(1, int(round(s.frame_seconds * sample_rate)))
    hop = max(1, int(round(s.hop_seconds * sample_rate)))
    loud = np.flatnonzero(loud_frames(x, frame, hop, s.threshold_db))
    start = int(loud[0]) * hop
    end = min(x.size, (int(loud[-1]) + 1) * hop)
    pad = int(round((s.margin if margin is None else margin) * sample_rate))
    return max(0, start - pad), min(x.size, end + pad)


@dataclass(frozen=True)
class TakeCheck:
    """What :func:`check_take` found.

    Attributes
    ----------
    start, end : int
        The kept part (samples), margin included.
    speech_seconds : float
        Length of the speech itself, margin excluded.
    peak_db : float
        Peak level, dB relative to full scale (-inf for silence).
    warnings : tuple of str
        Plain-language problems (empty when the take is fine).
    """

    start: int
    end: int
    speech_seconds: float
    peak_db: float
    warnings: tuple[str, ...]

    def to_dict(self, sample_rate: int) -> dict:
        """JSON-ready: times in seconds."""
        return {
            "start": self.start / sample_rate,
            "end": self.end / sample_rate,
            "speech_seconds": self.speech_seconds,
            "peak_db": None if not np.isfinite(self.peak_db) else round(float(self.peak_db), 1),
            "warnings": list(self.warnings),
        }


def check_take(wave: np.ndarray, sample_rate: int, settings: TrimSettings | None = None) -> TakeCheck:
    """Find the speech in a take and list what is wrong with it, in plain words.

    Checks: clipping (more than ``clip_fraction`` of samples at full scale), too quiet
    (peak below ``quiet_peak_db``), too short (less than ``min_speech`` of speech), and
    speech touching either end of the recording (the word may be cut off).
    """
    s = settings or TrimSettings()
    x = np.asarray(wave, dtype=np.float64)
    peak = float(np.max(np.abs(x))) if x.size else 0.0
    peak_db = 20.0 * np.log10(peak) if peak > 0 else -np.inf
    found: list[str] = []
    if peak == 0.0:
        return TakeCheck(0, 0, 0.0, peak_db, ("nothing was heard: the take is silent; check the microphone",))
    clipped = int(np.count_nonzero(np.abs(x) >= s.clip_level))
    if clipped > s.clip_fraction * x.size:
        found.append(f"too loud: {clipped} samples hit the top of the range (clipping); "
                     "step back or turn the microphone down")
    if peak_db < s.quiet_peak_db:
        found.append(f"too quiet: the loudest point is {peak_db:.0f} dB below full scale; "
                     "speak up or move closer to the microphone")
    bare_start, bare_end = speech_bounds(x, sample_rate, s, margin=0.0)
    speech = (bare_end - bare_start) / sample_rate
    if speech < s.min_speech:
        found.append(f"too short: only {speech:.2f} s of sound; say the whole word")
    elif bare_start == 0 or bare_end == x.size:
        found.append("the word may be cut off: start speaking after the recording starts "
                     "and stop it after you finish")
    start, end = speech_bounds(x, sample_rate, s)
    return TakeCheck(start, end, speech, peak_db, tuple(found))
