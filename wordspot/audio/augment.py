"""Noise for multi-condition training: mixing at a chosen SNR, babble and steady noise.

A recognizer trained only on quiet recordings has never seen noise in its pause model,
so in a noisy kitchen it "hears" words in the noise. Multi-condition training adds noisy
copies of the training recordings. Everything here is generated in code from a seeded
``numpy.random.Generator`` and the training recordings themselves; no noise files are
needed.

- SNR = 10 log10(P_speech / P_noise), both mean powers taken over the same span (the
  speech part when it is known or estimated, else the whole signal) (common practice).
- Babble: several talker streams (speech parts of other recordings, different speakers
  when possible) summed at random offsets and gains.
- Steady noise, like an oven fan or a mixer motor: coloured broadband noise (spectrum
  flat to falling as 1/f^2, i.e. white to brown) through a gentle low-pass, a little hiss,
  and mains hum (50 or 60 Hz and a few harmonics) at a random level.
- Backgrounds with no speech at all, at a level in dBFS (RMS relative to a full-scale
  square wave, i.e. 0 dBFS is RMS 1; common practice for float audio in [-1, 1]): white
  noise, pink noise (power falling as 1/f, -3 dB per octave), mains hum (odd and even
  harmonics falling as 1/h), and digital silence with dither of one least significant
  bit of 16-bit audio (samples -1, 0 or +1 times 2^-15), and impacts (knocks, clinks,
  taps and scrapes at random times; :mod:`wordspot.audio.impacts`).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.fft
from scipy import signal

from wordspot.audio.impacts import impact_noise
from wordspot.errors import AugmentError

__all__ = [
    "NOISE_KINDS",
    "snr_range",
    "NoiseSettings",
    "mean_power",
    "measured_snr",
    "speech_span",
    "mix_at_snr",
    "fit_length",
    "talker_stream",
    "babble",
    "steady_noise",
    "LSB_16",
    "rms_dbfs",
    "at_dbfs",
    "pink_noise",
    "mains_hum",
    "dithered_silence",
    "background",
]

#: One least significant bit of 16-bit audio on the float scale [-1, 1).
LSB_16 = 1.0 / 32768.0

#: The noise kinds :class:`NoiseSettings` accepts.
NOISE_KINDS = ("babble", "steady")


@dataclass(frozen=True)
class NoiseSettings:
    """Noisy copies for multi-condition training.

    Parameters
    ----------
    copies : int >= 0
        Noisy copies of every training recording (0: train on the clean ones only).
    snr_db : (float, float)
        Each copy's SNR is drawn uniformly from this range (dB, low <= high).
    kinds : tuple of str
        Noise kinds (see :data:`NOISE_KINDS`); each copy draws one entry with equal chance,
        so a kind listed twice comes twice as often. The default draws babble two times in
        three: on held-out voices that cut 10 dB errors from 23.6% to 20.4%
        (docs/experiments/2026-12-02-training-recipe.md).
    talkers : (int, int)
        Babble is made of this many talker streams (drawn uniformly, inclusive).
    """

    copies: int = 0
    snr_db: tuple[float, float] = (0.0, 25.0)
    kinds: tuple[str, ...] = ("babble", "babble", "steady")
    talkers: tuple[int, int] = (3, 6)

    def __post_init__(self) -> None:
        if isinstance(self.copies, bool) or not isinstance(self.copies, (int, np.integer)) or self.copies < 0:
            raise AugmentError(f"noise copies must be a whole number >= 0 (2 is usual), got {self.copies!r}")
        lo, hi = _pair(self.snr_db, "snr_db")
        if not (np.isfinite(lo) and np.isfinite(hi) and lo <= hi):
            raise AugmentError(f"snr_db must be a finite range low <= high in dB (e.g. 0 25), got {self.snr_db!r}")
        kinds = tuple(self.kinds)
        bad = [k for k in kinds if k not in NOISE_KINDS]
        if not kinds or bad:
            raise AugmentError(f"noise kinds must be some of {', '.join(NOISE_KINDS)}, got {self.kinds!r}")
        t0, t1 = _pair(self.talkers, "talkers")
        if not (t0 == int(t0) and t1 == int(t1) and 1 <= t0 <= t1):
            raise AugmentError(f"talkers must be whole numbers 1 <= low <= high (e.g. 3 6), got {self.talkers!r}")


def _pair(value, name: str) -> tuple[float, float]:
    try:
        lo, hi = (float(v) for v in value)
    except (TypeError, ValueError):
        raise AugmentError(f"{name} must be two numbers (low, high), got {value!r}") from None
    return lo, hi


def _wave(x, name: str) -> np.ndarray:
    arr = np.asarray(x, dtype=np.float64)
    if arr.ndim != 1 or arr.shape[0] == 0:
        raise AugmentError(f"{name} must be a non-empty one-dimensional waveform, got shape {arr.shape}")
    return arr


def mean_power(wave, span: tuple[int, int] | None = None) -> float:
    """Mean of the squared samples over ``span`` (sample indices [start, end)) or all."""
    x = _wave(wave, "wave")
    a, b = (0, x.shape[0]) if span is None else span
    if not (0 <= a < b <= x.shape[0]):
        raise AugmentError(f"span must satisfy 0 <= start < end <= {x.shape[0]}, got {span!r}")
    seg = x[a:b]
    return float(np.dot(seg, seg) / seg.shape[0])


def measured_snr(speech, noise, span: tuple[int, int] | None = None) -> float:
    """SNR in dB, 10 log10(P_speech / P_noise), powers over the same span."""
    return 10.0 * np.log10(mean_power(speech, span) / mean_power(noise, span))


def speech_span(wave, sample_rate: int, *, below_peak_db: float = 35.0) -> tuple[int, int]:
    """Estimate where the speech is: from the first to the last 10 ms frame whose power
    is within ``below_peak_db`` of the loudest frame.

    Returns
    -------
    (int, int)
        Sample indices [start, end); the whole signal if it is shorter than a frame.
    """
    x = _wave(wave, "wave")
    hop = max(1, int(round(0.010 * sample_rate)))
    n = x.shape[0] // hop
    if n < 1:
        return 0, x.shape[0]
    power = (x[: n * hop].reshape(n, hop) ** 2).mean(axis=1)
    peak = power.max()
    if peak <= 0:
        return 0, x.shape[0]
    loud = np.flatnonzero(power >= peak * 10.0 ** (-below_peak_db / 10.0))
    return int(loud[0] * hop), int(min(x.shape[0], (loud[-1] + 1) * hop))


def snr_range(value) -> tuple[float, float] | None:
    """``(low, high)`` in dB from a pair of numbers, or None unless both are finite and low <= high."""
    try:
        lo, hi = (float(x) for x in value)
    except (TypeError, ValueError):
        return None
    return (lo, hi) if np.isfinite(lo) and np.isfinite(hi) and lo <= hi else None


def mix_at_snr(speech, noise, snr_db: float, *, span: tuple[int, int] | None = None) -> np.ndarray:
    """Add ``noise`` scaled so that the SNR over ``span`` is exactly ``snr_db``.

    Parameters
    ----------
    speech, noise : ndarray, shape (n,)
        Same length (see :func:`fit_length`).
    snr_db : float
    span : (int, int), optional
        Where to measure both powers (the speech part); default the whole signal.

    Returns
    -------
    ndarray, shape (n,), float32
    """
    s = _wave(speech, "speech")
    v = _wave(noise, "noise")
    if v.shape != s.shape:
        raise AugmentError(f"noise has {v.shape[0]} samples but speech has {s.shape[0]}; use fit_length")
    if not np.isfinite(snr_db):
        raise AugmentError(f"snr_db must be a finite number, got {snr_db!r}")
    ps, pn = mean_power(s, span), mean_power(v, span)
    if ps <= 0 or pn <= 0:
        raise AugmentError("speech and noise must both have power above zero over the span "
                           f"(got {ps:.3g} and {pn:.3g}); the SNR is undefined")
    gain = np.sqrt(ps / (pn * 10.0 ** (snr_db / 10.0)))
    return (s + gain * v).astype(np.float32)


def fit_length(noise, length: int, rng: np.random.Generator) -> np.ndarray:
    """Noise of exactly ``length`` samples: a random stretch of it, looped if too short."""
    v = _wave(noise, "noise")
    start = int(rng.integers(v.shape[0]))
    reps = -(-(start + length) // v.shape[0])
    return np.tile(v, reps)[start:start + length]


def talker_stream(waves, spans=None) -> np.ndarray:
    """One talker's running speech: the speech parts of ``waves`` back to back."""
    waves = list(waves)
    if not waves:
        raise AugmentError("a talker stream needs at least one recording")
    spans = [None] * len(waves) if spans is None else list(spans)
    parts = []
    for w, sp in zip(waves, spans):
        x = _wave(w, "wave")
        parts.append(x if sp is None else x[sp[0]:sp[1]])
    return np.concatenate(parts)


