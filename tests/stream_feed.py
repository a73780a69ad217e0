"""Feeding bytes into a pipe at the pace of live audio (or faster), for tests and benchmarks.

``feed`` writes ``data`` in pieces of ``piece_seconds`` of audio, piece ``i`` no earlier
than ``start + i * piece_seconds / speed`` (a schedule on the clock, so sleeps do not add
up), as a recorder program writes what it has just recorded.
"""

from __future__ import annotations

import time

__all__ = ["feed", "raw_bytes", "wav_stream_bytes"]


def feed(pipe, data: bytes, bytes_per_second: float, *, speed: float = 1.0, piece_seconds: float = 0.02,
         start: float | None = None, close: bool = True) -> float:
    """Write ``data`` to ``pipe`` at ``speed`` times real time; return the clock time it started.

    ``bytes_per_second`` is the audio's (rate x channels x bytes a sample); pieces are
    whole multiples of 4 bytes so a sample is never split (except a deliberately odd tail).
    """
    piece = max(4, int(bytes_per_second * piece_seconds) // 4 * 4)
    start = time.monotonic() if start is None else start
    for i, at in enumerate(range(0, len(data), piece)):
        wait = start + i * piece_seconds / speed - time.monotonic()
        if wait > 0:
            time.sleep(wait)
        pipe.write(data[at : at + piece])
        pipe.flush()
    if close:
        pipe.close()
    return start


def raw_bytes(wave, channels: int = 1) -> bytes:
    """16-bit little-endian PCM of float samples in [-1, 1] (each sample repeated on ``channels``)."""
    import numpy as np

    x = np.clip(np.round(np.asarray(wave, dtype=np.float64) * 32767.0), -32768, 32767).astype("<i2")
    if channels > 1:
        x = np.repeat(x, channels)
    return x.tobytes()


def wav_stream_bytes(wave, rate: int, *, data_size: int = 0xFFFFFFFF, extra_chunk: bool = True) -> bytes:
    """A WAV stream as a recorder writes it to a pipe: the length unknown (``data_size``), then samples.

    Header layout from the RIFF WAVE format (16-bit PCM, one channel); ``extra_chunk`` puts
    a LIST chunk before the samples, as some recorders do.
    """
    import struct

    fmt = struct.pack("<4sIHHIIHH", b"fmt ", 16, 1, 1, rate, rate * 2, 2, 16)
    extra = struct.pack("<4sI", b"LIST", 6) + b"INFO\x00\x00" if extra_chunk else b""
    head = b"RIFF" + struct.pack("<I", 0xFFFFFFFF if data_size == 0xFFFFFFFF else 36 + data_size) + b"WAVE"
    return head + fmt + extra + struct.pack("<4sI", b"data", data_size) + raw_bytes(wave)
