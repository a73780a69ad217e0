"""Long recordings: reading them in blocks, finding the stretches with speech, and
recognising each stretch, with memory that stays flat in the recording's length.

``blocks`` reads and resamples a file piece by piece, ``detector`` finds speech stretches
(energy against an adaptive noise floor, the same stretches whatever the block size), and
``scan`` runs the ordinary recognizer on each stretch and turns its words into timed
commands. ``live`` does the same for live audio as it arrives (a causal detector, any input
rate and block size), and ``pipe`` reads that audio from a byte stream (WAV or raw PCM).
"""
