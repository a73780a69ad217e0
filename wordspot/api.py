"""The Python interface: the same jobs as the command line.

>>> import wordspot
>>> model = wordspot.train("my-takes/train.csv", "lexicon/bakery.txt", out="bakery.model")  # doctest: +SKIP
>>> model = wordspot.load("bakery.model")                                                  # doctest: +SKIP
>>> [r.text for r in wordspot.recognize(model, ["oven-start.wav"])]                        # doctest: +SKIP
['oven start']
>>> wordspot.evaluate(model, "my-takes/held-out.csv").result.wer                           # doctest: +SKIP
0.012
>>> [(c.start, c.text) for c in wordspot.scan(model, "morning.flac")[0].commands]           # doctest: +SKIP
[(83.45, 'oven start'), (312.9, 'timer five minutes')]
"""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

from wordspot.util.threads import with_one_blas_thread

__all__ = ["train", "load", "recognize", "evaluate", "scan", "evaluate_scan"]


def _lexicon(lexicon):
    from wordspot.language.lexicon import Lexicon, read_lexicon

    if lexicon is None or isinstance(lexicon, Lexicon):
        return lexicon
    return read_lexicon(lexicon)


def _model(model):
    from wordspot.model import AcousticModel, load_model

    return model if isinstance(model, AcousticModel) else load_model(model)


def _settings(settings, single_word, min_confidence):
    from wordspot.decoding.decoder import DecoderSettings

    settings = settings or DecoderSettings()
    if min_confidence is not None:
        settings = replace(settings, min_confidence=min_confidence)
    return replace(settings, single_word=True) if single_word else settings


@with_one_blas_thread
def train(manifest, lexicon, *, out=None, start=None, config=None, features=None, calibration=True,
          quiet: bool = True):
    """Train a model from a manifest of recordings and a lexicon (``wordspot train``).

    Parameters
    ----------
    manifest : str or path
        CSV file ``path,transcript,speaker``.
    lexicon : str, path or Lexicon
    out : str or path, optional
        Write the model file here (atomically).
    start : str, path or AcousticModel, optional
        Adapt this model (a file, or ``"starter"`` / ``"starter-8k"``) to the recordings,
        as ``wordspot train`` does by default; ``None`` trains from scratch.
    config : TrainingConfig or AdaptationConfig, optional
        How to train from scratch (``TrainingConfig``) or adapt (``AdaptationConfig``).
        Adapting also tunes the starting model's state scorer to the recordings when it
        has one; ``AdaptationConfig(scorer=None)`` keeps it as it is.
        ``AdaptationConfig(pronunciations=LearningConfig(enabled=True))`` adds pronunciations
        learned from the recordings (:mod:`wordspot.training.pronunciations`; off by default).
    features : wordspot.audio.features.FeatureSettings, optional
        From scratch only: the feature settings (an adapted model keeps its start's).
    calibration : bool or CalibrationConfig
        Fit the word-confidence calibration on recordings held out of a first training
        (:mod:`wordspot.evaluation.calibrate`); False: none (heuristic confidences). Unless
        the configuration says ``refit``, an adapted model is adapted again on every
        recording, while a model trained from scratch is the one trained without the
        held-out share (training twice takes twice as long).
    quiet : bool
        No progress bars.

    Returns
    -------
    AcousticModel
    """
    from wordspot.corpus import read_manifest
    from wordspot.evaluation.calibrate import CalibrationConfig, train_calibrated
    from wordspot.model import save_model

    utterances = read_manifest(manifest)
    lex = _lexicon(lexicon)
    if start is None:
        from wordspot.training.trainer import TrainingConfig
        from wordspot.training.trainer import train as _train

        def fit(utts):
            return _train(utts, lex, settings=features, config=config or TrainingConfig(), manifest=manifest,
                          quiet=quiet)
    else:
        from wordspot.training.adapt import AdaptationConfig, adapting

        start_model = _model(start)
        fit = adapting(start_model, lex, config=config or AdaptationConfig(), manifest=manifest, quiet=quiet)
    if calibration is False or calibration is None:
        model, _summary = fit(utterances)
    else:
        cal = calibration if isinstance(calibration, CalibrationConfig) else CalibrationConfig()
        model, _summary = train_calibrated(fit, utterances, config=cal.decided(adapting=start is not None),
                                           quiet=quiet, fallback=None if start is None else
                                           getattr(start_model, "calibration", None),
                                           jobs=getattr(config, "jobs", 1))
    if out is not None:
        save_model(model, Path(out))
    return model