def babble(streams, length: int, rng: np.random.Generator, *, gain_db: float = 6.0) -> np.ndarray:
    """Babble: talker streams, each scaled to unit power, placed at a random offset
    (looped), given a random gain in [-gain_db / 2, gain_db / 2] dB, and summed.

    Parameters
    ----------
    streams : sequence of ndarray
        One waveform per talker (see :func:`talker_stream`).
    length : int > 0
    rng : numpy.random.Generator

    Returns
    -------
    ndarray, shape (length,)
    """
    streams = list(streams)
    if not streams:
        raise AugmentError("babble needs at least one talker stream")
    out = np.zeros(length)
    for s in streams:
        p = mean_power(s)
        if p <= 0:
            continue
        g = 10.0 ** (rng.uniform(-gain_db / 2, gain_db / 2) / 20.0) / np.sqrt(p)
        out += g * fit_length(s, length, rng)
    return out


def steady_noise(length: int, rng: np.random.Generator, *, sample_rate: int = 16000) -> np.ndarray:
    """Steady machine noise (fan, motor) of unit mean power.

    Coloured broadband noise with power spectrum ~ 1/f^a, a uniform in [0, 2] (white to
    brown, flat below 50 Hz), through a 1st- or 2nd-order Butterworth low-pass at
    300-3000 Hz (log-uniform), plus hiss 25-40 dB below it, plus mains hum at 50 or 60 Hz
    with 2-5 harmonics (amplitudes falling, random phases) at -15 to +5 dB relative to
    the broadband part.

    Returns
    -------
    ndarray, shape (length,)
    """
    if length < 1:
        raise AugmentError(f"length must be at least one sample, got {length}")
    # shaped in the frequency domain at a length with only small prime factors (an FFT of
    # an arbitrary length can be tens of times slower), then cut to the wanted length
    n_fft = scipy.fft.next_fast_len(length, real=True)
    white = rng.standard_normal(n_fft)
    slope = rng.uniform(0.0, 2.0)
    freqs = np.fft.rfftfreq(n_fft, 1.0 / sample_rate)
    shape = np.maximum(freqs, 50.0) ** (-slope / 2.0)
    coloured = np.fft.irfft(np.fft.rfft(white) * shape, n=n_fft)[:length]
    cutoff = float(np.exp(rng.uniform(np.log(300.0), np.log(3000.0))))
    sos = signal.butter(int(rng.integers(1, 3)), cutoff, btype="low", fs=sample_rate, output="sos")
    broad = signal.sosfilt(sos, coloured)
    broad /= np.sqrt(np.mean(broad**2)) + 1e-30
    hiss = rng.standard_normal(length) * 10.0 ** (-rng.uniform(25.0, 40.0) / 20.0)
    mains = 50.0 if rng.random() < 0.5 else 60.0
    t = np.arange(length) / sample_rate
    hum = np.zeros(length)
    for h in range(1, int(rng.integers(2, 6)) + 1):
        if h * mains < sample_rate / 2:
            hum += np.sin(2 * np.pi * h * mains * t + rng.uniform(0, 2 * np.pi)) / h
    hum *= 10.0 ** (rng.uniform(-15.0, 5.0) / 20.0) / np.sqrt(np.mean(hum**2))
    out = broad + hiss + hum
    return out / np.sqrt(np.mean(out**2))


