"""wordspot: train and run a small-vocabulary spoken-command recognizer on your own recordings."""

__version__ = "0.1.0"
