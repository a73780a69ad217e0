"""The starter models that ship with wordspot, and how to find them by name.

``starter`` (16 kHz) and ``starter-8k`` (telephone band) are phone models trained on a
broad synthetic corpus; ``wordspot train`` adapts one of them to a user's recordings.
"""

from __future__ import annotations

from pathlib import Path

__all__ = ["STARTER_FILES", "starter_path", "is_starter_name"]

#: Name given on the command line -> file in this folder.
STARTER_FILES = {"starter": "starter-16k.model", "starter-8k": "starter-8k.model"}

_HERE = Path(__file__).resolve().parent


def is_starter_name(name) -> bool:
    """True when ``name`` names a starter model (``starter`` or ``starter-8k``)."""
    return isinstance(name, str) and name in STARTER_FILES


def starter_path(name: str) -> Path:
    """The packaged file of starter model ``name`` (it may be missing in a source checkout)."""
    return _HERE / STARTER_FILES[name]
