"""Audio that arrives as bytes (an upload from the recording page) as a model-rate waveform.

Any format soundfile reads (the page sends 32-bit float WAV at the browser's rate); the
channels are averaged and the rate converted with soxr at high quality, the resampler and
setting :func:`wordspot.audio.reading.load_audio` uses for files.

An upload is judged by its header before a sample is decoded: a few kilobytes can declare
hours of sound (a WAV file at 1 Hz, a FLAC file of silence), and converting that to the
model rate would take gigabytes. :func:`check_audio_header` refuses a sample rate outside
8-192 kHz, more than :data:`MAX_CHANNELS` channels and more seconds than the caller allows;
:func:`decode_audio_bytes` applies it and then decodes at most the frames the header declared.
"""

from __future__ import annotations

import io
from dataclasses import dataclass

import numpy as np
import soundfile
import soxr

from wordspot.audio.reading import MIN_DURATION
from wordspot.errors import AudioError

__all__ = ["MIN_UPLOAD_RATE", "MAX_UPLOAD_RATE", "MAX_CHANNELS", "AudioHeader", "check_audio_header",
           "decode_audio_bytes"]

#: Lowest sample rate accepted in an upload (telephone audio).
MIN_UPLOAD_RATE = 8000
#: Highest sample rate accepted in an upload (the highest common audio interface rate).
MAX_UPLOAD_RATE = 192000
#: Most channels accepted in an upload (7.1 surround); the channels are averaged.
MAX_CHANNELS = 8

_READ_ERRORS = (RuntimeError, soundfile.SoundFileError, TypeError, ValueError)


@dataclass(frozen=True)
class AudioHeader:
    """What an upload's header declares."""

    sample_rate: int
    channels: int
    frames: int

    @property
    def seconds(self) -> float:
        return self.frames / self.sample_rate


def check_audio_header(data: bytes, *, max_seconds: float, source: str = "the upload") -> AudioHeader:
    """Read the header of audio file bytes and check it, decoding no samples.

    Raises
    ------
    AudioError
        Not audio soundfile can read, a sample rate outside 8-192 kHz, more than
        ``MAX_CHANNELS`` channels, or longer than ``max_seconds``.
    """
    try:
        info = soundfile.info(io.BytesIO(data))
    except _READ_ERRORS as exc:
        raise AudioError(f"{source} is not audio that can be read ({str(exc).splitlines()[0]}); "
                         "send a WAV, FLAC or OGG file") from None
    rate, channels, frames = int(info.samplerate), int(info.channels), int(info.frames)
    if not MIN_UPLOAD_RATE <= rate <= MAX_UPLOAD_RATE:
        raise AudioError(f"{source} declares a sample rate of {rate} Hz; only {MIN_UPLOAD_RATE // 1000}-"
                         f"{MAX_UPLOAD_RATE // 1000} kHz is accepted (the page records at the browser's rate)")
    if not 1 <= channels <= MAX_CHANNELS:
        raise AudioError(f"{source} declares {channels} channels; at most {MAX_CHANNELS} are accepted "
                         "(record in mono)")
    header = AudioHeader(rate, channels, max(frames, 0))
    if header.seconds > max_seconds:
        raise AudioError(f"{source} lasts {header.seconds:.1f} s; at most {max_seconds:g} s is accepted "
                         "(a take should last a few seconds)")
    return header


def decode_audio_bytes(data: bytes, sample_rate: int, *, source: str = "the upload",
                       max_seconds: float = 60.0) -> np.ndarray:
    """Decode audio file bytes to a float32 mono waveform at ``sample_rate``.

    The header is checked first (:func:`check_audio_header`), and no more frames than it
    declares are decoded. Silence and clipping are not warned about here: the caller judges
    a take with :func:`wordspot.audio.trim.check_take` and tells the person.

    Raises
    ------
    AudioError
        A header :func:`check_audio_header` refuses, no samples, shorter than
        ``MIN_DURATION``, or NaN / infinite samples.
    """
    header = check_audio_header(data, max_seconds=max_seconds, source=source)
    try:
        samples, rate = soundfile.read(io.BytesIO(data), frames=header.frames, dtype="float32", always_2d=True)
    except _READ_ERRORS as exc:
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
