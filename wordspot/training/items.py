"""The record of one training utterance and the fixed chunk size of parallel work.

The plain, noisy-copy and background-item preparations use them, so they live apart from either.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from wordspot.acoustic.graph import StateGraph

__all__ = ["CHUNK_SIZE", "TrainingItem", "Skipped"]

#: Utterances per parallel task. Fixed (independent of the number of processes) so that
#: summing per-task results in task order gives bit-identical totals however many
#: processes run.
CHUNK_SIZE = 16


@dataclass
class TrainingItem:
    """One usable utterance: where it came from, its features and its chain."""

    path: Path
    words: tuple[str, ...]
    frames: np.ndarray  # (T, D) float32
    graph: StateGraph
    background: bool = False  # a synthesised background-only item, not a recording


@dataclass(frozen=True)
class Skipped:
    """An utterance left out of training, and why."""

    path: Path
    reason: str
