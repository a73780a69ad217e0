"""The exceptions and warnings that wordspot raises.

Every error a user can cause (a bad file, a missing word, a damaged model) is one of
these, with a message that names the file and says what to do. The command line prints
the message on one line; ``--debug`` shows the traceback.
"""

__all__ = [
    "WordspotError",
    "AudioError",
    "FeatureError",
    "LexiconError",
    "ManifestError",
    "ModelFileError",
    "TrainingError",
    "DecodingError",
    "GrammarError",
    "ScoringError",
    "AugmentError",
    "WordspotWarning",
    "AudioWarning",
    "TrainingWarning",
]


class WordspotError(Exception):
    """Base class of every error wordspot raises on purpose."""


class AudioError(WordspotError, ValueError):
    """An audio file is missing, unreadable, empty, too short or holds invalid samples."""


class FeatureError(WordspotError, ValueError):
    """Feature settings are invalid or do not fit the audio."""


class LexiconError(WordspotError, ValueError):
    """A lexicon file or entry is malformed, or a word has no pronunciation."""


class ManifestError(WordspotError, ValueError):
    """A manifest is malformed or names files or words that are not there."""


class ModelFileError(WordspotError, ValueError):
    """A model file is missing, truncated, altered or of an unknown format version."""


class TrainingError(WordspotError, RuntimeError):
    """Training cannot go on (for example, no usable utterance is left)."""


class DecodingError(WordspotError, ValueError):
    """A recognition network or decoder setting is invalid."""


class GrammarError(WordspotError, ValueError):
    """A grammar prior file or setting is invalid."""


class ScoringError(WordspotError, ValueError):
    """Scoring input is invalid (no utterances, no reference words, a bad setting)."""


class AugmentError(WordspotError, ValueError):
    """A noise augmentation setting or input is invalid (bad SNR range, no speech power)."""


class WordspotWarning(UserWarning):
    """Base class of wordspot's warnings."""


class AudioWarning(WordspotWarning):
    """Audio is usable but suspicious (digital silence, clipping)."""


class TrainingWarning(WordspotWarning):
    """An utterance was skipped or a unit saw no data during training."""
