"""Does a recording carry sound above the telephone band?

A model trained on wideband audio (16 kHz, sound up to 8 kHz) recognises almost nothing
in telephone-band audio (nothing above about 4 kHz), and nothing else would say why. So
recognition and training measure the share of a recording's power above
:data:`EDGE_HZ` and call the recording narrowband when it is below
:data:`NARROW_DB`.
"""

from __future__ import annotations

import warnings

import numpy as np

from wordspot.errors import TrainingWarning

__all__ = ["EDGE_HZ", "NARROW_DB", "high_band_db", "is_narrow_band", "narrow_band_note", "measure_band", "band_warning", "check_training_band"]

#: Lower edge of the band that telephone audio lacks (telephone speech is band-limited
#: to about 300-3400 Hz, ITU-T G.712; an 8 kHz recording can carry nothing above 4 kHz).
EDGE_HZ = 4000.0
#: Below this share of the power above ``EDGE_HZ`` (dB relative to 100 Hz-and-up power),
#: a recording counts as narrowband. 56 wideband demo recordings measured -10 to -38 dB;
#: their telephone-band copies (resampled to 8 kHz and back) -82 to -114 dB.
NARROW_DB = -50.0
_FRAME = 512
_WINDOW = np.hanning(_FRAME)


def high_band_db(wave: np.ndarray, sample_rate: int) -> float:
    """Power above :data:`EDGE_HZ` relative to all power above 100 Hz, in dB.

    Parameters
    ----------
    wave : ndarray, shape (n,)
    sample_rate : int > 0

    Returns
    -------
    float
        ``-inf`` for a silent recording or one sampled at 8 kHz or less.
    """
    if sample_rate <= 2 * EDGE_HZ or wave.size < _FRAME:
        return float("-inf")
    n = wave.size // _FRAME * _FRAME
    frames = np.asarray(wave[:n], dtype=np.float64).reshape(-1, _FRAME) * _WINDOW
    spectrum = np.fft.rfft(frames, axis=1)
    # |X|^2 as re^2 + im^2 (no square root and square again: the same power up to the last bit
    # or so, far below what the -50 dB line could tell)
    power = (spectrum.real ** 2 + spectrum.imag ** 2).sum(axis=0)
    freqs = np.fft.rfftfreq(_FRAME, 1.0 / sample_rate)
    total = power[freqs >= 100.0].sum()
    high = power[freqs >= EDGE_HZ].sum()
    if total <= 0:
        return float("-inf")
    return float(10.0 * np.log10(max(high, 1e-300) / total))


def is_narrow_band(wave: np.ndarray, sample_rate: int) -> bool:
    """True when ``wave`` carries (next to) nothing above :data:`EDGE_HZ` though its rate could.

    Silent recordings are not called narrowband.
    """
    db = high_band_db(wave, sample_rate)
    return sample_rate > 2 * EDGE_HZ and np.isfinite(db) and db < NARROW_DB


def narrow_band_note(n_narrow: int, n_total: int, sample_rate: int) -> str:
    """One line for people: how many recordings were narrowband, and what to do about it."""
    return (f"{n_narrow} of {n_total} recording(s) carry nothing above {EDGE_HZ / 1000:g} kHz "
            f"(telephone band) but the model is wideband ({sample_rate} Hz) and will recognise "
            "little in them: use --model starter-8k (or a model adapted from it), or train with "
            "--sample-rate 8000")


def measure_band(paths, sample_rate: int, *, most: int = 60) -> dict:
    """The band of a set of recordings, from up to ``most`` of them spread over the list.

    Returns
    -------
    dict
        ``{"high_band_db": median share in dB (None when not measurable), "narrow": bool,
        "measured": files measured}``, plain data for a model file's info.
    """
    from wordspot.audio.reading import load_audio
    from wordspot.errors import WordspotError

    paths = list(paths)
    step = max(1, len(paths) // most)
    values = []
    for path in paths[::step][:most]:
        try:
            db = high_band_db(load_audio(path, sample_rate=sample_rate), sample_rate)
        except (WordspotError, OSError, ValueError, RuntimeError):
            continue
        if np.isfinite(db):
            values.append(db)
    if not values:
        return {"high_band_db": None, "narrow": False, "measured": 0}
    median = float(np.median(values))
    return {"high_band_db": round(median, 2), "narrow": bool(median < NARROW_DB), "measured": len(values)}


def band_warning(sample_rate: int) -> str:
    """The training warning for telephone-band recordings at a wideband rate."""
    return (f"the training recordings carry nothing above {EDGE_HZ / 1000:g} kHz (telephone band) but the "
            f"model rate is {sample_rate} Hz: train with --sample-rate 8000 (or adapt --start starter-8k), "
            "so that recognition matches the recordings")


def check_training_band(paths, sample_rate: int) -> dict:
    """:func:`measure_band` of training recordings, warning when they are narrowband at a wideband rate."""
    band = measure_band(paths, sample_rate)
    if band["narrow"]:
        warnings.warn(band_warning(sample_rate), TrainingWarning, stacklevel=3)
    return band
