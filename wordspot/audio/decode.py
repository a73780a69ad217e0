"""Audio that arrives as bytes (an upload from the recording page) as a model-rate waveform.

Any format soundfile reads (the page sends 32-bit float WAV at the browser's rate); the
channels are averaged and the rate converted with soxr at high quality, the resampler and
setting :func:`wordspot.audio.reading.load_audio` uses for files.
"""

from __future__ import annotations

import io

import numpy as np
import soundfile
import soxr

from wordspot.audio.reading import MIN_DURATION
from wordspot.errors import AudioError

__all__ = ["decode_audio_bytes"]


def decode_audio_bytes(data: bytes, sample_rate: int, *, source: str = "the upload") -> np.ndarray:
    """Decode audio file bytes to a float32 mono waveform at ``sample_rate``.

    Silence and clipping are not warned about here: the caller judges a take with
    :func:`wordspot.audio.trim.check_take` and tells the person.

    Raises
    ------
    AudioError
        Not audio soundfile can read, no samples, shorter than ``MIN_DURATION``, or NaN /
        infinite samples.
    """
    try:
        samples, rate = soundfile.read(io.BytesIO(data), dtype="float32", always_2d=True)
    except (RuntimeError, soundfile.SoundFileError, TypeError, ValueError) as exc:
        raise AudioError(f"{source} is not audio that can be read ({str(exc).splitlines()[0]}); "
                         "send a WAV, FLAC or OGG file") from None
    if samples.size == 0:
        raise AudioError(f"{source} holds no samples; record again")
    wave = samples.mean(axis=1).astype(np.float32) if samples.shape[1] > 1 else samples[:, 0]
    if wave.size / rate < MIN_DURATION:
        raise AudioError(f"{source} is only {1000 * wave.size / rate:.0f} ms long; record at least "
                         f"{1000 * MIN_DURATION:.0f} ms")
    if not np.all(np.isfinite(wave)):
        raise AudioError(f"{source} holds NaN or infinite samples; record again")
    if rate != sample_rate:
        wave = soxr.resample(np.ascontiguousarray(wave), int(rate), int(sample_rate), quality="HQ")
    return np.clip(np.asarray(wave, dtype=np.float32), -1.0, 1.0)
