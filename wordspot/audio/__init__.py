"""Sound in, feature frames out: reading and resampling audio files, MFCC features,
noise and speed augmentation, and the per-thread work arrays they share.
"""

__all__: list[str] = []
