"""Impulsive kitchen sounds with no speech: knocks, clinks, taps and scrapes.

Steady backgrounds (fan, hum, noise) teach the pause model a floor that changes slowly;
a kitchen also has short loud events: a tin put down, a spoon against a bowl, a knife on
a board, a tray pushed along the counter. After the features' mean and variance
normalisation such an event in an otherwise quiet clip looks as strong as a syllable, so
the recognizer needs examples of them with no command. Our own recipe, made in code from a
seeded generator (no recordings):

- knock: one to three damped low resonances (80-500 Hz, time constant 8-40 ms) after a
  click of 1-3 ms of noise;
- clink: two to five inharmonic partials (1.5-7 kHz, below 0.45 of the sample rate) that
  ring for 40-250 ms, a glass or metal tool;
- tap: a burst of high-passed noise decaying in 0.5-3 ms;
- scrape: noise band-passed around 400-3000 Hz for 80-600 ms with a rough, flickering
  envelope.

Events come at random times (on average 1-6 a second, at least one a clip), each of a
kind drawn with equal chance, at a gain of 0 to -15 dB; the clip is scaled to unit mean
power (:func:`wordspot.audio.augment.background` sets its level).
"""

from __future__ import annotations

import numpy as np
from scipy import signal

from wordspot.errors import AugmentError

__all__ = ["IMPACT_KINDS", "impact_event", "impact_noise"]

#: The kinds of event, drawn with equal chance.
IMPACT_KINDS = ("knock", "clink", "tap", "scrape")


def _decay(n: int, tau: float, sample_rate: int) -> np.ndarray:
    return np.exp(-np.arange(n) / (tau * sample_rate))


def _knock(rng: np.random.Generator, sample_rate: int) -> np.ndarray:
    tau = rng.uniform(0.008, 0.040)
    n = int(5 * tau * sample_rate) + 1
    t = np.arange(n) / sample_rate
    x = np.zeros(n)
    for _ in range(int(rng.integers(1, 4))):
        f = float(np.exp(rng.uniform(np.log(80.0), np.log(500.0))))
        x += rng.uniform(0.3, 1.0) * np.sin(2 * np.pi * f * t + rng.uniform(0, 2 * np.pi))
    x *= _decay(n, tau, sample_rate)
    click = int(rng.uniform(0.001, 0.003) * sample_rate) + 1
    x[:click] += 0.5 * rng.standard_normal(min(click, n))[:n] * _decay(min(click, n), 0.001, sample_rate)
    return x


def _clink(rng: np.random.Generator, sample_rate: int) -> np.ndarray:
    tau = rng.uniform(0.040, 0.250)
    n = int(4 * tau * sample_rate) + 1
    t = np.arange(n) / sample_rate
    top = min(7000.0, 0.45 * sample_rate)
    x = np.zeros(n)
    for k in range(int(rng.integers(2, 6))):
        f = float(rng.uniform(min(1500.0, 0.5 * top), top))
        own = tau * rng.uniform(0.4, 1.0)  # higher partials may die sooner
        x += rng.uniform(0.2, 1.0) / (k + 1) * np.sin(2 * np.pi * f * t + rng.uniform(0, 2 * np.pi)) \
            * _decay(n, own, sample_rate)
    return x


def _tap(rng: np.random.Generator, sample_rate: int) -> np.ndarray:
    tau = rng.uniform(0.0005, 0.003)
    n = int(6 * tau * sample_rate) + 8
    x = rng.standard_normal(n) * _decay(n, tau, sample_rate)
    cut = min(rng.uniform(500.0, 2000.0), 0.4 * sample_rate)
    sos = signal.butter(2, cut, btype="high", fs=sample_rate, output="sos")
    return signal.sosfilt(sos, x)


def _scrape(rng: np.random.Generator, sample_rate: int) -> np.ndarray:
    n = int(rng.uniform(0.08, 0.6) * sample_rate)
    centre = float(np.exp(rng.uniform(np.log(400.0), np.log(3000.0))))
    half = 2.0 ** (rng.uniform(0.5, 1.5) / 2)  # half the bandwidth in octaves, as a factor
    lo, hi = centre / half, min(centre * half, 0.45 * sample_rate)
    sos = signal.butter(2, [lo, hi], btype="band", fs=sample_rate, output="sos")
    x = signal.sosfilt(sos, rng.standard_normal(n))
    # rough envelope: a smooth rise and fall times a flicker of 20-60 Hz
    rate = rng.uniform(20.0, 60.0)
    knots = max(2, int(n / sample_rate * rate) + 2)
    flicker = np.interp(np.arange(n), np.linspace(0, n - 1, knots), rng.uniform(0.2, 1.8, knots))
    return x * np.sin(np.pi * (np.arange(n) + 0.5) / n) * flicker


_MAKERS = {"knock": _knock, "clink": _clink, "tap": _tap, "scrape": _scrape}


def impact_event(kind: str, rng: np.random.Generator, *, sample_rate: int = 16000) -> np.ndarray:
    """One event of ``kind`` (:data:`IMPACT_KINDS`), peak 1."""
    x = _MAKERS[kind](rng, sample_rate)
    peak = np.max(np.abs(x))
    return x / peak if peak > 0 else x


def impact_noise(length: int, rng: np.random.Generator, *, sample_rate: int = 16000,
                 per_second=(1.0, 6.0)) -> np.ndarray:
    """``length`` samples of impacts at random times (module docstring), unit mean power.

    ``per_second``: the range of the clip's mean number of events a second (drawn uniformly);
    the count is Poisson with that mean, at least one.
    """
    if length < 1:
        raise AugmentError(f"length must be at least one sample, got {length}")
    rate = rng.uniform(*per_second)
    count = max(1, int(rng.poisson(rate * length / sample_rate)))
    out = np.zeros(length)
    for _ in range(count):
        kind = IMPACT_KINDS[int(rng.integers(len(IMPACT_KINDS)))]
        ev = impact_event(kind, rng, sample_rate=sample_rate) * 10.0 ** (-rng.uniform(0.0, 15.0) / 20.0)
        at = int(rng.integers(length))
        m = min(ev.shape[0], length - at)
        out[at:at + m] += ev[:m]
    p = np.sqrt(np.mean(out**2))
    return out / p if p > 0 else out
