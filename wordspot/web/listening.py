"""The page's listening sessions: microphone sound streamed in small blocks, commands back.

While Listen is switched on, the page sends the microphone's samples in blocks of about a
quarter of a second (raw little-endian samples, 32-bit float or 16-bit integer, at the
rate the page stated when it started); each block is handed to a
:class:`~wordspot.stream.live.LiveListener`, which resamples it to the model rate, finds
the stretches with speech and recognises each one as it completes. The commands completed
since the last answer go back with the answer to the next block; stopping finishes the
stretch in progress.

Everything is bounded: at most ``max_open`` sessions at once (more are refused), a block
holds at most :data:`MAX_BLOCK_SECONDS` of sound (judged by its declared length before it
is read), at most :data:`MAX_WAITING` commands wait to be fetched (older ones are counted,
not kept), and a session that receives nothing for ``idle_seconds`` is stopped and freed.
The last few ended sessions are remembered by id only, so that a late block gets a clear
answer rather than "unknown".
"""

from __future__ import annotations

import math
import secrets
import threading
import time
from collections import OrderedDict
from dataclasses import dataclass, field

import numpy as np

from wordspot.audio.decode import MAX_UPLOAD_RATE, MIN_UPLOAD_RATE
from wordspot.errors import WordspotError

__all__ = ["SAMPLE_FORMATS", "MAX_BLOCK_SECONDS", "MAX_WAITING", "ListenSessions", "block_samples",
           "check_listen_request", "command_dict"]

#: Sample formats a block may be sent in: raw little-endian samples, one channel.
SAMPLE_FORMATS = {"float32": np.dtype("<f4"), "int16": np.dtype("<i2")}
#: Most sound one block may hold (the page sends about 0.25 s at a time).
MAX_BLOCK_SECONDS = 1.0
#: Most found commands kept for a session between two answers; older ones are dropped.
MAX_WAITING = 50
# Ended sessions remembered (by id and why they ended) for a clear answer to a late block.
_REMEMBERED = 16


def check_listen_request(rate, sample_format) -> tuple[int, str]:
    """The sample rate and format a page asks to listen with, checked.

    Raises
    ------
    WordspotError
        A rate that is not a whole number of 8-192 kHz, or a format not in
        :data:`SAMPLE_FORMATS`.
    """
    if (isinstance(rate, bool) or not isinstance(rate, (int, float)) or not math.isfinite(rate)
            or rate != int(rate)):
        shown = "nothing" if rate is None else repr(rate)[:40]
        raise WordspotError(f"say the sample rate of the sound as a whole number of Hz (\"rate\"), got {shown}")
    rate = int(rate)
    if not MIN_UPLOAD_RATE <= rate <= MAX_UPLOAD_RATE:
        raise WordspotError(f"a sample rate of {rate} Hz cannot be listened to; only {MIN_UPLOAD_RATE // 1000}-"
                            f"{MAX_UPLOAD_RATE // 1000} kHz is accepted (the page sends the browser's rate)")
    if not isinstance(sample_format, str) or sample_format not in SAMPLE_FORMATS:
        raise WordspotError(f"the sample format must be one of {', '.join(SAMPLE_FORMATS)}, "
                            f"got {str(sample_format)[:40]!r}")
    return rate, sample_format


def block_samples(body: bytes, sample_format: str) -> np.ndarray:
    """A block's raw bytes as float32 samples in [-1, 1].

    Raises
    ------
    WordspotError
        A length that is not a whole number of samples, or float values that are not
        finite numbers.
    """
    dtype = SAMPLE_FORMATS[sample_format]
    if len(body) % dtype.itemsize:
        raise WordspotError(f"a block of {sample_format} samples must hold a multiple of {dtype.itemsize} bytes, "
                            f"got {len(body)}")
    raw = np.frombuffer(body, dtype=dtype)
    if sample_format == "int16":
        return raw.astype(np.float32) / 32768.0
    samples = raw.astype(np.float32)
    if not np.all(np.isfinite(samples)):
        raise WordspotError("the block holds values that are not numbers (NaN or infinite); "
                            "the sound was not used")
    return np.clip(samples, -1.0, 1.0)


def command_dict(command) -> dict:
    """A found command as the page shows it: seconds from the start of listening."""
    return {"start": round(float(command.start), 2), "end": round(float(command.end), 2),
            "words": list(command.words), "text": command.text,
            "confidence": round(float(command.confidence), 3)}


@dataclass
class _Session:
    """One page listening: its listener and what waits to be fetched."""

    id: str
    listener: object
    rate: int
    sample_format: str
    last_heard: float
    lock: threading.Lock = field(default_factory=threading.Lock)
    waiting: list = field(default_factory=list)
    dropped: int = 0
    samples: int = 0
    ended: bool = False

    def hold(self, found) -> None:
        self.waiting.extend(command_dict(c) for c in found)
        extra = len(self.waiting) - MAX_WAITING
        if extra > 0:
            del self.waiting[:extra]
            self.dropped += extra

    def answer(self) -> dict:
        out = {"id": self.id, "commands": self.waiting, "dropped": self.dropped,
               "heard_seconds": round(self.samples / self.rate, 2)}
        self.waiting, self.dropped = [], 0
        return out


