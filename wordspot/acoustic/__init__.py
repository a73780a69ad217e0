"""Phone models: the unit inventory and three-state topology, state graphs, diagonal
Gaussian mixtures, transition estimates and the compiled HMM kernels beside their references.
"""

__all__: list[str] = []
