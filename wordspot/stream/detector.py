"""Finding the stretches of a long recording that hold speech, block by block.

Each 25 ms frame (10 ms step) gets its log energy in dB. The noise floor at frame ``t`` is
a low quantile (``floor_quantile``) of the energies in a window of ``floor_back`` seconds
before and ``floor_ahead`` seconds after it; the window keeps its length at the ends of
the file by sliding inwards; it is computed every ``FLOOR_STEP`` frames (0.1 s), each frame
using the window of the first frame of its group. A quantile rather than the minimum, so that a short dropout
of digital silence does not pull the floor down.

Speech starts at a frame ``onset_db`` above the floor, or up to ``lookback`` seconds earlier
where the frames before it are already ``offset_db`` above (weak first consonants), and
goes on while frames stay ``offset_db`` above the floor; it ends once ``hangover`` seconds
have passed without such a frame, at the last frame that was above. Runs shorter than ``min_speech`` are dropped.
A stretch is the run with ``padding`` seconds added on both sides (within the file), so
the decoder's pause model sees background before and after the words; a stretch starts no
earlier than the previous one ends, so no sample is recognised twice. A run that reaches
``max_stretch`` seconds is cut at its quietest frame in the second half, so the decoder
never gets more than that (plus padding) at once; the pieces meet without padding.

Causal when ``floor_ahead`` is 0 (as live listening needs): frame ``t`` is then decided as
soon as its samples have arrived, from the frames before it only; its floor window is the
``floor_back`` seconds before the first frame of its group, shorter at the start of the
stream (it grows from the first frame on rather than waiting for the window to fill). The
detector then looks at no sample after frame ``t`` to decide it, and appending any audio
never changes a decision already made (tests/stream/test_detector.py checks both).

Streaming-exact: :class:`SpeechDetector` carries the unfinished frame, the energies still
needed and the run's state across blocks, and decides a frame only once the whole floor
window after it has arrived, so any split of the samples into blocks gives the same
stretches (tests/stream/test_detector.py checks it).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from wordspot.errors import AudioError

__all__ = ["DetectorSettings", "Stretch", "SpeechDetector", "frame_energies", "find_stretches"]

#: Energies below this (dB relative to full scale) count as this (digital silence).
ENERGY_FLOOR_DB = -100.0

#: The floor is computed once per this many frames (frame t uses the window of the first
#: frame of its group, which ends no later than its own).
FLOOR_STEP = 10

# Frames decided at a time (bounds the floor windows' temporary copy to a few MB).
_CHUNK = 2048


@dataclass(frozen=True)
class DetectorSettings:
    """How speech stretches are found (seconds and dB; see the module docstring).

    The defaults were chosen on the demo's dev voices
    (docs/experiments/2026-12-02-long-recordings.md). ``floor_ahead = 0`` makes the detector
    causal (see the module docstring).
    """

    frame_seconds: float = 0.025
    hop_seconds: float = 0.010
    floor_back: float = 3.0
    floor_ahead: float = 1.0
    floor_quantile: float = 0.1
    onset_db: float = 10.0
    offset_db: float = 3.0
    min_speech: float = 0.2
    lookback: float = 0.3
    hangover: float = 0.6
    padding: float = 0.25
    max_stretch: float = 12.0

    def __post_init__(self) -> None:
        for name in ("frame_seconds", "hop_seconds", "max_stretch"):
            if not _number(getattr(self, name)) or getattr(self, name) <= 0:
                raise AudioError(f"DetectorSettings.{name} must be a number > 0, got {getattr(self, name)!r}")
        for name in ("floor_back", "floor_ahead", "min_speech", "lookback", "hangover", "padding"):
            if not _number(getattr(self, name)) or getattr(self, name) < 0:
                raise AudioError(f"DetectorSettings.{name} must be a number >= 0, got {getattr(self, name)!r}")
        if not (_number(self.floor_quantile) and 0 <= self.floor_quantile <= 1):
            raise AudioError(f"DetectorSettings.floor_quantile must be in [0, 1], got {self.floor_quantile!r}")
        if not (_number(self.onset_db) and _number(self.offset_db) and self.onset_db >= self.offset_db):
            raise AudioError(
                f"DetectorSettings: onset_db ({self.onset_db!r}) must be a number >= offset_db ({self.offset_db!r})"
            )
        if self.max_stretch < 2 * self.hop_seconds:
            raise AudioError(f"DetectorSettings.max_stretch must be at least two frame steps, got {self.max_stretch!r}")


def _number(x) -> bool:
    return isinstance(x, (int, float, np.integer, np.floating)) and not isinstance(x, bool) and np.isfinite(x)


@dataclass(frozen=True)
class Stretch:
    """Samples ``[start, end)`` of the recording (at the detector's rate) to recognise.

    ``speech_start`` and ``speech_end`` bound the detected speech itself (without padding).
    """

    start: int
    end: int
    speech_start: int
    speech_end: int


def frame_energies(wave: np.ndarray, frame: int, hop: int) -> np.ndarray:
    """Log energy (dB of the mean square) of frames ``[i*hop, i*hop+frame)`` that fit in ``wave``."""
    if wave.shape[0] < frame:
        return np.zeros(0)
    view = np.lib.stride_tricks.sliding_window_view(np.asarray(wave, dtype=np.float64), frame)[::hop]
    power = np.einsum("ij,ij->i", view, view) / frame
    return np.maximum(10.0 * np.log10(np.maximum(power, 1e-30)), ENERGY_FLOOR_DB)


class SpeechDetector:
    """Energy-based speech detection with hangover, fed block by block.

    Parameters
    ----------
    sample_rate : int
    settings : DetectorSettings, optional

    Feed blocks with :meth:`push` and call :meth:`finish` at the end; both return the
    stretches completed so far, in order. :attr:`keep_from` is the first sample a later
    stretch can still need, so a caller keeping the samples can drop those before it.
    """

    def __init__(self, sample_rate: int, settings: DetectorSettings | None = None):
        s = settings or DetectorSettings()
        self.settings = s
        self.rate = int(sample_rate)
        self.frame = max(1, int(round(s.frame_seconds * self.rate)))
        self.hop = max(1, int(round(s.hop_seconds * self.rate)))
        frames = lambda seconds: int(round(seconds / s.hop_seconds))  # noqa: E731
        self._back = frames(s.floor_back)
        self._ahead = frames(s.floor_ahead)
        self._window = self._back + self._ahead + 1
        self.causal = self._ahead == 0
        self._last_floor = (-1, 0.0)  # (first frame of a group, its floor): causal pushes of a few frames
        self._min_speech = max(1, frames(s.min_speech))
        self._hangover = frames(s.hangover)
        self._max_run = max(2, frames(s.max_stretch))
        self._pad = int(round(s.padding * self.rate))
        # samples not yet framed: _tail[0] is sample number _tail_at
        self._tail = np.zeros(0, dtype=np.float64)
        self._tail_at = 0
        self._seen = 0  # samples pushed
        # energies of frames [_e_at, _e_at + len(_energy)); frames before _next are decided
        self._energy = np.zeros(0)
        self._e_at = 0
        self._next = 0
        self._finished = False
        # the open run: first frame, first sample of its stretch, last frame above the offset
        self._run: tuple[int, int, int] | None = None
        self._pending: list[Stretch] = []
        self._lookback = frames(s.lookback)
        self._above_before = np.zeros(0, dtype=bool)
        self._free_from = 0  # frames before this belong to an earlier run
        self._prev_end = 0  # end sample of the last stretch (a later one starts no earlier)

    # ------------------------------------------------------------------ feeding

    def push(self, block) -> list[Stretch]:
        """Add the next samples; return the stretches now complete."""
        if self._finished:
            raise AudioError("SpeechDetector: push after finish; make a new detector for a new recording")
        x = np.asarray(block, dtype=np.float64).reshape(-1)
        self._seen += x.shape[0]
        self._tail = np.concatenate([self._tail, x])
        n_new = 0 if self._tail.shape[0] < self.frame else 1 + (self._tail.shape[0] - self.frame) // self.hop
        if n_new:
            self._energy = np.concatenate([self._energy, frame_energies(self._tail, self.frame, self.hop)[:n_new]])
            cut = n_new * self.hop
            self._tail = self._tail[cut:]
            self._tail_at += cut
        n_frames = self._e_at + self._energy.shape[0]
        # frame t is decided once frames up to max(t, back) + ahead have arrived (causal:
        # as soon as it has arrived)
        if self.causal:
            upto = n_frames
        else:
            upto = n_frames - self._ahead if n_frames >= self._window else 0
        self._decide(upto, n_frames)
        return self._release()

    def finish(self) -> list[Stretch]:
        """End of the recording: decide the last frames; return the remaining stretches."""
        if not self._finished:
            self._finished = True
            n_frames = self._e_at + self._energy.shape[0]
            self._decide(n_frames, n_frames)
            if self._run is not None:
                self._close_run()
        return self._release()

    @property
    def decided(self) -> int:
        """Frames decided so far (frame ``t`` covers samples ``[t*hop, t*hop + frame)``)."""
        return self._next

    @property
    def in_speech(self) -> bool:
        """Whether a run of speech is open after the frames decided so far."""
        return self._run is not None

    @property
    def keep_from(self) -> int:
        """The first sample a stretch not yet returned may start at."""
        starts = [s.start for s in self._pending]
        if self._run is not None:
            starts.append(self._run[1])
        starts.append(max(0, (self._next - self._lookback) * self.hop - self._pad))
        return min(starts)

    # ------------------------------------------------------------------ deciding

    def _floors(self, t0: int, t1: int, n_frames: int) -> np.ndarray:
        """Noise floor of frames t0..t1-1 (all energies they need are held)."""
        if self.causal:
            return self._causal_floors(t0, t1)
        width = min(self._window, n_frames)
        t = np.arange(t0, t1)
        lo = np.clip(t - t % FLOOR_STEP - self._back, 0, n_frames - width)
        starts, which = np.unique(lo, return_inverse=True)
        windows = np.lib.stride_tricks.sliding_window_view(self._energy, width)[starts - self._e_at]
        return np.quantile(windows, self.settings.floor_quantile, axis=1)[which]

    def _causal_floors(self, t0: int, t1: int) -> np.ndarray:
        """Floor of frames t0..t1-1 from frames [g - back, g] (g: first frame of t's group)."""
        first = t0 - t0 % FLOOR_STEP
        if t1 <= first + FLOOR_STEP and self._last_floor[0] == first:  # live pushes: one group, known
            return np.full(t1 - t0, self._last_floor[1])
        t = np.arange(t0, t1)
        groups, which = np.unique(t - t % FLOOR_STEP, return_inverse=True)
        q = self.settings.floor_quantile
        floors = np.empty(groups.shape[0])
        full = groups >= self._back
        if np.any(full):
            view = np.lib.stride_tricks.sliding_window_view(self._energy, self._back + 1)
            floors[full] = np.quantile(view[groups[full] - self._back - self._e_at], q, axis=1)
        for i in np.flatnonzero(~full):  # the start of the stream: the window grows
            floors[i] = np.quantile(self._energy[0 - self._e_at : groups[i] + 1 - self._e_at], q)
        self._last_floor = (int(groups[-1]), float(floors[-1]))
        return floors[which]

    def _decide(self, upto: int, n_frames: int) -> None:
        for t0 in range(self._next, upto, _CHUNK):
            self._decide_chunk(t0, min(t0 + _CHUNK, upto), n_frames)
        self._next = max(self._next, upto)
        # energies still needed: the floor windows of later frames and the open run
        keep = max(0, self._next - self._window - FLOOR_STEP)
        if self._run is not None:
            keep = min(keep, self._run[0])
        if keep > self._e_at:
            self._energy = self._energy[keep - self._e_at :]
            self._e_at = keep

    def _decide_chunk(self, t0: int, t1: int, n_frames: int) -> None:
        s = self.settings
        rel = self._energy[t0 - self._e_at : t1 - self._e_at] - self._floors(t0, t1, n_frames)
        loud_on = rel >= s.onset_db
        loud_on_going = rel >= s.offset_db
        # above the offset, with the last decided frames of earlier chunks in front
        above = np.concatenate([self._above_before, loud_on_going])
        shift = self._above_before.shape[0]
        for i in range(t1 - t0):
            t = t0 + i
            if self._run is None:
                if loud_on[i]:
                    first, k = t, i + shift
                    while first > self._free_from and t - first < self._lookback and k > 0 and above[k - 1]:
                        first, k = first - 1, k - 1
                    self._run = (first, max(self._prev_end, first * self.hop - self._pad), t)
                continue
            first, start, last = self._run
            if loud_on_going[i]:
                last = t
                self._run = (first, start, last)
            if t - last > self._hangover:
                self._close_run()
            elif t - first + 1 >= self._max_run:
                self._split_run(t)
        self._above_before = above[above.shape[0] - self._lookback :] if self._lookback else above[:0]

    def _close_run(self) -> None:
        first, start, last = self._run
        self._run = None
        self._free_from = last + 1
        if last - first + 1 < self._min_speech:
            return
        speech_end = last * self.hop + self.frame
        self._prev_end = speech_end + self._pad
        self._pending.append(Stretch(start=start, end=speech_end + self._pad,
                                     speech_start=max(start, first * self.hop), speech_end=speech_end))

    def _split_run(self, t: int) -> None:
        """Cut the open run at its quietest frame in frames (first + half .. t]."""
        first, start, last = self._run
        lo = first + self._max_run // 2
        seg = self._energy[lo - self._e_at : t + 1 - self._e_at]
        cut = lo + int(np.argmin(seg))  # the first of equally quiet frames
        boundary = cut * self.hop + self.frame // 2
        self._prev_end = boundary
        if last >= first and min(last, cut) - first + 1 >= self._min_speech:
            self._pending.append(Stretch(start=start, end=boundary, speech_start=max(start, first * self.hop),
                                         speech_end=min(boundary, last * self.hop + self.frame)))
        self._run = (cut + 1, boundary, last)

    def _release(self) -> list[Stretch]:
        """Stretches whose samples have all arrived (clipped to the file at the end)."""
        out = []
        keep = []
        for st in self._pending:
            if self._finished:
                out.append(Stretch(st.start, min(st.end, self._seen), st.speech_start, min(st.speech_end, self._seen)))
            elif st.end <= self._seen:
                out.append(st)
            else:
                keep.append(st)
        self._pending = keep
        return out


def find_stretches(wave: np.ndarray, sample_rate: int, settings: DetectorSettings | None = None) -> list[Stretch]:
    """The speech stretches of a whole waveform (one block)."""
    detector = SpeechDetector(sample_rate, settings)
    return detector.push(wave) + detector.finish()
