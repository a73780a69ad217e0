"""Recognition: compiling lexicon, phone models and grammar into a state network, and
token-passing Viterbi search with beam pruning over it (compiled kernels beside references).
"""

__all__: list[str] = []