def rms_dbfs(wave) -> float:
    """RMS level in dBFS: 20 log10(sqrt(mean(x^2))) (-inf for digital silence)."""
    p = mean_power(wave)
    return float(10.0 * np.log10(p)) if p > 0 else float("-inf")


def at_dbfs(wave, dbfs: float) -> np.ndarray:
    """``wave`` scaled to an RMS level of ``dbfs`` (float64)."""
    x = _wave(wave, "wave")
    p = mean_power(x)
    if p <= 0:
        raise AugmentError("a wave of digital silence cannot be scaled to a level")
    return x * (10.0 ** (dbfs / 20.0) / np.sqrt(p))


def pink_noise(length: int, rng: np.random.Generator, *, sample_rate: int = 16000) -> np.ndarray:
    """Pink noise (power spectrum ~ 1/f above 20 Hz, flat below), unit mean power.

    White Gaussian noise shaped in the frequency domain, at a fast FFT length cut to
    ``length``.
    """
    if length < 1:
        raise AugmentError(f"length must be at least one sample, got {length}")
    n_fft = scipy.fft.next_fast_len(length, real=True)
    spec = np.fft.rfft(rng.standard_normal(n_fft))
    freqs = np.fft.rfftfreq(n_fft, 1.0 / sample_rate)
    spec *= np.maximum(freqs, 20.0) ** -0.5
    spec[0] = 0.0
    x = np.fft.irfft(spec, n=n_fft)[:length]
    return x / (np.sqrt(np.mean(x**2)) + 1e-30)


