"""Training: preparing features and state chains from a manifest, noisy and speed copies,
and embedded Baum-Welch re-estimation with mixture growth.
"""

__all__: list[str] = []
