"""Measuring: recognising a manifest, aligning words, error counts and tables, and the
report files (CSV, text, pictures).
"""

__all__: list[str] = []
