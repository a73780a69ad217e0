"""The acoustic model as one object, and (to come) its single-file storage.

An :class:`AcousticModel` holds everything recognition needs: the feature settings used
in training (so recognition always computes the same features), the units with their
transitions, the mixtures, the lexicon, and the word-pair counts the grammar prior is
estimated from.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from wordspot.features import FeatureSettings
from wordspot.gmm import Mixtures
from wordspot.grammar import BigramCounts
from wordspot.lexicon import Lexicon
from wordspot.units import UnitSet

__all__ = ["AcousticModel"]


@dataclass
class AcousticModel:
    """A trained recognizer.

    Attributes
    ----------
    features : FeatureSettings
    units : UnitSet
    mixtures : Mixtures
        ``mixtures.means.shape[2]`` equals ``features.dim``.
    lexicon : Lexicon
    bigrams : BigramCounts
        Word-pair counts of the training transcripts.
    info : dict
        JSON-serialisable facts about training (date, data, passes, log-likelihoods).
    """

    features: FeatureSettings
    units: UnitSet
    mixtures: Mixtures
    lexicon: Lexicon
    bigrams: BigramCounts
    info: dict = field(default_factory=dict)