def load(path):
    """Load a model file written by :func:`train` or ``wordspot train``."""
    from wordspot.model import load_model

    return load_model(path)


@with_one_blas_thread
def recognize(model, paths, *, lexicon=None, prior=None, single_word: bool = False, settings=None,
              jobs: int = 1, min_confidence: float | None = None):
    """Recognise audio files (``wordspot recognize``); one Recognition per file, in order.

    ``model`` is an AcousticModel or a model file; ``lexicon`` (a Lexicon or a file)
    replaces the model's vocabulary; ``prior`` is a BigramPrior or a prior file.
    ``min_confidence`` drops words below it (into ``Recognition.dropped``); None: the
    default of ``DecoderSettings.min_confidence``.
    """
    from wordspot.decoding.decoder import recognize_files

    if isinstance(paths, (str, Path)):
        paths = [paths]
    return recognize_files(_model(model), paths, settings=_settings(settings, single_word, min_confidence),
                           lexicon=_lexicon(lexicon), prior=prior, jobs=jobs)


@with_one_blas_thread
def evaluate(model, manifest, *, lexicon=None, prior=None, single_word: bool = False, settings=None,
             jobs: int = 1, n_bootstrap: int = 1000, min_confidence: float | None = None):
    """Word error rate of a model on a manifest (``wordspot evaluate``); ``min_confidence`` as for `recognize`.

    Returns
    -------
    wordspot.evaluation.run.ManifestEvaluation
        ``.result.wer``, ``.result.wer_ci95``, tables, and each file's recognition.
    """
    from wordspot.evaluation.run import evaluate_manifest

    return evaluate_manifest(_model(model), manifest, settings=_settings(settings, single_word, min_confidence),
                             lexicon=_lexicon(lexicon), prior=prior, jobs=jobs, n_bootstrap=n_bootstrap)


def _scan_settings(scan_settings, min_confidence):
    from wordspot.stream.scan import ScanSettings

    scan_settings = scan_settings or ScanSettings()
    if min_confidence is None:
        return scan_settings
    # the threshold given judges whole commands too (with the "best" and "mean" rules)
    return replace(scan_settings, min_confidence=min_confidence, command_confidence=min_confidence)


@with_one_blas_thread
def scan(model, paths, *, lexicon=None, prior=None, settings=None, scan_settings=None, min_confidence=None,
         jobs: int = 1, quiet: bool = True):
    """Find the commands in recordings of any length (``wordspot scan``).

    Parameters
    ----------
    model : AcousticModel or model file
    paths : path or list of paths
    lexicon, prior, settings
        As for :func:`recognize`.
    scan_settings : wordspot.stream.scan.ScanSettings, optional
        Speech detection, block size, confidence threshold, pause that splits commands.
    min_confidence : float, optional
        Overrides ``scan_settings.min_confidence`` and ``command_confidence``: commands
        below it are dropped (words below it, with ``command_rule="word"``).

    Returns
    -------
    list of wordspot.stream.scan.ScanResult
        One per file, in order: ``.commands`` (start, end, words, confidence), ``.duration``
        and ``.error`` (set when the file could not be read).
    """
    from wordspot.decoding.decoder import build_recognizer
    from wordspot.stream.scan import scan_files

    if isinstance(paths, (str, Path)):
        paths = [paths]
    recognizer = build_recognizer(_model(model), settings=settings, lexicon=_lexicon(lexicon), prior=prior)
    return scan_files(recognizer, paths, settings=_scan_settings(scan_settings, min_confidence), jobs=jobs,
                      quiet=quiet)


@with_one_blas_thread
def evaluate_scan(model, labels, *, lexicon=None, prior=None, settings=None, scan_settings=None,
                  min_confidence=None, jobs: int = 1, quiet: bool = True):
    """Scan the recordings of a time-label file and score the commands found.

    Returns
    -------
    wordspot.evaluation.scan_run.ScanEvaluation
        ``.score`` (hits, misses, false accepts per hour, boundary errors) and each file's
        result.
    """
    from wordspot.decoding.decoder import build_recognizer
    from wordspot.evaluation.scan_run import evaluate_scan as _evaluate_scan

    recognizer = build_recognizer(_model(model), settings=settings, lexicon=_lexicon(lexicon), prior=prior)
    return _evaluate_scan(recognizer, labels, settings=_scan_settings(scan_settings, min_confidence), jobs=jobs,
                          quiet=quiet)
