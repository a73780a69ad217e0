"""Recognising commands in live audio, as it arrives.

:class:`LiveListener` takes blocks of any size at the input's own rate, resamples them to
the model's rate with soxr's streaming resampler (the state carried between blocks, as
:mod:`wordspot.stream.blocks` does for files), finds the speech stretches with a causal
detector (``floor_ahead`` 0: a frame is decided from the audio before it only) and
recognises each stretch as soon as its last sample (after the hangover and the padding)
has arrived, with the same recognizer, filler and calibration as ``wordspot scan`` and
``wordspot recognize`` (:class:`wordspot.stream.scan.StretchScanner`), and keeps or drops
each command whole by its words' mean confidence, as ``wordspot scan`` does. A
command followed at once by other talk would wait for the end of that talk, so the
stretch in progress is also recognised every ``early_every`` seconds and a command is
reported once two looks in a row find it followed by ``split_pause + early_hold`` seconds
without a command word. Only the stretch in progress is held, so memory stays flat
however long it listens.

The live settings were chosen on the demo's dev voices
(docs/experiments/2026-12-02-live-listening.md): a command followed by a pause is
reported about ``max(hangover, padding)`` after its last word ends, one followed by talk
about 0.6-0.9 s after, plus the time to recognise it.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import soxr

from wordspot.errors import AudioError, DecodingError
from wordspot.stream.detector import DetectorSettings
from wordspot.stream.scan import FoundCommand, ScanSettings, StretchScanner

__all__ = ["LIVE_DETECTOR", "ListenSettings", "LiveListener"]

#: The live detector: the file detector's thresholds, a floor that follows the background
#: from behind and a shorter hangover (chosen on the demo's dev voices).
LIVE_DETECTOR = DetectorSettings(floor_ahead=0.0, hangover=0.2, padding=0.25)


@dataclass(frozen=True)
class ListenSettings:
    """How live audio is listened to.

    Parameters
    ----------
    detector : DetectorSettings
        Must be causal (``floor_ahead == 0``).
    min_confidence : float in [0, 1]
        Words of lower confidence are dropped, on top of the recognizer's own threshold.
    split_pause : float >= 0
        A longer pause between two words of one stretch starts a new command.
    early_every, early_hold, early_span : float >= 0
        How often (seconds of audio) the stretch in progress is looked at for commands
        already complete (followed by ``split_pause + early_hold`` seconds without a
        command word), so that a command followed at once by other talk is not held back
        until the talk stops; 0 turns it off (see :class:`~wordspot.stream.scan.ScanSettings`).
    command_rule : {"word", "best", "mean"}
        How the confidence threshold judges a command's words (``ScanSettings.command_rule``;
        "mean", the default, as ``wordspot scan``).
    command_confidence : float in [0, 1] or None
        The threshold of whole commands (``ScanSettings.command_confidence``).
    """

    detector: DetectorSettings = field(default_factory=lambda: LIVE_DETECTOR)
    min_confidence: float = 0.0
    split_pause: float = 0.5
    early_every: float = 0.2
    early_hold: float = 0.1
    early_span: float = 3.0
    command_rule: str = ScanSettings.command_rule
    command_confidence: float | None = ScanSettings.command_confidence

    def __post_init__(self) -> None:
        if not isinstance(self.detector, DetectorSettings):
            raise DecodingError(f"ListenSettings.detector must be a DetectorSettings, got {type(self.detector).__name__}")
        if self.detector.floor_ahead != 0:
            raise DecodingError("ListenSettings.detector must decide from past audio only (floor_ahead 0), got "
                                f"floor_ahead {self.detector.floor_ahead!r}")
        self.scan_settings()  # checks the rest

    def scan_settings(self) -> ScanSettings:
        """The same settings for ``wordspot scan`` (a file then gives the same commands).

        Commands are kept or dropped whole by their words' mean confidence (0.35), as the
        scan does: on the dev long recordings pushed live (six seeds), far voices' false
        accepts per 5 minutes 26.2 -> 9.2 and ordinary voices' 10.2 -> 1.3 with commands
        found and the delay within the seeds' spread
        (docs/experiments/2026-12-04-live-whole-commands.md). Features stay normalised over
        the whole stretch (windows were not measured live).
        """
        return ScanSettings(detector=self.detector, min_confidence=self.min_confidence, split_pause=self.split_pause,
                            early_every=self.early_every, early_hold=self.early_hold,
                            early_span=self.early_span, command_rule=self.command_rule,
                            command_confidence=self.command_confidence, normalise_seconds=0.0)


class LiveListener:
    """Commands from live audio, reported as soon as each is said.

    Parameters
    ----------
    recognizer : wordspot.decoding.decoder.Recognizer
        Built once with :func:`~wordspot.decoding.decoder.build_recognizer`.
    input_rate : int
        Sample rate of the samples pushed.
    settings : ListenSettings, optional
    path : str
        Named in the commands found (default ``"-"``, standard input).

    Push mono float samples in [-1, 1] with :meth:`push` (any block size, even empty);
    call :meth:`finish` at the end of the stream. Times are seconds from the start of the
    stream.
    """

    def __init__(self, recognizer, *, input_rate: int, settings: ListenSettings | None = None, path: str = "-"):
        if not (isinstance(input_rate, (int, np.integer)) and not isinstance(input_rate, bool) and input_rate > 0):
            raise AudioError(f"input_rate must be a whole number of samples a second > 0, got {input_rate!r}")
        self.settings = settings or ListenSettings()
        self.input_rate = int(input_rate)
        self.rate = recognizer.features.sample_rate
        self._scanner = StretchScanner(recognizer, self.settings.scan_settings(), path=path)
        self._resampler = None
        if self.input_rate != self.rate:
            self._resampler = soxr.ResampleStream(self.input_rate, self.rate, 1, dtype="float32", quality="HQ")
        self._heard = 0  # input samples consumed
        self._finished = False

    @property
    def heard_seconds(self) -> float:
        """Seconds of input consumed so far."""
        return self._heard / self.input_rate

    @property
    def in_speech(self) -> bool:
        """Whether the detector is inside a stretch of speech."""
        return self._scanner.detector.in_speech

    @property
    def held_samples(self) -> int:
        """Samples (at the model's rate) held for the stretch in progress."""
        return self._scanner.held_samples

    def push(self, samples) -> list[FoundCommand]:
        """Add the next samples; return the commands completed by them.

        Raises
        ------
        AudioError
            Samples that are not finite, or a push after :meth:`finish`.
        """
        if self._finished:
            raise AudioError("LiveListener: push after finish; make a new listener for a new stream")
        x = np.asarray(samples, dtype=np.float32).reshape(-1)
        if x.shape[0] == 0:
            return []
        if not np.all(np.isfinite(x)):
            raise AudioError(f"NaN or infinite samples after {self.heard_seconds:.1f} s of the stream")
        self._heard += x.shape[0]
        if self._resampler is not None:
            x = self._resampler.resample_chunk(np.ascontiguousarray(x), last=False)
        return self._scanner.push(np.clip(x, -1.0, 1.0)) if x.shape[0] else []

    def finish(self) -> list[FoundCommand]:
        """End of the stream: the commands of the stretch in progress (if any)."""
        if self._finished:
            return []
        self._finished = True
        found = []
        if self._resampler is not None:
            tail = self._resampler.resample_chunk(np.zeros(0, dtype=np.float32), last=True)
            if tail.shape[0]:
                found.extend(self._scanner.push(np.clip(tail, -1.0, 1.0)))
        return found + self._scanner.finish()
