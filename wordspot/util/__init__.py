"""Small helpers every stage uses: reading user text files and the text progress bar.
"""

__all__: list[str] = []
