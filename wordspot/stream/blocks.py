"""Reading an audio file of any length in blocks, at the model's sample rate.

Every block is mono float32 in [-1, 1] (channels averaged, as
:func:`wordspot.audio.reading.load_audio` does). A file at another rate goes through
soxr's streaming resampler at high quality, which gives the same samples as resampling
the whole file at once (soxr keeps its filter state between chunks and flushes it at the
end). Only one block of the file is in memory at a time.
"""

from __future__ import annotations

import os

import numpy as np
import soundfile
import soxr

from wordspot.audio.reading import open_audio, short_reason
from wordspot.errors import AudioError

__all__ = ["BlockReader"]


class BlockReader:
    """The blocks of one audio file, opened (and checked) on creation.

    Parameters
    ----------
    path : str or os.PathLike
    sample_rate : int
        Rate of the blocks (the model's).
    block_seconds : float > 0
        Seconds of the file read at a time.

    Attributes
    ----------
    duration : float
        Seconds of audio according to the header.

    Raises
    ------
    AudioError
        Missing, unreadable, truncated or empty file; a bad block size.
    """

    def __init__(self, path, sample_rate: int, *, block_seconds: float = 30.0):
        if not (isinstance(block_seconds, (int, float)) and block_seconds > 0):
            raise AudioError(f"block_seconds must be a number of seconds > 0, got {block_seconds!r}")
        self.path = os.fspath(path)
        self.sample_rate = int(sample_rate)
        self._handle = open_audio(path)
        self.file_rate = int(self._handle.samplerate)
        self.duration = self._handle.frames / float(self.file_rate)
        self._block = max(1, int(round(block_seconds * self.file_rate)))
        if self._handle.frames == 0 or self._handle.channels == 0:
            self.close()
            raise AudioError(f"{self.path}: holds no samples; nothing to scan")

    def __enter__(self) -> "BlockReader":
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    def close(self) -> None:
        """Close the file."""
        self._handle.close()

    def __iter__(self):
        """Yield the blocks in order, float32 mono at ``sample_rate``.

        Raises
        ------
        AudioError
            A block cannot be read or holds NaN or infinite samples (the message gives
            the time).
        """
        resampler = None
        if self.file_rate != self.sample_rate:
            resampler = soxr.ResampleStream(self.file_rate, self.sample_rate, 1, dtype="float32", quality="HQ")
        position = 0
        while True:
            try:
                data = self._handle.read(self._block, dtype="float32", always_2d=True)
            except (RuntimeError, soundfile.SoundFileError, OSError, ValueError) as exc:
                raise AudioError(
                    f"{self.path}: cannot read the samples after {position / self.file_rate:.1f} s "
                    f"({short_reason(exc)}); the file may be damaged; re-export it as WAV or FLAC"
                ) from None
            last = data.shape[0] < self._block
            wave = data.mean(axis=1, dtype=np.float64).astype(np.float32) if data.shape[1] > 1 else data[:, 0]
            if not np.all(np.isfinite(wave)):
                raise AudioError(
                    f"{self.path}: NaN or infinite samples after {position / self.file_rate:.1f} s; "
                    "the file is damaged, re-export it"
                )
            position += wave.shape[0]
            if resampler is not None:
                wave = resampler.resample_chunk(np.ascontiguousarray(wave), last=last)
            if wave.shape[0]:
                yield np.clip(wave, -1.0, 1.0)
            if last:
                return