def mains_hum(length: int, rng: np.random.Generator, *, sample_rate: int = 16000, mains: float = 50.0,
              harmonics: int = 7) -> np.ndarray:
    """Mains hum of unit mean power: ``mains`` Hz and its multiples up to ``harmonics``
    (below Nyquist), amplitude 1/h, random phases."""
    if length < 1:
        raise AugmentError(f"length must be at least one sample, got {length}")
    t = np.arange(length) / sample_rate
    x = np.zeros(length)
    for h in range(1, harmonics + 1):
        if h * mains < sample_rate / 2:
            x += np.sin(2 * np.pi * h * mains * t + rng.uniform(0, 2 * np.pi)) / h
    return x / (np.sqrt(np.mean(x**2)) + 1e-30)


def dithered_silence(length: int, rng: np.random.Generator) -> np.ndarray:
    """Digital silence with dither: each sample -1, 0 or +1 LSB of 16-bit audio, equally likely."""
    if length < 1:
        raise AugmentError(f"length must be at least one sample, got {length}")
    return rng.integers(-1, 2, size=length) * LSB_16


def background(kind: str, length: int, dbfs: float, rng: np.random.Generator, *,
               sample_rate: int = 16000, mains: float = 50.0, streams=()) -> np.ndarray:
    """``length`` samples of one background at ``dbfs`` RMS.

    ``kind``: "white", "pink", "hum" (``mains`` Hz), "fan" (:func:`steady_noise`),
    "babble" (of ``streams``, see :func:`babble`), "impacts" (knocks, clinks, taps, scrapes:
    :func:`wordspot.audio.impacts.impact_noise`) or "dither" (:func:`dithered_silence`,
    whose level is fixed by its one LSB, so ``dbfs`` is ignored).
    """
    if kind == "dither":
        return dithered_silence(length, rng)
    if kind == "white":
        x = rng.standard_normal(length)
    elif kind == "pink":
        x = pink_noise(length, rng, sample_rate=sample_rate)
    elif kind == "hum":
        x = mains_hum(length, rng, sample_rate=sample_rate, mains=mains)
    elif kind == "fan":
        x = steady_noise(length, rng, sample_rate=sample_rate)
    elif kind == "babble":
        x = babble(streams, length, rng)
    elif kind == "impacts":
        x = impact_noise(length, rng, sample_rate=sample_rate)
    else:
        raise AugmentError(f"unknown background kind {kind!r}: use white, pink, hum, fan, babble, impacts or dither")
    return at_dbfs(x, dbfs)
