"""Words: the pronunciation lexicon (words to phone sequences) and the word-pair
(bigram) prior with its weight and insertion penalty.
"""

__all__: list[str] = []
