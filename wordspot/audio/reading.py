"""Reading audio files into checked mono waveforms at the model's sample rate.

Everything that soundfile reads (WAV, FLAC, OGG, ...; 8-bit to 32-bit float) comes back
as float32 mono in [-1, 1]: channels are averaged, the rate is converted with the soxr
resampler (the one behind librosa's "soxr_hq"). Every problem a user can cause is an
:class:`~wordspot.errors.AudioError` naming the file; suspicious but usable audio
(digital silence, clipping) gives an :class:`~wordspot.errors.AudioWarning`.
"""

from __future__ import annotations

import os
import struct
import warnings
from pathlib import Path

import numpy as np
import soundfile
import soxr

from wordspot.errors import AudioError, AudioWarning
from wordspot.util.textfile import check_is_file

__all__ = ["MIN_DURATION", "open_audio", "load_audio", "audio_duration", "check_waveform", "short_reason"]

#: Shortest recording accepted, in seconds (a spoken command takes longer than this).
MIN_DURATION = 0.1

# A sample at or beyond this magnitude counts as clipped (full scale less half a 16-bit step).
_CLIP_LEVEL = 1.0 - 0.5 / 32768.0
# More than this fraction of clipped samples gives a warning.
_CLIP_FRACTION = 1e-3
# A recording whose peak stays below one 16-bit step is digital silence.
_SILENCE_PEAK = 1.0 / 32768.0


def _as_path(path) -> Path:
    try:
        return Path(os.fspath(path))
    except TypeError:
        raise AudioError(
            f"audio path must be a file name, got {type(path).__name__} {path!r}"
        ) from None


def _check_exists(path: Path) -> None:
    check_is_file(path, error=AudioError,
                  not_found="audio file not found; check the path (and the manifest that names it)",
                  is_folder="is a folder, not an audio file; name a .wav/.flac/.ogg file")


def _open_header(path: Path, opener=soundfile.info):
    """``opener(path)`` (``soundfile.info`` or ``soundfile.SoundFile``) with a sample rate
    above zero; every failure is one AudioError naming the file."""
    try:
        opened = opener(str(path))
    except (RuntimeError, soundfile.SoundFileError, OSError, ValueError) as exc:
        raise AudioError(
            f"{path}: cannot read this audio file ({short_reason(exc)}); "
            "it may be damaged, truncated or in an unsupported format; re-export it as WAV or FLAC"
        ) from None
    if opened.samplerate <= 0:
        if hasattr(opened, "close"):
            opened.close()
        raise AudioError(f"{path}: header gives sample rate {opened.samplerate}; the file is damaged")
    return opened


def short_reason(exc: BaseException) -> str:
    """An exception's message on one line, at most 120 characters (for error messages)."""
    text = " ".join(str(exc).split())
    return text if len(text) <= 120 else text[:117] + "..."


def _wav_data_shortfall(path: Path) -> tuple[int, int] | None:
    """For a RIFF/WAVE file, return (bytes promised, bytes present) of the data chunk if short.

    libsndfile quietly reads what is there when a WAV file was cut off; the header still
    says how much should have followed, so we compare. Returns None when the file is not
    RIFF/WAVE, is complete, or carries a placeholder size (0 or 0xFFFFFFFF, as streaming
    writers leave it).
    """
    try:
        size = path.stat().st_size
        with open(path, "rb") as fh:
            head = fh.read(12)
            if len(head) < 12 or head[:4] != b"RIFF" or head[8:12] != b"WAVE":
                return None
            pos = 12
            while pos + 8 <= size:
                fh.seek(pos)
                chunk = fh.read(8)
                if len(chunk) < 8:
                    return None
                chunk_id, chunk_size = chunk[:4], struct.unpack("<I", chunk[4:])[0]
                if chunk_id == b"data":
                    if chunk_size in (0, 0xFFFFFFFF):
                        return None
                    present = size - (pos + 8)
                    return (chunk_size, present) if present < chunk_size else None
                pos += 8 + chunk_size + (chunk_size & 1)
    except OSError:
        return None
    return None


def open_audio(path) -> soundfile.SoundFile:
    """Open an audio file for reading after the checks every reader makes.

    The file must exist, have a readable header with a sample rate above zero and, for
    WAV files, hold every byte its header promises. Use it as a context manager.

    Raises
    ------
    AudioError
        Missing, unreadable or truncated file (the message names it).
    """
    p = _as_path(path)
    _check_exists(p)
    handle = _open_header(p, soundfile.SoundFile)
    # only RIFF/WAVE files can be cut short unnoticed (see _wav_data_shortfall)
    shortfall = _wav_data_shortfall(p) if str(handle.format).startswith("WAV") else None
    if shortfall is not None:
        handle.close()
        promised, present = shortfall
        raise AudioError(
            f"{p}: file is truncated (header promises {promised} bytes of samples, "
            f"only {max(present, 0)} are there); copy or record it again"
        )
    return handle


