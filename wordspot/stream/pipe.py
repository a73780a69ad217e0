"""Reading audio from a byte stream (a pipe): a WAV header then samples, or raw PCM.

A recorder program piping WAV cannot know the length when it writes the header, so it
writes a placeholder (0 or 0xFFFFFFFF, or a huge count); such a ``data`` chunk is read to
the end of the stream. A ``data`` chunk of a plausible declared length is read up to that
length (what follows it in a file is not audio). Samples are PCM of 8 (unsigned), 16, 24
or 32 bits, or 32-bit float, little-endian, any number of channels (averaged to mono).

Every block is float32 mono in [-1, 1]. The end of the stream in the middle of a sample
frame, a header that is cut short or not a WAV header, and read errors raise
:class:`~wordspot.errors.AudioError` with one message naming the source, what went wrong
and how many seconds were read before.
"""

from __future__ import annotations

import struct
from dataclasses import dataclass

import numpy as np

from wordspot.errors import AudioError

__all__ = ["StreamFormat", "read_wav_header", "PcmReader", "decode_samples", "UNKNOWN_LENGTHS"]

#: ``data`` chunk sizes that recorder programs write when they do not know the length
#: (from memory: 0 and the largest 32-bit values are the usual placeholders).
UNKNOWN_LENGTHS = (0, 0xFFFFFFFF)
# declared sizes from here on are read to the end of the stream as well (placeholders)
_HUGE = 0x7FFF0000
# chunks before the data larger than this are not skipped (a stream that is not WAV)
_MAX_CHUNK = 1 << 24

_ENCODINGS = {  # (WAV format tag, bits) -> encoding
    (1, 8): "u8", (1, 16): "s16", (1, 24): "s24", (1, 32): "s32", (3, 32): "f32",
}
_WIDTH = {"u8": 1, "s16": 2, "s24": 3, "s32": 4, "f32": 4}


@dataclass(frozen=True)
class StreamFormat:
    """Sample rate, channels and encoding (``u8``, ``s16``, ``s24``, ``s32`` or ``f32``) of a stream."""

    rate: int
    channels: int = 1
    encoding: str = "s16"

    def __post_init__(self) -> None:
        if not (isinstance(self.rate, int) and 1000 <= self.rate <= 384000):
            raise AudioError(f"sample rate must be a whole number from 1000 to 384000, got {self.rate!r}")
        if not (isinstance(self.channels, int) and 1 <= self.channels <= 64):
            raise AudioError(f"channels must be a whole number from 1 to 64, got {self.channels!r}")
        if self.encoding not in _WIDTH:
            raise AudioError(f"unknown sample encoding {self.encoding!r}")

    @property
    def frame_bytes(self) -> int:
        """Bytes of one sample of every channel."""
        return _WIDTH[self.encoding] * self.channels


def _read_exactly(read, n: int, source: str, what: str) -> bytes:
    out = b""
    while len(out) < n:
        chunk = _checked_read(read, n - len(out), source, 0.0)
        if not chunk:
            raise AudioError(f"{source}: the stream ended inside the WAV header ({what}, got {len(out)} of {n} "
                             "bytes); the recorder may have stopped at once, check that it runs on its own")
        out += chunk
    return out


def _checked_read(read, n: int, source: str, seconds: float) -> bytes:
    try:
        return read(n)
    except OSError as exc:
        raise AudioError(f"{source}: cannot read the stream after {seconds:.1f} s ({exc.strerror or exc})") from None


def read_wav_header(read, source: str = "standard input") -> tuple[StreamFormat, int | None]:
    """Read a WAV header up to the start of the samples.

    Parameters
    ----------
    read : callable
        ``read(n)`` returns up to ``n`` bytes, ``b""`` at the end of the stream.
    source : str
        Named in messages.

    Returns
    -------
    (StreamFormat, int or None)
        The format and the bytes of samples declared (None: read to the end of the stream).
    """
    head = b""
    while len(head) < 4:  # the first bytes tell a WAV stream from anything else
        chunk = _checked_read(read, 4 - len(head), source, 0.0)
        if not chunk:
            break
        head += chunk
    if not head:
        raise AudioError(f"{source}: the stream is empty (no WAV header); check that the recorder runs on its own")
    if not b"RIFF".startswith(head):
        raise AudioError(f"{source}: does not start with a WAV header (RIFF ... WAVE, got {head!r}); for raw "
                         "16-bit PCM give the rate with --rate")
    if len(head) < 4:
        raise AudioError(f"{source}: the stream ended inside the WAV header (RIFF header, got {len(head)} of 12 "
                         "bytes); the recorder may have stopped at once, check that it runs on its own")
    head += _read_exactly(read, 8, source, "RIFF header")
    if head[:4] != b"RIFF" or head[8:12] != b"WAVE":
        raise AudioError(f"{source}: does not start with a WAV header (RIFF ... WAVE, got {head[:4]!r}); for raw "
                         "16-bit PCM give the rate with --rate")
    fmt = None
    while True:
        chunk_id, size = struct.unpack("<4sI", _read_exactly(read, 8, source, "chunk header"))
        if chunk_id == b"data":
            if fmt is None:
                raise AudioError(f"{source}: the WAV samples come before their format (no 'fmt ' chunk); "
                                 "the header is damaged")
            if size in UNKNOWN_LENGTHS or size >= _HUGE:
                return fmt, None
            return fmt, size - size % fmt.frame_bytes
        if size > _MAX_CHUNK:
            raise AudioError(f"{source}: a WAV header chunk {chunk_id!r} of {size} bytes; the header is damaged")
        body = _read_exactly(read, size + (size & 1), source, f"{chunk_id.decode('latin-1')!r} chunk")
        if chunk_id == b"fmt ":
            fmt = _parse_format(body[:size], source)


