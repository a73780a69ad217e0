"""Measuring a model on held-out recordings: recognise every file of a manifest, score it.

This is the glue between the decoder and the scoring maths; the command line and the
demo both call :func:`evaluate_manifest`.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field
from pathlib import Path

from wordspot.corpus import check_manifest, read_manifest
from wordspot.decoding.decoder import DecoderSettings, Recognition, build_recognizer
from wordspot.util.progress import ProgressBar
from wordspot.evaluation.reliability import expected_calibration_error, reliability_of
from wordspot.evaluation.scoring import EvaluationResult, ScoredUtterance, score_utterances

__all__ = ["ManifestEvaluation", "scored_utterance", "evaluate_utterances", "evaluate_manifest"]


@dataclass
class ManifestEvaluation:
    """Scores of one set of recordings, with what the recognizer said for each.

    Attributes
    ----------
    name : str
        The set's name (the manifest's file name without its extension).
    result : EvaluationResult
        Error counts, WER and its interval, per-word and per-speaker tables.
    recognitions : list of Recognition
        One per utterance, in manifest order.
    failed : list of (str, str)
        Files that could not be processed and why; they count as recognising nothing.
    seconds : float
        Wall-clock time of recognition.
    audio_seconds : float
        Audio recognised.
    """

    name: str
    result: EvaluationResult
    recognitions: list[Recognition] = field(repr=False)
    failed: list[tuple[str, str]]
    seconds: float
    audio_seconds: float

    @property
    def real_time_factor(self) -> float:
        """Recognition time divided by audio time (smaller is faster)."""
        return self.seconds / self.audio_seconds if self.audio_seconds > 0 else float("nan")

    @property
    def equal_error_rate(self) -> float | None:
        """EER over the word-confidence threshold (:mod:`wordspot.evaluation.detection`).

        None unless the set holds both command items and items with no command.
        """
        from wordspot.evaluation.detection import equal_error_rate_of

        return equal_error_rate_of(self.result)

    def to_dict(self) -> dict:
        """JSON-ready summary: the scoring result plus the set name, the EER and failures."""
        out = {"set": self.name}
        out.update(self.result.to_dict())
        out["equal_error_rate"] = self.equal_error_rate
        rows = reliability_of(self.result)
        out["confidence_reliability"] = None if rows is None else [r.to_dict() for r in rows]
        out["expected_calibration_error"] = None if rows is None else expected_calibration_error(rows)
        out["failed_files"] = [{"path": p, "error": e} for p, e in self.failed]
        out["recognition_seconds"] = round(self.seconds, 3)
        out["audio_seconds"] = round(self.audio_seconds, 3)
        return out


def scored_utterance(utterance, recognition: Recognition) -> ScoredUtterance:
    """What to score of one recognition: the kept words, and every word heard with its confidence."""
    heard = sorted(recognition.segments + recognition.dropped, key=lambda s: s.first_frame)
    return ScoredUtterance(str(utterance.path), utterance.speaker, tuple(utterance.words), tuple(recognition.words),
                           seconds=float(recognition.duration),
                           confidences=tuple(float(s.confidence) for s in recognition.segments),
                           heard=tuple(s.word for s in heard),
                           heard_confidences=tuple(float(s.confidence) for s in heard))


def _recognize_all(model, paths, *, settings, lexicon, prior, jobs: int, label: str,
                   quiet: bool) -> list[Recognition]:
    """Recognise files with one compiled network, drawing a progress bar as files finish."""
    rec = build_recognizer(model, settings=settings, lexicon=lexicon, prior=prior)
    out: list[Recognition] = []
    step = max(1, 4 * jobs)
    with ProgressBar(len(paths), label, quiet=quiet) as bar:
        if jobs == 1:
            for p in paths:
                out.append(rec.decode_file(p))
                bar.update()
        else:
            from joblib import Parallel, delayed

            with Parallel(n_jobs=jobs, prefer="threads") as pool:
                for i in range(0, len(paths), step):
                    chunk = paths[i:i + step]
                    out.extend(pool(delayed(rec.decode_file)(p) for p in chunk))
                    bar.update(len(chunk))
    return out


def evaluate_utterances(model, utterances, *, name: str = "set", settings: DecoderSettings | None = None,
                        lexicon=None, prior=None, jobs: int = 1, n_bootstrap: int = 1000,
                        seed: int = 0, quiet: bool = True) -> ManifestEvaluation:
    """Recognise and score a list of :class:`wordspot.corpus.Utterance`.

    Parameters
    ----------
    model : AcousticModel
    utterances : sequence of Utterance
    name : str
        Label of the set in reports.
    settings, lexicon, prior, jobs
        As for :func:`wordspot.decoding.decoder.recognize_files`; ``lexicon`` defaults to the
        model's. Every transcript word must be in it (all missing words are listed).
    n_bootstrap, seed
        Replicates and seed of the WER interval.
    quiet : bool
        No progress bar (it is drawn only on a terminal anyway).
    """
    utterances = list(utterances)
    lex = model.lexicon if lexicon is None else lexicon
    check_manifest(utterances, lex, manifest=name)
    start = time.monotonic()
    if not (isinstance(jobs, int) and jobs >= 1):
        from wordspot.errors import DecodingError

        raise DecodingError(f"jobs must be a whole number >= 1, got {jobs!r}")
    recs = _recognize_all(model, [u.path for u in utterances], settings=settings, lexicon=lexicon,
                          prior=prior, jobs=jobs, label=f"recognising {name}", quiet=quiet)
    seconds = time.monotonic() - start
    scored = [scored_utterance(u, r) for u, r in zip(utterances, recs)]
    result = score_utterances(scored, n_bootstrap=n_bootstrap, seed=seed)
    failed = [(str(r.path), r.error) for r in recs if r.error]
    audio = float(sum(r.duration for r in recs))
    return ManifestEvaluation(name, result, recs, failed, seconds, audio)


def evaluate_manifest(model, manifest, *, settings: DecoderSettings | None = None, lexicon=None,
                      prior=None, jobs: int = 1, n_bootstrap: int = 1000, seed: int = 0,
                      name: str | None = None, quiet: bool = True) -> ManifestEvaluation:
    """Recognise every file a manifest lists and score the words against its transcripts.

    Raises
    ------
    ManifestError
        The manifest is malformed, names missing files, or uses words the recognition
        lexicon lacks (all problems listed at once).
    """
    utterances = read_manifest(manifest)
    return evaluate_utterances(model, utterances, name=name or Path(manifest).stem, settings=settings,
                               lexicon=lexicon, prior=prior, jobs=jobs, n_bootstrap=n_bootstrap, seed=seed,
                               quiet=quiet)
