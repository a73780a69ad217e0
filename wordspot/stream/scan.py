"""Finding commands in recordings of any length.

A file is read in blocks (:mod:`wordspot.stream.blocks`); the speech detector
(:mod:`wordspot.stream.detector`) marks the stretches with speech; each stretch is
recognised as one utterance by the ordinary recognizer (features with the model's
settings, normalised over the stretch, then token passing); the words are moved to times
from the start of the file. The words of one stretch form one command, unless a pause of
more than ``split_pause`` seconds lies between two of them. Only the samples of the
stretch in progress and one block are held, so memory does not grow with the length of
the recording.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field, replace

import numpy as np

from wordspot.errors import AudioError, DecodingError
from wordspot.stream.blocks import BlockReader
from wordspot.stream.detector import DetectorSettings, SpeechDetector, Stretch
from wordspot.stream.normalise import stretch_features
from wordspot.util.progress import ProgressBar

__all__ = ["ScanSettings", "FoundWord", "FoundCommand", "ScanResult", "StretchScanner", "scan_file", "scan_files",
           "group_words", "whole_commands", "judged_words", "judged_commands", "decode_stretch", "stretch_commands",
           "recognise_stretch", "COMMAND_RULES"]

#: How the confidence threshold judges the words of one command (``ScanSettings.command_rule``).
COMMAND_RULES = ("word", "best", "mean")


@dataclass(frozen=True)
class ScanSettings:
    """How long recordings are scanned.

    Parameters
    ----------
    detector : DetectorSettings
        How speech stretches are found.
    block_seconds : float > 0
        Seconds of audio read at a time (does not change the result).
    min_confidence : float in [0, 1]
        Words of lower confidence are dropped before commands are formed, on top of the
        recognizer's own threshold (``DecoderSettings.min_confidence``).
    split_pause : float >= 0
        A longer pause between two words of one stretch starts a new command.
    early_every : float >= 0
        Every this many seconds of audio, the stretch in progress is recognised so far and
        the commands followed by more than ``split_pause + early_hold`` seconds without a
        command word, in two looks in a row, are reported at once; the stretch then goes on
        after them. 0 (files): only whole stretches are recognised.
    early_hold : float >= 0
        See ``early_every``.
    early_span : float >= 0
        Audio without a complete command is dropped from the stretch in progress (so that
        each look recognises a short stretch) only once the stretch so far is this long.
    command_rule : {"word", "best", "mean"}
        "mean" (default): the words heard (all but those said amid other talk) are grouped
        first, and a command is kept or dropped whole by its words' mean confidence ("best":
        its best word's; see :func:`whole_commands`). "word": each word is kept or dropped by
        its own confidence, and the words kept are grouped into commands.
    normalise_seconds : float >= 0
        Features are normalised over this many seconds around each frame
        (:mod:`wordspot.stream.normalise`); 0 (default): over the whole stretch.
    command_confidence : float in [0, 1] or None
        With the "best" and "mean" rules, a command is kept when its confidence reaches
        this (or ``min_confidence``, whichever is higher); None: the recognizer's own
        threshold (``DecoderSettings.min_confidence``). "mean" and 0.35 against "word", over
        six seeds of dev long recordings of far (frequency-scaled), ordinary and new dev
        voices: false accepts per 5 minutes 16.3 -> 7.0, 7.1 -> 1.9 and 5.4 -> 1.6 (fewer in
        every seed), commands found 61.8 -> 61.1%, 80.0 -> 82.0%, 82.2 -> 84.7%. Windows of
        2 s found fewer commands on the far voices with either rule, so 0 stays
        (docs/experiments/2026-12-04-unheard-voices-long-and-phrases.md).
    """

    detector: DetectorSettings = field(default_factory=DetectorSettings)
    block_seconds: float = 30.0
    min_confidence: float = 0.0
    split_pause: float = 0.5
    early_every: float = 0.0
    early_hold: float = 0.1
    early_span: float = 0.0
    command_rule: str = "mean"
    normalise_seconds: float = 0.0
    command_confidence: float | None = 0.35

    def __post_init__(self) -> None:
        if not isinstance(self.detector, DetectorSettings):
            raise DecodingError(f"ScanSettings.detector must be a DetectorSettings, got {type(self.detector).__name__}")
        if not (isinstance(self.block_seconds, (int, float)) and self.block_seconds > 0):
            raise DecodingError(f"block_seconds must be a number of seconds > 0, got {self.block_seconds!r}")
        if not (isinstance(self.min_confidence, (int, float)) and 0 <= self.min_confidence <= 1):
            raise DecodingError(f"min_confidence must be between 0 and 1, got {self.min_confidence!r}")
        if not (isinstance(self.split_pause, (int, float)) and self.split_pause >= 0):
            raise DecodingError(f"split_pause must be a number of seconds >= 0, got {self.split_pause!r}")
        if self.command_rule not in COMMAND_RULES:
            raise DecodingError(f"command_rule must be one of {', '.join(COMMAND_RULES)}, got {self.command_rule!r}")
        c = self.command_confidence
        if c is not None and not (isinstance(c, (int, float)) and not isinstance(c, bool) and 0 <= c <= 1):
            raise DecodingError(f"command_confidence must be between 0 and 1 (or None), got {c!r}")
        for name in ("early_every", "early_hold", "early_span", "normalise_seconds"):
            if not (isinstance(getattr(self, name), (int, float)) and getattr(self, name) >= 0):
                raise DecodingError(f"{name} must be a number of seconds >= 0, got {getattr(self, name)!r}")


@dataclass(frozen=True)
class FoundWord:
    """A recognised word with times in seconds from the start of the file."""

    word: str
    start: float
    end: float
    confidence: float


@dataclass(frozen=True)
class FoundCommand:
    """Words said together: times from the start of the file, a confidence (see ``ScanSettings.command_rule``)."""

    path: str
    start: float
    end: float
    words: tuple[str, ...]
    confidence: float
    parts: tuple[FoundWord, ...] = ()

    @property
    def text(self) -> str:
        return " ".join(self.words)


@dataclass
class ScanResult:
    """One file's commands, how long it is, how many stretches were recognised, any error."""

    path: str
    commands: list[FoundCommand] = field(default_factory=list)
    duration: float = 0.0
    stretches: int = 0
    error: str = ""