def check_waveform(wave: np.ndarray, *, source: str = "<array>") -> None:
    """Check a mono waveform's samples: finite, long enough; warn on silence and clipping.

    Parameters
    ----------
    wave : np.ndarray, shape (n,)
        Samples at ``sample_rate``.
    source : str
        Name used in messages (the file name).

    Raises
    ------
    AudioError
        No samples, NaN or infinite samples.
    """
    if wave.size == 0:
        raise AudioError(f"{source}: holds no samples; record the command again")
    if not np.all(np.isfinite(wave)):
        bad = int(np.count_nonzero(~np.isfinite(wave)))
        raise AudioError(
            f"{source}: {bad} sample(s) are NaN or infinite; the file is damaged, re-export it"
        )
    peak = float(np.max(np.abs(wave)))
    if peak < _SILENCE_PEAK:
        warnings.warn(
            f"{source}: is digital silence (every sample is zero); check the microphone",
            AudioWarning,
            stacklevel=3,
        )
        return
    clipped = np.count_nonzero(np.abs(wave) >= _CLIP_LEVEL)
    if clipped > _CLIP_FRACTION * wave.size:
        warnings.warn(
            f"{source}: {100.0 * clipped / wave.size:.1f}% of samples are clipped at full scale; "
            "record further from the microphone or lower the input gain",
            AudioWarning,
            stacklevel=3,
        )


def audio_duration(path) -> float:
    """Return a file's duration in seconds from its header (cheap: no samples are read).

    Raises
    ------
    AudioError
        The file is missing or unreadable.
    """
    p = _as_path(path)
    _check_exists(p)
    info = _open_header(p)
    return info.frames / float(info.samplerate)


def load_audio(path, *, sample_rate: int = 16000) -> np.ndarray:
    """Read an audio file as a float32 mono waveform at ``sample_rate``.

    Parameters
    ----------
    path : str or os.PathLike
        Any file soundfile reads (WAV, FLAC, OGG, ...), any sample format.
    sample_rate : int > 0
        Rate of the returned waveform (the model rate, 16000 or 8000).

    Returns
    -------
    np.ndarray, shape (n,), float32
        Samples in [-1, 1]; channels averaged; resampled with soxr (high quality).

    Raises
    ------
    AudioError
        Missing, unreadable, truncated or empty file; shorter than ``MIN_DURATION``;
        NaN or infinite samples.

    Warns
    -----
    AudioWarning
        Digital silence or clipping.
    """
    if isinstance(sample_rate, bool) or not isinstance(sample_rate, (int, np.integer)) or sample_rate <= 0:
        raise AudioError(f"sample_rate must be a positive whole number of Hz, got {sample_rate!r}")
    p = _as_path(path)
    with open_audio(p) as handle:  # one open for header and samples
        file_rate = handle.samplerate
        try:
            data = handle.read(dtype="float32", always_2d=True)
        except (RuntimeError, soundfile.SoundFileError, OSError, ValueError, MemoryError) as exc:
            raise AudioError(
                f"{p}: cannot read the samples ({short_reason(exc)}); the file may be damaged or truncated; "
                "re-export it as WAV or FLAC"
            ) from None
    if data.shape[0] == 0 or data.shape[1] == 0:
        raise AudioError(f"{p}: holds no samples; record the command again")
    wave = data.mean(axis=1, dtype=np.float64).astype(np.float32) if data.shape[1] > 1 else data[:, 0]
    duration = wave.shape[0] / float(file_rate)
    if duration < MIN_DURATION:
        raise AudioError(
            f"{p}: is only {duration * 1000:.0f} ms long; a recording must last at least "
            f"{MIN_DURATION * 1000:.0f} ms (record the whole command)"
        )
    check_waveform(wave, source=str(p))
    if file_rate != sample_rate:
        wave = _resample(wave, int(file_rate), int(sample_rate))
    wave = np.clip(np.asarray(wave, dtype=np.float32), -1.0, 1.0)
    return np.ascontiguousarray(wave)


def _resample(wave: np.ndarray, rate_in: int, rate_out: int) -> np.ndarray:
    """Convert the sample rate with the soxr resampler at high quality.

    This is the resampler librosa uses for ``res_type="soxr_hq"``; called directly because
    librosa's first resample call costs seconds of start-up.
    """
    return soxr.resample(np.ascontiguousarray(wave, dtype=np.float32), rate_in, rate_out, quality="HQ")