def _parse_format(body: bytes, source: str) -> StreamFormat:
    if len(body) < 16:
        raise AudioError(f"{source}: the WAV format chunk is {len(body)} bytes, at least 16 expected; the header "
                         "is damaged")
    tag, channels, rate, _, _, bits = struct.unpack("<HHIIHH", body[:16])
    if tag == 0xFFFE and len(body) >= 26:  # extensible: the real tag opens the sub-format
        tag = struct.unpack("<H", body[24:26])[0]
    encoding = _ENCODINGS.get((tag, bits))
    if encoding is None:
        raise AudioError(f"{source}: WAV samples of format {tag} with {bits} bits are not read here; send 16-bit "
                         "PCM (for example `arecord -f S16_LE`)")
    if channels == 0:
        raise AudioError(f"{source}: the WAV header names 0 channels; the header is damaged")
    return StreamFormat(rate=int(rate), channels=int(channels), encoding=encoding)


def decode_samples(data: bytes, fmt: StreamFormat) -> np.ndarray:
    """Samples of whole frames, as float32 mono in [-1, 1]."""
    if fmt.encoding == "s16":
        x = np.frombuffer(data, dtype="<i2").astype(np.float32) / 32768.0
    elif fmt.encoding == "u8":
        x = (np.frombuffer(data, dtype=np.uint8).astype(np.float32) - 128.0) / 128.0
    elif fmt.encoding == "s24":
        b = np.frombuffer(data, dtype=np.uint8).reshape(-1, 3).astype(np.int32)
        v = b[:, 0] | (b[:, 1] << 8) | (b[:, 2] << 16)
        x = (np.where(v >= 1 << 23, v - (1 << 24), v)).astype(np.float32) / float(1 << 23)
    elif fmt.encoding == "s32":
        x = (np.frombuffer(data, dtype="<i4").astype(np.float64) / 2147483648.0).astype(np.float32)
    else:
        x = np.frombuffer(data, dtype="<f4").astype(np.float32)
    if fmt.channels > 1:
        x = x.reshape(-1, fmt.channels).mean(axis=1, dtype=np.float64).astype(np.float32)
    return x


class PcmReader:
    """Blocks of samples from a byte stream, as they arrive.

    Parameters
    ----------
    read : callable
        ``read(n)`` returns up to ``n`` bytes (what is there, without waiting for all
        ``n``), ``b""`` at the end of the stream.
    fmt : StreamFormat
    limit : int, optional
        Bytes of samples to read at most (the WAV ``data`` chunk's declared size).
    source : str
        Named in messages.
    block_seconds : float
        The most read at a time.
    """

    def __init__(self, read, fmt: StreamFormat, *, limit: int | None = None, source: str = "standard input",
                 block_seconds: float = 0.25):
        self.read, self.fmt, self.limit, self.source = read, fmt, limit, source
        self._block = max(fmt.frame_bytes, int(block_seconds * fmt.rate) * fmt.frame_bytes)
        self.bytes_read = 0
        self._rest = b""

    @property
    def seconds(self) -> float:
        """Seconds of whole sample frames read so far."""
        return (self.bytes_read - len(self._rest)) / self.fmt.frame_bytes / self.fmt.rate

    def take_rest(self) -> bytes:
        """The bytes of a sample frame begun but not finished (they are handed over and forgotten)."""
        rest, self._rest = self._rest, b""
        self.bytes_read -= len(rest)
        return rest

    def __iter__(self):
        """Yield float32 mono blocks until the stream (or the declared data) ends.

        Raises
        ------
        AudioError
            A read error, or the stream ends in the middle of a sample frame.
        """
        fb = self.fmt.frame_bytes
        while True:
            n = self._block if self.limit is None else min(self._block, self.limit - self.bytes_read)
            if n <= 0:
                return
            data = _checked_read(self.read, n, self.source, self.seconds)
            if not data:
                if self._rest:
                    raise AudioError(
                        f"{self.source}: the stream ended in the middle of a sample after {self.seconds:.2f} s "
                        f"({len(self._rest)} stray byte{'s' if len(self._rest) != 1 else ''}, "
                        f"{fb} expected per sample of all channels); check --rate, --channels and the "
                        "recorder's sample format (16-bit little-endian)")
                return
            self.bytes_read += len(data)
            data = self._rest + data
            whole = len(data) - len(data) % fb
            self._rest = data[whole:]
            if whole:
                yield decode_samples(data[:whole], self.fmt)