def group_words(path: str, words, split_pause: float) -> list[FoundCommand]:
    """Group time-ordered words into commands at pauses longer than ``split_pause``."""
    groups: list[list[FoundWord]] = []
    for w in words:
        if groups and w.start - groups[-1][-1].end <= split_pause:
            groups[-1].append(w)
        else:
            groups.append([w])
    return [
        FoundCommand(path=path, start=g[0].start, end=g[-1].end, words=tuple(w.word for w in g),
                     confidence=min(w.confidence for w in g), parts=tuple(g))
        for g in groups
    ]


def decode_stretch(recognizer, wave: np.ndarray, normalise_seconds: float = 0.0):
    """The recognition of one stretch's samples (times from the stretch's start), or None if too short.

    ``normalise_seconds`` > 0: features normalised over a window of that many seconds
    around each frame (:mod:`wordspot.stream.normalise`) instead of the whole stretch.
    """
    if wave.shape[0] < recognizer.features.window_length:
        return None
    return recognizer.decode(stretch_features(wave, recognizer.features, normalise_seconds))


def recognise_stretch(recognizer, wave: np.ndarray, stretch: Stretch, rate: int, settings: ScanSettings,
                      path: str) -> list[FoundCommand]:
    """The commands in one stretch's samples, with times from the start of the recording."""
    result = decode_stretch(recognizer, wave, settings.normalise_seconds)
    if result is None:
        return []
    return stretch_commands(result, stretch.start / rate, float(recognizer.min_confidence), settings, path)


def stretch_commands(result, offset: float, threshold: float, settings: ScanSettings, path: str) -> list[FoundCommand]:
    """The commands of one stretch's recognition, with times moved by ``offset`` seconds.

    ``threshold`` is the recognizer's (``Recognizer.min_confidence``); it judges whole
    commands unless ``settings.command_confidence`` is set.
    """
    return judged_commands(judged_words(result, offset, settings), threshold, settings, path)


def judged_commands(words, threshold: float, settings: ScanSettings, path: str) -> list[FoundCommand]:
    """The commands of :func:`judged_words`' ``words`` under ``settings.command_rule`` (see
    :func:`stretch_commands`)."""
    if settings.command_rule == "word":
        return group_words(path, words, settings.split_pause)
    if settings.command_confidence is not None:
        threshold = float(settings.command_confidence)
    threshold = max(threshold, float(settings.min_confidence))
    return whole_commands(path, words, threshold, settings.split_pause, settings.command_rule)