class ListenSessions:
    """The open listening sessions of one server.

    Parameters
    ----------
    max_open : int >= 1
        Sessions open at once; more are refused until one stops or is freed.
    idle_seconds : float > 0
        A session that receives no block for this long is stopped and freed.
    clock : callable
        Seconds, for the idle timeout (``time.monotonic``).
    """

    def __init__(self, *, max_open: int = 2, idle_seconds: float = 15.0, clock=time.monotonic):
        if isinstance(max_open, bool) or not isinstance(max_open, int) or max_open < 1:
            raise WordspotError(f"max_open must be a whole number >= 1, got {max_open!r}")
        if not (isinstance(idle_seconds, (int, float)) and idle_seconds > 0):
            raise WordspotError(f"idle_seconds must be a number of seconds > 0, got {idle_seconds!r}")
        self.max_open = max_open
        self.idle_seconds = float(idle_seconds)
        self._clock = clock
        self._lock = threading.Lock()
        self._open: dict[str, _Session] = {}
        self._ended: OrderedDict[str, str] = OrderedDict()

    def __len__(self) -> int:
        with self._lock:
            return len(self._open)

    def _forget(self, session: _Session, why: str) -> None:
        """Remove ``session`` (the caller holds ``_lock``) and remember why it ended."""
        self._open.pop(session.id, None)
        self._ended[session.id] = why
        while len(self._ended) > _REMEMBERED:
            self._ended.popitem(last=False)

    def sweep(self) -> int:
        """Stop and free the sessions idle for ``idle_seconds``; how many were freed."""
        now = self._clock()
        with self._lock:
            idle = [s for s in self._open.values() if now - s.last_heard > self.idle_seconds]
            for s in idle:
                s.ended = True  # a block already on its way is still answered; none after it
                self._forget(s, f"it stopped after {self.idle_seconds:g} s without sound from the page")
        return len(idle)

    def open(self, make_listener, rate, sample_format) -> dict | None:
        """Start a session; None when ``max_open`` are open already.

        ``make_listener(rate)`` builds the listener (called only when there is room).
        """
        rate, sample_format = check_listen_request(rate, sample_format)
        self.sweep()
        with self._lock:
            if len(self._open) >= self.max_open:
                return None
            listen_id = secrets.token_urlsafe(12)
            session = _Session(listen_id, None, rate, sample_format, self._clock())
            self._open[listen_id] = session  # holds the place while the listener is built
        try:
            session.listener = make_listener(rate)
        except BaseException:
            with self._lock:
                self._open.pop(listen_id, None)
            raise
        return {"id": listen_id, "rate": rate, "format": sample_format,
                "max_block_bytes": self.block_limit(session), "idle_seconds": self.idle_seconds}

    def find(self, listen_id: str) -> _Session | None:
        """The open session ``listen_id`` (idle ones freed first), or None."""
        self.sweep()
        with self._lock:
            return self._open.get(listen_id)

    def why_not_found(self, listen_id: str) -> str:
        """A plain message for a block or stop sent to a session that is not open."""
        with self._lock:
            why = self._ended.get(listen_id)
        if why:
            return f"listening has ended ({why}); switch Listen on again"
        return "no such listening session (the server may have been restarted); switch Listen on again"

    @staticmethod
    def block_limit(session: _Session) -> int:
        """Most bytes one block of ``session`` may hold."""
        return int(MAX_BLOCK_SECONDS * session.rate) * SAMPLE_FORMATS[session.sample_format].itemsize

    def feed(self, session: _Session, body: bytes) -> dict | None:
        """Hand one block to the session's listener; the commands completed since the last answer.

        None if the session was stopped while the block arrived.
        """
        samples = block_samples(body, session.sample_format)  # checked before the session is touched
        with session.lock:
            if session.ended:
                return None
            session.last_heard = self._clock()
            if samples.size:
                session.hold(session.listener.push(samples))
                session.samples += samples.size
            session.last_heard = self._clock()
            return session.answer()

    def stop(self, session: _Session) -> dict | None:
        """End the session: finish the stretch in progress and return what is left.

        None if it had been stopped already.
        """
        with self._lock:
            self._forget(session, "Listen was switched off")
        with session.lock:
            if session.ended:
                return None
            session.ended = True
            session.hold(session.listener.finish())
            return session.answer()

    def stop_all(self) -> None:
        """Free every session without finishing it (the server is closing)."""
        with self._lock:
            for s in list(self._open.values()):
                s.ended = True
                self._forget(s, "the server stopped")
