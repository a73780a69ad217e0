"""wordspot: train and run a small-vocabulary spoken-command recognizer on your own recordings.

The jobs of the command line are here as functions: :func:`train`, :func:`load`,
:func:`recognize`, :func:`evaluate`, :func:`scan` and :func:`evaluate_scan` (see
:mod:`wordspot.api`).
"""

__version__ = "0.1.0"

__all__ = ["train", "load", "recognize", "evaluate", "scan", "evaluate_scan", "__version__"]


def __getattr__(name):
    # Imported on first use so that `wordspot --help` stays quick.
    if name in ("train", "load", "recognize", "evaluate", "scan", "evaluate_scan"):
        from wordspot import api

        return getattr(api, name)
    raise AttributeError(f"module 'wordspot' has no attribute {name!r}")
