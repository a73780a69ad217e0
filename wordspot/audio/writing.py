"""Writing a waveform as a 16-bit PCM WAV file, atomically.

Samples in [-1, 1] become whole numbers ``round(x * 32767)`` (values beyond full scale
are clipped first), written with the standard library's :mod:`wave` module to a
temporary file that is then renamed (:mod:`wordspot.util.atomic`).
"""

from __future__ import annotations

import io
import wave as wavelib

import numpy as np

from wordspot.errors import AudioError
from wordspot.util.atomic import write_bytes_atomically

__all__ = ["to_pcm16", "wav_bytes", "write_wav"]

_FULL_SCALE = 32767


def to_pcm16(wave: np.ndarray) -> np.ndarray:
    """Float samples in [-1, 1] as int16 (``round(x * 32767)``, clipped to full scale)."""
    x = np.asarray(wave, dtype=np.float64)
    if x.ndim != 1:
        raise AudioError(f"a take must be one channel (a 1-D array), got shape {x.shape}")
    if not np.all(np.isfinite(x)):
        raise AudioError("the samples hold NaN or infinite values; record the take again")
    return np.round(np.clip(x, -1.0, 1.0) * _FULL_SCALE).astype("<i2")


def wav_bytes(wave: np.ndarray, sample_rate: int) -> bytes:
    """The bytes of a mono 16-bit PCM WAV file holding ``wave`` at ``sample_rate`` Hz."""
    if isinstance(sample_rate, bool) or not isinstance(sample_rate, (int, np.integer)) or sample_rate <= 0:
        raise AudioError(f"sample_rate must be a positive whole number of Hz, got {sample_rate!r}")
    pcm = to_pcm16(wave)
    buffer = io.BytesIO()
    with wavelib.open(buffer, "wb") as out:
        out.setnchannels(1)
        out.setsampwidth(2)
        out.setframerate(int(sample_rate))
        out.writeframes(pcm.tobytes())
    return buffer.getvalue()


def write_wav(path, wave: np.ndarray, sample_rate: int):
    """Write ``wave`` to ``path`` as 16-bit PCM WAV; the file appears whole or not at all.

    Raises
    ------
    AudioError
        Bad samples or rate, or the folder cannot be written.
    """
    data = wav_bytes(wave, sample_rate)
    try:
        return write_bytes_atomically(path, data)
    except OSError as exc:
        raise AudioError(f"{path}: cannot write the recording ({exc.strerror or exc}); "
                         "check that the folder exists and is writable") from None