def judged_words(result, offset: float, settings: ScanSettings) -> list[FoundWord]:
    """The words of one stretch's recognition that the command rule judges, in time order.

    "word": the recognizer's words of at least ``settings.min_confidence``; "best" and
    "mean": every word heard but those said amid other talk (whole commands are judged).
    """
    if settings.command_rule == "word":
        heard = [s for s in result.segments if s.confidence >= settings.min_confidence]
    else:
        heard = sorted(list(result.segments) + [s for s in result.dropped if not s.amid_talk], key=lambda s: s.start)
    return [FoundWord(s.word, offset + s.start, offset + s.end, s.confidence) for s in heard]


def whole_commands(path: str, words, threshold: float, split_pause: float, rule: str = "best") -> list[FoundCommand]:
    """Group time-ordered words into commands and keep or drop each command as a whole.

    Parameters
    ----------
    words : sequence of FoundWord
        Every word heard, whatever its confidence.
    threshold : float
        A command is kept when its confidence reaches it.
    rule : {"best", "mean"}
        A command's confidence: its best word's ("best") or its words' mean ("mean").
        It becomes the command's ``confidence``.
    """
    if rule not in ("best", "mean"):
        raise DecodingError(f"rule must be 'best' or 'mean', got {rule!r}")
    out = []
    for c in group_words(path, words, split_pause):
        values = [w.confidence for w in c.parts]
        confidence = float(max(values) if rule == "best" else np.mean(values))
        if confidence >= threshold:
            out.append(replace(c, confidence=confidence))
    return out


class StretchScanner:
    """Samples in, commands out: the detector and the recognizer over one recording.

    Parameters
    ----------
    recognizer : wordspot.decoding.decoder.Recognizer
    settings : ScanSettings, optional
    path : str
        Named in the commands found.

    Feed mono float samples at the recognizer's rate with :meth:`push` (any block size)
    and call :meth:`finish` at the end; both return the commands of the stretches
    completed so far. Only the samples a stretch not yet recognised can need are held.
    ``stretches`` counts the stretches recognised.
    """

    def __init__(self, recognizer, settings: ScanSettings | None = None, *, path: str = ""):
        self.recognizer = recognizer
        self.settings = settings or ScanSettings()
        self.path = path
        self.rate = recognizer.features.sample_rate
        self.detector = SpeechDetector(self.rate, self.settings.detector)
        self.stretches = 0
        self._held = np.zeros(0, dtype=np.float32)  # samples [_held_at, _held_at + len(_held))
        self._held_at = 0
        self._pushed = 0
        self._seen_final: list[FoundCommand] = []  # the complete commands of the last look
        self._early_step = int(round(self.settings.early_every * self.rate))

    def push(self, block) -> list[FoundCommand]:
        """Add the next samples; return the commands of the stretches now complete."""
        block = np.asarray(block, dtype=np.float32).reshape(-1)
        step = self._early_step
        if not step:
            self._pushed += block.shape[0]
            return self._push(block)
        found, i = [], 0
        while i < block.shape[0]:  # a look at fixed stream positions, whatever the blocks
            part = block[i : i + step - self._pushed % step]
            found += self._push(part)
            self._pushed += part.shape[0]
            i += part.shape[0]
            if self._pushed % step == 0:
                found += self._look()
        return found

    def _look(self) -> list[FoundCommand]:
        """The commands already complete in the stretch in progress; the stretch goes on after them."""
        start, now, s = self.detector.open_start, self._pushed, self.settings
        hold = int(round((s.split_pause + s.early_hold) * self.rate))
        if start is None:
            self._seen_final = []
        if start is None or now - start < hold + self._early_step:
            return []
        wave = self._held[start - self._held_at : now - self._held_at]
        result = decode_stretch(self.recognizer, wave, s.normalise_seconds)
        if result is None:
            return []
        words = judged_words(result, start / self.rate, s)
        commands = judged_commands(words, float(self.recognizer.min_confidence), s, self.path)
        limit = (now - hold) / self.rate
        complete = [c for c in commands if c.end <= limit]
        # reported once two looks in a row agree on it (a word that one look alone finds in
        # other talk is not reported)
        final = []
        for c in complete:
            if not any(_same_command(c, p) for p in self._seen_final):
                break
            final.append(c)
        self._seen_final = complete
        later = commands[len(final):]
        pad = s.detector.padding
        cut = limit - pad  # no command word before it (none ended, none begun)
        if later:
            cut = min(cut, later[0].start - pad)
        if s.command_rule != "word":  # nor into a command still being said that is weak so far
            going = [g for g in group_words(self.path, words, s.split_pause) if g.end > limit]
            if going:
                cut = min(cut, going[0].start - pad)
        if final:
            cut = max(cut, final[-1].end + min(pad, (later[0].start - final[-1].end) / 2 if later else pad))
        sample = min(int(round(cut * self.rate)), now)
        if not final and (sample - start < self._early_step or now - start < s.early_span * self.rate):
            return []  # too little to drop, or the stretch so far still short: look again later
        if sample > start:
            self.detector.cut(sample)
            drop = self.detector.keep_from - self._held_at
            if drop > 0:
                self._held = self._held[drop:]
                self._held_at += drop
        self.stretches += bool(final)
        return final

    def _push(self, block) -> list[FoundCommand]:
        self._held = np.concatenate([self._held, block])
        found = self._handle(self.detector.push(block))
        drop = self.detector.keep_from - self._held_at
        if drop > 0:
            self._held = self._held[drop:]
            self._held_at += drop
        return found

    def finish(self) -> list[FoundCommand]:
        """End of the recording: the commands of the stretch in progress (if any)."""
        return self._handle(self.detector.finish())

    @property
    def held_samples(self) -> int:
        """Samples held for stretches not yet recognised."""
        return int(self._held.shape[0])

    def _handle(self, stretches) -> list[FoundCommand]:
        found = []
        for st in stretches:
            wave = self._held[st.start - self._held_at : st.end - self._held_at]
            found.extend(recognise_stretch(self.recognizer, wave, st, self.rate, self.settings, self.path))
            self.stretches += 1
        return found


