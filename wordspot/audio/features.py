"""MFCC features with deltas and per-utterance cepstral mean normalisation.

The pipeline for one waveform (all frames at once, frames x features):

1. pre-emphasis ``y[n] - a * y[n-1]`` (the first sample kept as it is);
2. frames of ``window_ms`` every ``hop_ms`` (no padding: the first frame starts at sample 0),
   a symmetric Hamming window, zero-padded to the next power of two for the FFT;
3. power spectrum ``|FFT|^2``;
4. triangular mel filters (Slaney 1998 scale and area normalisation, as librosa computes
   them by default; or the O'Shaughnessy 1987 scale ``2595 log10(1 + f/700)``);
5. natural log with a floor (``1e-10``) so digital silence stays finite;
6. DCT-II with orthonormal scaling, first ``n_cepstra`` coefficients (c0 included);
7. liftering ``c_n * (1 + L/2 sin(pi n / L))`` for n = 0, 1, ... (Juang, Rabiner &
   Wilpon 1987; c0 is left as it is);
8. deltas and delta-deltas by linear regression over +-``delta_window`` frames
   ``d_t = sum_n n (c_{t+n} - c_{t-n}) / (2 sum_n n^2)``, the edge frames repeated;
9. per-utterance mean normalisation of every column (``cmn``), and optionally division by
   each column's standard deviation (``cvn``: cepstral mean and variance normalisation);
10. optionally the static c0 column dropped (``static_c0=False``; its deltas stay), since
   c0 mostly follows loudness and recording level.

Vocal tract length perturbation (for training-time augmentation): ``compute_features(...,
warp=a)`` scales the frequency axis of the spectrum by ``a`` before the mel filters, so a
talker's formants move up (``a > 1``) or down (``a < 1``); the warp is piecewise linear so
that the top of the band still maps to the top (see :func:`warp_frequencies`). ``warp=1``
gives exactly the unwarped features. The warp is not a setting a model carries: recognition
may choose one per recording (:mod:`wordspot.audio.voice_warp`), from the features of
several factors computed over one power spectrum (:func:`features_for_warps`).

The settings travel with a model (:meth:`FeatureSettings.to_dict`), so recognition always
computes features the way training did.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass
from typing import Any, Mapping

import numpy as np

from wordspot.errors import FeatureError
from wordspot.audio.workspace import work_array

__all__ = [
    "FeatureSettings",
    "compute_features",
    "file_features",
    "mel_filterbank",
    "hz_to_mel",
    "mel_to_hz",
    "deltas",
    "lifter_weights",
    "dct_matrix",
    "LOG_FLOOR",
    "warp_frequencies",
    "log_mel_bands",
    "features_for_warps",
]

#: Floor under the mel energies before the log, so silence gives a finite value.
LOG_FLOOR = 1e-10

_MEL_SCALES = ("slaney", "oshaughnessy")


@dataclass(frozen=True)
class FeatureSettings:
    """How features are computed; a model carries these so recognition matches training.

    Parameters
    ----------
    sample_rate : int
        Model rate in Hz (16000; 8000 for telephone audio).
    preemphasis : float in [0, 1)
        Pre-emphasis coefficient (0 turns it off).
    window_ms, hop_ms : float > 0
        Analysis window length and step in milliseconds.
    n_mels : int > 0
        Number of triangular mel filters.
    n_cepstra : int in [1, n_mels]
        Cepstral coefficients kept, c0 included.
    lifter : float >= 0
        Cepstral lifter length L (0 turns it off).
    delta_window : int > 0
        Half-width of the delta regression (frames each side).
    delta_order : {0, 1, 2}
        0: static cepstra only; 1: plus deltas; 2: plus delta-deltas.
    cmn : bool
        Subtract each utterance's mean from every feature column.
    cvn : bool
        Also divide every column by its standard deviation over the utterance (needs
        ``cmn``); evens out how loud and how "bright" a talker is, and how much noise has
        flattened the spectrum. On by default since it cut 10 dB single-word errors on
        held-out voices from 42.5% to 35.6% (clean 1.1% to 0.4%;
        docs/experiments/2026-12-02-training-recipe.md).
    static_c0 : bool
        Keep the static c0 column (False drops it; its deltas are kept).
    fmin : float >= 0
        Lowest filter edge in Hz.
    fmax : float or None
        Highest filter edge in Hz; None means the Nyquist frequency.
    mel_scale : {"slaney", "oshaughnessy"}
        Hz-to-mel mapping of the filter centres.
    """

    sample_rate: int = 16000
    preemphasis: float = 0.97
    window_ms: float = 25.0
    hop_ms: float = 10.0
    n_mels: int = 26
    n_cepstra: int = 13
    lifter: float = 22.0
    delta_window: int = 2
    delta_order: int = 2
    cmn: bool = True
    cvn: bool = True
    static_c0: bool = True
    fmin: float = 0.0
    fmax: float | None = None
    mel_scale: str = "slaney"

    def __post_init__(self) -> None:
        _validate(self)
        # plain Python types, so to_dict() always serialises (no numpy scalars in a model file)
        for name in ("sample_rate", "n_mels", "n_cepstra", "delta_window", "delta_order"):
            object.__setattr__(self, name, int(getattr(self, name)))
        for name in ("preemphasis", "window_ms", "hop_ms", "lifter", "fmin"):
            object.__setattr__(self, name, float(getattr(self, name)))
        for name in ("cmn", "cvn", "static_c0"):
            object.__setattr__(self, name, bool(getattr(self, name)))
        object.__setattr__(self, "fmax", None if self.fmax is None else float(self.fmax))
        object.__setattr__(self, "mel_scale", str(self.mel_scale))

    @property
    def dim(self) -> int:
        """Values per frame: ``n_cepstra * (1 + delta_order)`` (39 by default), one less
        without the static c0."""
        return self.n_cepstra * (1 + self.delta_order) - (0 if self.static_c0 else 1)

    @property
    def window_length(self) -> int:
        """Window length in samples."""
        return int(round(self.sample_rate * self.window_ms / 1000.0))

    @property
    def hop_length(self) -> int:
        """Step between frames in samples."""
        return int(round(self.sample_rate * self.hop_ms / 1000.0))

    @property
    def n_fft(self) -> int:
        """FFT size: the next power of two at or above the window length."""
        return 1 << max(0, (self.window_length - 1).bit_length())

    @property
    def upper_frequency(self) -> float:
        """``fmax``, or the Nyquist frequency when ``fmax`` is None."""
        return self.sample_rate / 2.0 if self.fmax is None else float(self.fmax)

    @property
    def frame_rate(self) -> float:
        """Frames per second."""
        return self.sample_rate / self.hop_length

    def to_dict(self) -> dict[str, Any]:
        """Plain dictionary of every setting (for a model file)."""
        return dataclasses.asdict(self)

    @classmethod
    def from_dict(cls, data: Mapping[str, Any]) -> "FeatureSettings":
        """Build settings from :meth:`to_dict` output; missing keys take the defaults.

        A dictionary from an older model, written before ``cvn`` and ``static_c0`` existed,
        gets ``cvn=False`` and ``static_c0=True``: the features that model was trained on,
        whatever today's defaults are.

        Raises
        ------
        FeatureError
            Not a mapping, unknown keys, or values of the wrong type or range.
        """
        if not isinstance(data, Mapping):
            raise FeatureError(f"feature settings must be a mapping, got {type(data).__name__}")
        known = {f.name for f in dataclasses.fields(cls)}
        unknown = sorted(str(k) for k in data if k not in known)
        if unknown:
            raise FeatureError(
                f"unknown feature setting(s) {', '.join(unknown)}; known: {', '.join(sorted(known))}"
            )
        values = dict(data)
        for name, old in _OLDER_MODEL_VALUES.items():
            values.setdefault(name, old)
        return cls(**values)


#: Values that settings written before a setting existed stand for (kept by from_dict).
_OLDER_MODEL_VALUES = {"cvn": False, "static_c0": True}


def _is_int(value) -> bool:
    return isinstance(value, (int, np.integer)) and not isinstance(value, (bool, np.bool_))


def _is_real(value) -> bool:
    return (_is_int(value) or isinstance(value, (float, np.floating))) and math.isfinite(float(value))


def _validate(s: FeatureSettings) -> None:
    def bad(name: str, rule: str) -> FeatureError:
        return FeatureError(f"feature setting {name}={getattr(s, name)!r} is invalid: {rule}")

    for name in ("sample_rate", "n_mels", "n_cepstra", "delta_window", "delta_order"):
        if not _is_int(getattr(s, name)):
            raise bad(name, "must be a whole number")
    for name in ("preemphasis", "window_ms", "hop_ms", "lifter", "fmin"):
        if not _is_real(getattr(s, name)):
            raise bad(name, "must be a finite number")
    for name in ("cmn", "cvn", "static_c0"):
        if not isinstance(getattr(s, name), (bool, np.bool_)):
            raise bad(name, "must be true or false")
    if s.cvn and not s.cmn:
        raise bad("cvn", "needs cmn=True (variance normalisation works on mean-normalised columns); "
                  "with cmn=False pass cvn=False too")
    if not s.static_c0 and s.delta_order == 0 and s.n_cepstra == 1:
        raise bad("static_c0", "dropping c0 would leave no features (keep c0 or add deltas)")
    if s.sample_rate < 1000 or s.sample_rate > 192000:
        raise bad("sample_rate", "must be between 1000 and 192000 Hz (16000 is usual)")
    if not 0.0 <= s.preemphasis < 1.0:
        raise bad("preemphasis", "must be in [0, 1) (0.97 is usual)")
    if s.window_ms <= 0 or s.window_length < 2:
        raise bad("window_ms", "must span at least two samples (25 ms is usual)")
    if s.hop_ms <= 0 or s.hop_length < 1:
        raise bad("hop_ms", "must span at least one sample (10 ms is usual)")
    if s.n_mels < 1 or s.n_mels > s.n_fft // 2:
        raise bad("n_mels", f"must be between 1 and {s.n_fft // 2} (26 is usual)")
    if not 1 <= s.n_cepstra <= s.n_mels:
        raise bad("n_cepstra", f"must be between 1 and n_mels={s.n_mels} (13 is usual)")
    if s.lifter < 0:
        raise bad("lifter", "must be 0 (off) or positive (22 is usual)")
    if s.delta_window < 1:
        raise bad("delta_window", "must be at least 1 (2 is usual)")
    if s.delta_order not in (0, 1, 2):
        raise bad("delta_order", "must be 0, 1 or 2 (2 is usual)")
    if s.mel_scale not in _MEL_SCALES:
        raise bad("mel_scale", f"must be one of {', '.join(_MEL_SCALES)}")
    nyquist = s.sample_rate / 2.0
    if s.fmax is not None and not _is_real(s.fmax):
        raise bad("fmax", "must be a number of Hz or null (Nyquist)")
    if not 0.0 <= s.fmin < s.upper_frequency <= nyquist:
        raise FeatureError(
            f"feature settings fmin={s.fmin!r}, fmax={s.fmax!r} are invalid: need "
            f"0 <= fmin < fmax <= {nyquist:g} Hz (half the sample rate)"
        )


# ----------------------------------------------------------------------------- mel scale


# Slaney's mel scale (Slaney 1998, as librosa computes it): linear below 1000 Hz at
# 200/3 Hz a mel, logarithmic above with a step of log(6.4)/27 per mel.
_SLANEY_HZ_PER_MEL = 200.0 / 3.0
_SLANEY_LOG_HZ = 1000.0
_SLANEY_LOG_MEL = _SLANEY_LOG_HZ / _SLANEY_HZ_PER_MEL
_SLANEY_LOG_STEP = math.log(6.4) / 27.0


def hz_to_mel(frequencies, *, scale: str = "slaney") -> np.ndarray:
    """Convert Hz to mel.

    ``"slaney"``: linear below 1000 Hz (200/3 Hz per mel), logarithmic above, 1000 Hz = 15
    mel (Slaney 1998, Auditory Toolbox; the scale librosa uses by default).
    ``"oshaughnessy"``: ``2595 log10(1 + f/700)`` (O'Shaughnessy 1987), 1000 Hz ~ 1000 mel.
    """
    f = np.asarray(frequencies, dtype=np.float64)
    if scale == "oshaughnessy":
        return 2595.0 * np.log10(1.0 + f / 700.0)
    if scale != "slaney":
        raise FeatureError(f"mel scale {scale!r} is unknown; use one of {', '.join(_MEL_SCALES)}")
    linear = f / _SLANEY_HZ_PER_MEL
    logpart = _SLANEY_LOG_MEL + np.log(np.maximum(f, _SLANEY_LOG_HZ) / _SLANEY_LOG_HZ) / _SLANEY_LOG_STEP
    return np.where(f >= _SLANEY_LOG_HZ, logpart, linear)


def mel_to_hz(mels, *, scale: str = "slaney") -> np.ndarray:
    """Inverse of :func:`hz_to_mel`."""
    m = np.asarray(mels, dtype=np.float64)
    if scale == "oshaughnessy":
        return 700.0 * (10.0 ** (m / 2595.0) - 1.0)
    if scale != "slaney":
        raise FeatureError(f"mel scale {scale!r} is unknown; use one of {', '.join(_MEL_SCALES)}")
    logpart = _SLANEY_LOG_HZ * np.exp(_SLANEY_LOG_STEP * (np.maximum(m, _SLANEY_LOG_MEL) - _SLANEY_LOG_MEL))
    return np.where(m >= _SLANEY_LOG_MEL, logpart, _SLANEY_HZ_PER_MEL * m)


def warp_frequencies(frequencies, factor: float, *, upper: float, knee: float = 0.85) -> np.ndarray:
    """Piecewise-linear frequency warp for vocal tract length perturbation.

    ``f -> factor * f`` up to a knee at ``knee * upper * min(1, 1/factor)`` Hz, then a
    straight line to ``upper -> upper``, so the warped axis still ends at the top of the
    band (common practice for training-time vocal tract length warping). ``factor = 1`` is
    the identity; the map is increasing for any factor > 0.

    Parameters
    ----------
    frequencies : array of Hz in [0, upper]
    factor : float > 0
        Above 1 moves spectral features (formants, tones) up; below 1 moves them down.
    upper : float > 0
        Top of the band in Hz (the Nyquist frequency for a filterbank).
    """
    f = np.asarray(frequencies, dtype=np.float64)
    if not (_is_real(factor) and factor > 0):
        raise FeatureError(f"warp factor must be a number > 0 (1 = no warp), got {factor!r}")
    if factor == 1.0:
        return f.copy()
    bend = knee * upper * min(1.0, 1.0 / factor)
    slope = (upper - factor * bend) / (upper - bend)
    return np.where(f <= bend, factor * f, factor * bend + slope * (f - bend))


def mel_filterbank(settings: FeatureSettings, *, warp: float = 1.0) -> np.ndarray:
    """Triangular mel filters over the FFT bins, each normalised to unit area in Hz.

    With ``warp != 1`` every FFT bin is placed at its warped frequency
    (:func:`warp_frequencies` up to the Nyquist frequency) before the triangles are laid
    over it: energy at ``f`` Hz lands in the band around ``warp * f``.

    Returns
    -------
    np.ndarray, shape (n_fft // 2 + 1, n_mels), float64
        Multiply a (T, bins) power spectrum by this to get (T, n_mels) band energies.
    """
    s = settings
    bin_hz = np.linspace(0.0, s.sample_rate / 2.0, s.n_fft // 2 + 1)
    if warp != 1.0:
        bin_hz = warp_frequencies(bin_hz, warp, upper=s.sample_rate / 2.0)
    lo, hi = hz_to_mel(s.fmin, scale=s.mel_scale), hz_to_mel(s.upper_frequency, scale=s.mel_scale)
    edges_hz = mel_to_hz(np.linspace(lo, hi, s.n_mels + 2), scale=s.mel_scale)
    left, centre, right = edges_hz[:-2, None], edges_hz[1:-1, None], edges_hz[2:, None]
    rising = (bin_hz[None, :] - left) / (centre - left)
    falling = (right - bin_hz[None, :]) / (right - centre)
    weights = np.maximum(0.0, np.minimum(rising, falling))
    weights *= (2.0 / (right - left))
    return np.ascontiguousarray(weights.T)


# ----------------------------------------------------------------------------- pieces


def dct_matrix(n_in: int, n_out: int) -> np.ndarray:
    """The first ``n_out`` orthonormal DCT-II basis vectors as columns, shape (n_in, n_out).

    ``x @ dct_matrix(N, K)`` gives ``X_k = s_k sum_n x_n cos(pi k (2n + 1) / (2N))`` for
    k < K, with ``s_0 = sqrt(1/N)`` and ``s_k = sqrt(2/N)`` otherwise: the DCT-II with
    orthonormal scaling. A product with the K columns needed costs less than a full
    transform of N values and needs no FFT library at recognition time.
    """
    n = np.arange(n_in, dtype=np.float64)
    k = np.arange(n_out, dtype=np.float64)
    basis = np.cos(np.pi * np.outer(2.0 * n + 1.0, k) / (2.0 * n_in))
    scale = np.full(n_out, math.sqrt(2.0 / n_in))
    scale[:1] = math.sqrt(1.0 / n_in)
    return np.ascontiguousarray(basis * scale)


def lifter_weights(n_cepstra: int, lifter: float) -> np.ndarray:
    """Weights ``1 + L/2 sin(pi n / L)`` for n = 0 .. n_cepstra-1 (ones when L = 0)."""
    n = np.arange(n_cepstra, dtype=np.float64)
    if lifter <= 0:
        return np.ones(n_cepstra)
    return 1.0 + (lifter / 2.0) * np.sin(np.pi * n / lifter)


def deltas(frames: np.ndarray, *, window: int = 2) -> np.ndarray:
    """Regression deltas over +-``window`` frames, edge frames repeated.

    ``d_t = sum_{n=1..N} n (c_{t+n} - c_{t-n}) / (2 sum_{n=1..N} n^2)``.

    Parameters
    ----------
    frames : np.ndarray, shape (T, D)
    window : int > 0

    Returns
    -------
    np.ndarray, shape (T, D), same dtype as ``frames``
    """
    frames = np.asarray(frames)
    if frames.ndim != 2:
        raise FeatureError(f"deltas need a (frames, features) array, got shape {frames.shape}")
    if not _is_int(window) or window < 1:
        raise FeatureError(f"delta window must be a whole number >= 1, got {window!r}")
    T = frames.shape[0]
    padded = np.concatenate(
        [np.repeat(frames[:1], window, axis=0), frames, np.repeat(frames[-1:], window, axis=0)]
    ) if T else frames
    out = np.zeros_like(frames, dtype=np.float64)
    for n in range(1, window + 1):
        out += n * (padded[window + n : window + n + T] - padded[window - n : window - n + T])
    out /= 2.0 * sum(n * n for n in range(1, window + 1))
    return out.astype(frames.dtype, copy=False)


def _frames(wave: np.ndarray, length: int, hop: int) -> np.ndarray:
    n = 1 + (wave.shape[0] - length) // hop
    view = np.lib.stride_tricks.sliding_window_view(wave, length)
    return view[: (n - 1) * hop + 1 : hop]


# ----------------------------------------------------------------------------- entry points


def _check_wave(wave, settings: FeatureSettings) -> np.ndarray:
    if not isinstance(settings, FeatureSettings):
        raise FeatureError(f"settings must be a FeatureSettings, got {type(settings).__name__}")
    try:
        arr = np.asarray(wave)
    except (TypeError, ValueError) as exc:
        raise FeatureError(f"waveform is not an array of numbers ({exc})") from None
    if arr.dtype.kind not in "biuf":
        raise FeatureError(f"waveform must hold real numbers, got dtype {arr.dtype}")
    if arr.ndim != 1:
        raise FeatureError(
            f"waveform must be one-dimensional (mono samples), got shape {arr.shape}; "
            "load files with wordspot.audio.reading.load_audio, which downmixes"
        )
    if arr.shape[0] < settings.window_length:
        raise FeatureError(
            f"waveform has {arr.shape[0]} samples, fewer than one {settings.window_ms:g} ms "
            f"window ({settings.window_length} samples at {settings.sample_rate} Hz)"
        )
    arr = arr.astype(np.float64)
    if not np.all(np.isfinite(arr)):
        raise FeatureError("waveform holds NaN or infinite samples; the audio is damaged")
    return arr


def compute_features(wave, settings: FeatureSettings | None = None, *, warp: float = 1.0) -> np.ndarray:
    """Compute MFCC features (with deltas and mean normalisation as ``settings`` say).

    Parameters
    ----------
    wave : np.ndarray, shape (n,)
        Mono samples at ``settings.sample_rate``, n >= one window.
    settings : FeatureSettings, optional
        Defaults to ``FeatureSettings()``.
    warp : float > 0
        Frequency warp factor for training-time augmentation (1: none; see
        :func:`mel_filterbank`).

    Returns
    -------
    np.ndarray, shape (T, settings.dim), float32
        One row per frame, ``T = 1 + (n - window_length) // hop_length``; columns are the
        cepstra c0..c{n_cepstra-1} (c1.. when ``static_c0`` is off), then their deltas,
        then delta-deltas.

    Raises
    ------
    FeatureError
        Not a 1-D real array, shorter than one window, NaN or infinite samples, or a warp
        factor that is not a number > 0.
    """
    s = FeatureSettings() if settings is None else settings
    y = _check_wave(wave, s)
    if not (_is_real(warp) and warp > 0):
        raise FeatureError(f"warp factor must be a number > 0 (1 = no warp), got {warp!r}")
    warp = float(warp)
    return _cepstral_features(_power_spectrum(y, s) @ _cached_filterbank(s, warp), s)


def features_for_warps(wave, settings: FeatureSettings, warps) -> tuple[list[np.ndarray], np.ndarray]:
    """The features of ``wave`` at every warp factor of ``warps``, from one power spectrum.

    Only the filterbank depends on the warp, so the framing and FFT are done once; each
    entry equals ``compute_features(wave, settings, warp=a)`` bit for bit.

    Returns
    -------
    features : list of np.ndarray, each (T, settings.dim) float32
        In the order of ``warps``.
    log_energy : np.ndarray, shape (T,), float64
        Natural log of each frame's total power (after pre-emphasis and window; floored
        at :data:`LOG_FLOOR`), for telling speech frames from quiet ones.

    Raises
    ------
    FeatureError
        As :func:`compute_features`, or an empty ``warps``.
    """
    y = _check_wave(wave, settings)
    factors = list(warps)
    if not factors or not all(_is_real(a) and a > 0 for a in factors):
        raise FeatureError(f"warp factors must be one or more numbers > 0 (1 = no warp), got {factors!r}")
    factors = [float(a) for a in factors]
    power = _power_spectrum(y, settings)
    log_energy = np.log(np.maximum(power.sum(axis=1), LOG_FLOOR))
    return [_cepstral_features(power @ _cached_filterbank(settings, a), settings) for a in factors], log_energy


def _cepstral_features(mel: np.ndarray, s: FeatureSettings) -> np.ndarray:
    """Steps 5-10 of the module's pipeline on (T, n_mels) band energies."""
    logmel = np.log(np.maximum(mel, LOG_FLOOR))
    ceps = logmel @ _cached_dct(s.n_mels, s.n_cepstra)
    ceps *= lifter_weights(s.n_cepstra, s.lifter)
    parts = [ceps]
    for _ in range(s.delta_order):
        parts.append(deltas(parts[-1], window=s.delta_window))
    feats = np.concatenate(parts, axis=1) if len(parts) > 1 else ceps
    if not s.static_c0:
        feats = feats[:, 1:]
    if s.cmn:
        feats = feats - feats.mean(axis=0, keepdims=True)
    if s.cvn:
        sd = feats.std(axis=0, keepdims=True)
        # a constant column (digital silence) stays zero instead of dividing by zero
        feats = feats / np.where(sd > _CVN_MIN_SD, sd, 1.0)
    return np.ascontiguousarray(feats, dtype=np.float32)


def _power_spectrum(y: np.ndarray, s: FeatureSettings) -> np.ndarray:
    """Power spectrum (T, n_fft // 2 + 1) of checked samples ``y`` after pre-emphasis, in a
    per-thread work array (valid until the next call)."""
    if s.preemphasis > 0:
        y = np.concatenate([y[:1], y[1:] - s.preemphasis * y[:-1]])
    # Windowed frames written straight into the zero-padded FFT input; the large
    # intermediates live in per-thread work arrays (see wordspot.audio.workspace).
    view = _frames(y, s.window_length, s.hop_length)
    n_frames, n_bins = view.shape[0], s.n_fft // 2 + 1
    frames = work_array("fft_input", (n_frames, s.n_fft), np.float64)
    frames[:, s.window_length :] = 0.0
    np.multiply(view, _hamming(s.window_length), out=frames[:, : s.window_length])
    spectrum = np.fft.rfft(frames, axis=1, out=work_array("spectrum", (n_frames, n_bins), np.complex128))
    power = np.square(spectrum.real, out=work_array("power", (n_frames, n_bins), np.float64))
    power += np.square(spectrum.imag, out=work_array("power_imag", (n_frames, n_bins), np.float64))
    return power


def log_mel_bands(wave, settings: FeatureSettings, n_bands: int, *, warp: float = 1.0) -> np.ndarray:
    """Natural log of ``n_bands`` mel-band energies per frame, (T, n_bands) float64.

    The same pre-emphasis, window, hop, FFT size, band limits and mel scale as
    :func:`compute_features` (so row ``t`` is the same stretch of sound as its frame
    ``t``), with ``n_bands`` filters instead of ``settings.n_mels``; energies floored at
    :data:`LOG_FLOOR`, no normalisation.

    Raises
    ------
    FeatureError
        As :func:`compute_features`, or ``n_bands`` not a whole number >= 1.
    """
    if not (_is_int(n_bands) and n_bands >= 1):
        raise FeatureError(f"n_bands must be a whole number >= 1, got {n_bands!r}")
    y = _check_wave(wave, settings)
    if not (_is_real(warp) and warp > 0):
        raise FeatureError(f"warp factor must be a number > 0 (1 = no warp), got {warp!r}")
    bank = _cached_filterbank(dataclasses.replace(settings, n_mels=int(n_bands)), float(warp))
    return np.log(np.maximum(_power_spectrum(y, settings) @ bank, LOG_FLOOR))


_HAMMING: dict[int, np.ndarray] = {}


def _hamming(length: int) -> np.ndarray:
    """Symmetric Hamming window ``0.54 - 0.46 cos(2 pi n / (N - 1))`` (numpy's), cached."""
    win = _HAMMING.get(length)
    if win is None:
        if len(_HAMMING) > 8:
            _HAMMING.clear()
        win = _HAMMING[length] = np.hamming(length)
    return win


#: Columns whose standard deviation is below this are left undivided by ``cvn``.
_CVN_MIN_SD = 1e-8

_FILTERBANKS: dict[tuple[FeatureSettings, float], np.ndarray] = {}
_DCT: dict[tuple[int, int], np.ndarray] = {}


def _cached_dct(n_in: int, n_out: int) -> np.ndarray:
    basis = _DCT.get((n_in, n_out))
    if basis is None:
        basis = _DCT[(n_in, n_out)] = dct_matrix(n_in, n_out)
    return basis


def _cached_filterbank(settings: FeatureSettings, warp: float = 1.0) -> np.ndarray:
    key = (settings, warp)
    bank = _FILTERBANKS.get(key)
    if bank is None:
        if len(_FILTERBANKS) > 32:
            _FILTERBANKS.clear()
        bank = _FILTERBANKS[key] = mel_filterbank(settings, warp=warp)
    return bank


def file_features(path, settings: FeatureSettings | None = None, *, warp: float = 1.0) -> np.ndarray:
    """Load an audio file at the settings' rate and compute its features (``warp``: see
    :func:`compute_features`).

    Returns
    -------
    np.ndarray, shape (T, settings.dim), float32

    Raises
    ------
    AudioError
        The file is missing, unreadable or unusable (see :func:`wordspot.audio.reading.load_audio`).
    """
    from wordspot.audio.reading import load_audio

    s = FeatureSettings() if settings is None else settings
    wave = load_audio(path, sample_rate=s.sample_rate)
    return compute_features(wave, s, warp=warp)