def _same_command(a: FoundCommand, b: FoundCommand, within: float = 0.05) -> bool:
    return a.words == b.words and abs(a.start - b.start) <= within and abs(a.end - b.end) <= within


def scan_file(recognizer, path, *, settings: ScanSettings | None = None, progress=None) -> ScanResult:
    """Find the commands in one audio file of any length.

    Parameters
    ----------
    recognizer : wordspot.decoding.decoder.Recognizer
        Built once with :func:`~wordspot.decoding.decoder.build_recognizer`.
    path : str or os.PathLike
    settings : ScanSettings, optional
    progress : callable, optional
        Called with the seconds of the file read so far after each block.

    Returns
    -------
    ScanResult
        Commands in time order; ``error`` set (and the commands up to the fault kept) when
        the file cannot be read.
    """
    settings = settings or ScanSettings()
    rate = recognizer.features.sample_rate
    name = os.fspath(path)
    result = ScanResult(path=name)
    try:
        reader = BlockReader(path, rate, block_seconds=settings.block_seconds)
    except AudioError as exc:
        result.error = str(exc)
        return result
    result.duration = reader.duration
    scanner = StretchScanner(recognizer, settings, path=name)
    read = 0
    try:
        with reader:
            for block in reader:
                result.commands.extend(scanner.push(block))
                read += block.shape[0]
                if progress is not None:
                    progress(read / rate)
            result.commands.extend(scanner.finish())
    except AudioError as exc:
        result.error = str(exc)
    result.stretches = scanner.stretches
    return result


def scan_files(recognizer, paths, *, settings: ScanSettings | None = None, jobs: int = 1,
               quiet: bool = True) -> list[ScanResult]:
    """Scan files in order; a progress bar per file (seconds read) unless ``quiet``.

    With ``jobs > 1`` that many files are scanned at once in threads (the search kernel
    releases the interpreter lock) and no bar is drawn.
    """
    if not (isinstance(jobs, (int, np.integer)) and jobs >= 1):
        raise DecodingError(f"jobs must be a whole number >= 1, got {jobs!r}")
    paths = [os.fspath(p) for p in paths]
    if jobs > 1 and len(paths) > 1:
        from joblib import Parallel, delayed

        return Parallel(n_jobs=jobs, prefer="threads")(
            delayed(scan_file)(recognizer, p, settings=settings) for p in paths)
    results = []
    for p in paths:
        total = _header_seconds(p)
        with ProgressBar(int(np.ceil(total)), f"scanning {os.path.basename(p)}", quiet=quiet) as bar:
            results.append(scan_file(recognizer, p, settings=settings,
                                     progress=lambda seconds: bar.update(int(seconds) - bar.done)))
    return results


def _header_seconds(path) -> float:
    from wordspot.audio.reading import audio_duration

    try:
        return audio_duration(path)
    except AudioError:
        return 0.0  # scan_file reports the problem
