"""The acoustic model as one object, and its single-file storage.

An :class:`AcousticModel` holds everything recognition needs: the feature settings used
in training (so recognition always computes the same features), the units with their
transitions, the mixtures, the lexicon, and the word-pair counts the grammar prior is
estimated from.

File format ("wordspot-model", version :data:`FORMAT_VERSION`): a numpy ``.npz`` archive
of plain numeric arrays (read with ``allow_pickle=False``, so loading never runs code)
plus one ``header`` array of UTF-8 bytes holding JSON: the format name and version, the
feature settings, unit names, lexicon text, bigram vocabulary, training info, the
optional confidence calibration (key ``calibration``, :meth:`Calibration.to_dict`; absent
= none, so files without it, written before it existed, load unchanged) and a SHA-256
checksum over every array and the rest of the header.

The optional state scorer (:class:`wordspot.acoustic.scorer.StateScorer`) is stored as
float32 arrays ``scorer_input_mean``, ``scorer_input_scale``, ``scorer_log_prior`` and
``scorer_weight_<k>`` / ``scorer_bias_<k>`` for each layer ``k``, with header key
``scorer`` (``context``, ``layers``, ``hidden``: the activation; ``inputs`` when the
network reads other frames than the model's features, e.g. ``log-mel``, absent =
``cepstra``); absent = no scorer, so files without one load unchanged. A second network
(``own_scorer``, fitted on the user's recordings alone) is stored the same way with the
prefix and header key ``own_scorer``. The optional voice
mixture (:class:`wordspot.audio.voice_warp.VoiceMixture`, the judge of a recording's
frequency warp) is stored as float64 arrays ``voice_weights``, ``voice_means`` and
``voice_variances`` with header key ``voice`` (``components``); absent = none, and
recognition then never warps. The checksum covers these arrays as any other. The file is written to a
temporary name in the same folder, flushed to disk and renamed over the target, so a
crash never leaves a half-written model.

Older versions still load: version 1 named one array differently, and versions 1 and 2
called the pause unit ``pau`` (now ``quiet``, :data:`wordspot.acoustic.units.PAUSE_UNIT`);
both names are mapped on load, after the checksum is checked over the file as written.
"""

from __future__ import annotations

import hashlib
import json
import os
import zipfile
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from wordspot.errors import FeatureError, LexiconError, ModelFileError
from wordspot.audio.features import FeatureSettings
from wordspot.acoustic.gmm import Mixtures
from wordspot.acoustic.scorer import StateScorer
from wordspot.audio.scorer_inputs import INPUT_KINDS, input_dim
from wordspot.audio.voice_warp import VoiceMixture
from wordspot.language.grammar import BigramCounts
from wordspot.language.lexicon import Lexicon, parse_lexicon
from wordspot.acoustic.units import UnitSet
from wordspot.starters import is_starter_name, starter_path
from wordspot.util.atomic import write_atomically
from wordspot.util.logistic import Calibration

__all__ = ["AcousticModel", "save_model", "load_model", "FORMAT_NAME", "FORMAT_VERSION"]

FORMAT_NAME = "wordspot-model"
FORMAT_VERSION = 3
# Version 1 named each unit state's mixture table ``unit_state_pdf``; version 2 calls it
# ``unit_state_mixture``. Files of version 1 still load: the old name is mapped on load.
_RENAMED_IN_VERSION_2 = {"unit_state_pdf": "unit_state_mixture"}
# Versions 1 and 2 named the pause unit ``pau``; version 3 calls it ``quiet``. Files of
# versions 1 and 2 (the shipped starter models among them) still load: the unit list in
# the header is mapped on load.
_UNITS_RENAMED_IN_VERSION_3 = {"pau": "quiet"}
_READABLE_VERSIONS = (1, 2, FORMAT_VERSION)

_RETRAIN = "train a new one with `wordspot train`"


@dataclass
class AcousticModel:
    """A trained recognizer.

    Attributes
    ----------
    features : FeatureSettings
    units : UnitSet
    mixtures : Mixtures
        ``mixtures.means.shape[2]`` equals ``features.dim``.
    lexicon : Lexicon
    bigrams : BigramCounts
        Word-pair counts of the training transcripts.
    info : dict
        JSON-serialisable facts about training (date, data, passes, log-likelihoods).
    calibration : Calibration or None
        Turns a recognised word's measures into the probability that it is right
        (:mod:`wordspot.decoding.confidence`); None: the heuristic confidence.
    scorer : StateScorer or None
        A network giving the posterior of every mixture id from a window of frames, used
        by the search when the decoder settings ask for it; None: the mixtures alone.
    own_scorer : StateScorer or None
        A second such network, fitted on the user's recordings alone (an adapted model's,
        beside the starter's tuned ``scorer``); it gives the confidence measures
        ``confidence.OWN_POSTERIOR_MEASURE_NAMES`` and never enters the search.
    voice : VoiceMixture or None
        A mixture of the training speech's features, by which recognition chooses each
        recording's frequency warp (:mod:`wordspot.audio.voice_warp`); None: no warp.
    """

    features: FeatureSettings
    units: UnitSet
    mixtures: Mixtures
    lexicon: Lexicon
    bigrams: BigramCounts
    info: dict = field(default_factory=dict)
    calibration: Calibration | None = None
    scorer: StateScorer | None = None
    voice: VoiceMixture | None = None
    own_scorer: StateScorer | None = None


_VOICE_NAMES = ("voice_weights", "voice_means", "voice_variances")


#: The activation of the scorer's hidden layers, as the header names it.
_SCORER_HIDDEN = "relu"
_SCORER_MAX_LAYERS = 16


#: The two networks' table prefixes and header keys.
_SCORER_KEYS = ("scorer", "own_scorer")


def _scorer_arrays(scorer: StateScorer, key: str = "scorer") -> dict[str, np.ndarray]:
    out = {f"{key}_input_mean": scorer.input_mean, f"{key}_input_scale": scorer.input_scale,
           f"{key}_log_prior": scorer.log_prior}
    for k, (w, b) in enumerate(zip(scorer.weights, scorer.biases)):
        out[f"{key}_weight_{k}"] = w
        out[f"{key}_bias_{k}"] = b
    return {name: np.ascontiguousarray(a, dtype=np.float32) for name, a in out.items()}


def _scorer_names(layers: int, key: str = "scorer") -> set[str]:
    return ({f"{key}_input_mean", f"{key}_input_scale", f"{key}_log_prior"}
            | {f"{key}_{kind}_{k}" for kind in ("weight", "bias") for k in range(layers)})


def _arrays(model: AcousticModel) -> dict[str, np.ndarray]:
    u, m = model.units, model.mixtures
    voice = getattr(model, "voice", None)
    extra = {} if voice is None else dict(zip(_VOICE_NAMES, (
        np.ascontiguousarray(a, dtype=np.float64) for a in (voice.weights, voice.means, voice.variances))))
    for key in _SCORER_KEYS:
        if getattr(model, key, None) is not None:
            extra.update(_scorer_arrays(getattr(model, key), key))
    return {**extra,
        "unit_n_states": np.ascontiguousarray(u.n_states, dtype=np.int64),
        "unit_state_mixture": np.ascontiguousarray(u.state_mixture, dtype=np.int64),
        "unit_trans": np.ascontiguousarray(u.trans, dtype=np.float64),
        "unit_entry": np.ascontiguousarray(u.entry, dtype=np.float64),
        "mix_weights": np.ascontiguousarray(m.weights, dtype=np.float64),
        "mix_means": np.ascontiguousarray(m.means, dtype=np.float64),
        "mix_variances": np.ascontiguousarray(m.variances, dtype=np.float64),
        "bigram_counts": np.ascontiguousarray(model.bigrams.counts, dtype=np.int64),
    }


def _checksum(arrays: dict[str, np.ndarray], header: dict) -> str:
    """SHA-256 over every array (name, dtype, shape, bytes) and the header without its checksum."""
    h = hashlib.sha256()
    for name in sorted(arrays):
        a = np.ascontiguousarray(arrays[name])
        h.update(f"{name}|{a.dtype.str}|{a.shape}|".encode())
        h.update(a.tobytes())
    rest = {k: v for k, v in header.items() if k != "checksum"}
    h.update(json.dumps(rest, sort_keys=True, ensure_ascii=True).encode())
    return h.hexdigest()


def save_model(model: AcousticModel, path) -> Path:
    """Write ``model`` to one file, atomically.

    Parameters
    ----------
    model : AcousticModel
    path : str or os.PathLike
        The model file (any name; ``.model`` is usual). An existing file is replaced only
        once the new one is completely on disk.

    Returns
    -------
    Path
        The file written.

    Raises
    ------
    ModelFileError
        The folder does not exist or cannot be written.
    """
    target = Path(os.fspath(path))
    folder = target.parent if str(target.parent) else Path(".")
    if not folder.is_dir():
        raise ModelFileError(f"{target}: folder {folder} does not exist; create it or choose another --out")
    arrays = _arrays(model)
    header = {
        "format": FORMAT_NAME,
        "version": FORMAT_VERSION,
        "features": model.features.to_dict(),
        "units": list(model.units.names),
        "lexicon": model.lexicon.to_text(),
        "bigram_words": list(model.bigrams.words),
        "info": model.info,
    }
    if model.calibration is not None:
        header["calibration"] = model.calibration.to_dict()
    for key in _SCORER_KEYS:
        net = getattr(model, key, None)
        if net is not None:
            header[key] = {"context": int(net.context), "layers": len(net.weights), "hidden": _SCORER_HIDDEN}
            if net.inputs != INPUT_KINDS[0]:  # absent = cepstra, so such files stay as before
                header[key]["inputs"] = net.inputs
    if getattr(model, "voice", None) is not None:
        header["voice"] = {"components": model.voice.n_components}
    try:
        json.dumps(header)
    except (TypeError, ValueError) as exc:
        raise ModelFileError(f"{target}: model info is not plain data ({exc})") from None
    header["checksum"] = _checksum(arrays, header)
    payload = np.frombuffer(json.dumps(header, sort_keys=True).encode("utf-8"), dtype=np.uint8)
    try:
        write_atomically(target, lambda f: np.savez(f, header=payload, **arrays))
    except OSError as exc:
        raise ModelFileError(f"{target}: cannot write the model ({exc.strerror or exc})") from None
    return target


def _damaged(path, what: str) -> ModelFileError:
    return ModelFileError(f"{path}: {what}; the model file is damaged or not a wordspot model; {_RETRAIN}")


def load_model(path) -> AcousticModel:
    """Read a model file written by :func:`save_model`, checking it thoroughly.

    ``path`` may also be the name of a packaged starter model (``"starter"``,
    ``"starter-8k"``) when no file of that name exists.

    Raises
    ------
    ModelFileError
        Missing, truncated, altered (checksum mismatch), of another format version, or
        holding inconsistent tables; the message names the file and what to do.
    """
    if is_starter_name(path) and not Path(path).exists():
        p = starter_path(path)
        if not p.exists():
            raise ModelFileError(
                f"{path}: the starter model is not in this installation ({p} is missing); "
                "rebuild it with `python recordings/build_starters.py` in a source checkout, "
                "or train with --from-scratch"
            )
    else:
        p = Path(os.fspath(path))
    if not p.exists():
        raise ModelFileError(f"{p}: model file not found; check the name, or {_RETRAIN}")
    if p.is_dir():
        raise ModelFileError(f"{p}: is a folder, not a model file")
    try:
        with np.load(p, allow_pickle=False) as data:
            arrays = {name: np.array(data[name]) for name in data.files}
    except (OSError, ValueError, EOFError, zipfile.BadZipFile, KeyError, RuntimeError) as exc:
        raise _damaged(p, f"cannot be read ({type(exc).__name__})") from None
    if "header" not in arrays:
        raise _damaged(p, "has no header")
    try:
        header = json.loads(arrays.pop("header").astype(np.uint8).tobytes().decode("utf-8"))
    except (ValueError, UnicodeDecodeError):
        raise _damaged(p, "has an unreadable header") from None
    if not isinstance(header, dict) or header.get("format") != FORMAT_NAME:
        raise ModelFileError(f"{p}: is not a wordspot model file; {_RETRAIN}")
    version = header.get("version")
    if type(version) is not int or version not in _READABLE_VERSIONS:
        raise ModelFileError(
            f"{p}: model format version {version!r}, but this wordspot reads versions "
            f"{', '.join(map(str, _READABLE_VERSIONS))}; {_RETRAIN} (or use the wordspot version that wrote it)"
        )
    renamed = _RENAMED_IN_VERSION_2 if version == 1 else {}
    written_as = {new: old for old, new in renamed.items()}
    expected = {written_as.get(name, name) for name in _ARRAY_NAMES}
    for key in _SCORER_KEYS:
        if key in header:
            expected |= _scorer_names(_scorer_layers(p, header[key]), key)
    if "voice" in header:
        expected |= set(_VOICE_NAMES)
    if set(arrays) != expected:
        raise _damaged(p, "does not hold the expected tables")
    if header.get("checksum") != _checksum(arrays, header):  # over the names as written
        raise ModelFileError(f"{p}: checksum mismatch: the file was altered or damaged; {_RETRAIN}")
    arrays = {renamed.get(name, name): a for name, a in arrays.items()}
    try:
        if version < 3:
            header["units"] = [_UNITS_RENAMED_IN_VERSION_3.get(n, n) for n in header["units"]]
        return _build(p, header, arrays)
    except (KeyError, TypeError, ValueError, IndexError) as exc:
        if isinstance(exc, ModelFileError):
            raise
        raise _damaged(p, f"has inconsistent contents ({exc})") from None


def _scorer_layers(p: Path, settings) -> int:
    """The scorer's layer count from its header entry, checked."""
    layers = settings.get("layers") if isinstance(settings, dict) else None
    if type(layers) is not int or not 1 <= layers <= _SCORER_MAX_LAYERS:
        raise _damaged(p, f"has a state scorer entry with {layers!r} layers")
    return layers


def _build_scorer(p: Path, settings: dict, a: dict, n_mixtures: int, dim: int, key: str = "scorer") -> StateScorer:
    context = settings.get("context")
    inputs = settings.get("inputs", INPUT_KINDS[0])
    if type(context) is not int or settings.get("hidden") != _SCORER_HIDDEN or inputs not in INPUT_KINDS:
        raise _damaged(p, f"has a state scorer entry this wordspot cannot use ({settings})")
    layers = _scorer_layers(p, settings)
    arrays = [a[f"{key}_input_mean"], a[f"{key}_input_scale"], a[f"{key}_log_prior"]]
    weights = [a[f"{key}_weight_{k}"] for k in range(layers)]
    biases = [a[f"{key}_bias_{k}"] for k in range(layers)]
    if any(x.dtype != np.float32 for x in arrays + weights + biases):
        raise _damaged(p, "holds state scorer tables that are not float32")
    try:
        scorer = StateScorer(context, arrays[0], arrays[1], tuple(weights), tuple(biases), arrays[2], inputs)
    except ValueError as exc:
        raise ModelFileError(f"{p}: the state scorer is malformed ({exc}); {_RETRAIN}") from None
    if scorer.n_classes != n_mixtures or scorer.frame_dim != input_dim(inputs, dim):
        raise ModelFileError(
            f"{p}: the state scorer has {scorer.n_classes} classes over frames of {scorer.frame_dim} values, but "
            f"the model has {n_mixtures} mixtures and its {inputs} inputs have {input_dim(inputs, dim)}; {_RETRAIN}")
    return scorer


_ARRAY_NAMES = ("unit_n_states", "unit_state_mixture", "unit_trans", "unit_entry",
                "mix_weights", "mix_means", "mix_variances", "bigram_counts")


def _build(p: Path, header: dict, a: dict) -> AcousticModel:
    try:
        features = FeatureSettings.from_dict(header["features"])
    except FeatureError as exc:
        raise ModelFileError(f"{p}: invalid feature settings ({exc}); {_RETRAIN}") from None
    try:
        lexicon = parse_lexicon(header["lexicon"], source=f"{p} (lexicon)")
    except LexiconError as exc:
        raise ModelFileError(f"{p}: invalid lexicon ({exc}); {_RETRAIN}") from None
    units = UnitSet(tuple(str(n) for n in header["units"]), a["unit_n_states"], a["unit_state_mixture"],
                    a["unit_trans"], a["unit_entry"])
    units.validate(source=str(p))
    w, mu, var = a["mix_weights"], a["mix_means"], a["mix_variances"]
    if w.ndim != 2 or mu.ndim != 3 or mu.shape[:2] != w.shape or var.shape != mu.shape:
        raise ModelFileError(f"{p}: mixture tables have inconsistent shapes; {_RETRAIN}")
    if w.shape[0] != units.n_mixtures:
        raise ModelFileError(f"{p}: {w.shape[0]} mixtures but the units use {units.n_mixtures}; {_RETRAIN}")
    if mu.shape[2] != features.dim:
        raise ModelFileError(
            f"{p}: mixtures have {mu.shape[2]} dimensions but the feature settings give {features.dim}; {_RETRAIN}"
        )
    if not (np.isfinite(w).all() and np.isfinite(mu).all() and np.isfinite(var).all()):
        raise ModelFileError(f"{p}: mixture parameters are not finite; {_RETRAIN}")
    if (w < 0).any() or not np.allclose(w.sum(axis=1), 1.0, atol=1e-6) or (var <= 0).any():
        raise ModelFileError(f"{p}: mixture weights or variances are invalid; {_RETRAIN}")
    words = tuple(str(x) for x in header["bigram_words"])
    counts = a["bigram_counts"]
    if counts.shape != (len(words) + 1, len(words) + 1) or (counts < 0).any():
        raise ModelFileError(f"{p}: bigram table does not match its vocabulary; {_RETRAIN}")
    info = header.get("info", {})
    calibration = None
    if "calibration" in header:
        try:
            calibration = Calibration.from_dict(header["calibration"])
        except ValueError as exc:
            raise ModelFileError(f"{p}: the confidence calibration is malformed ({exc}); {_RETRAIN}") from None
    scorer, own = (_build_scorer(p, header[key], a, units.n_mixtures, features.dim, key) if key in header else None
                   for key in _SCORER_KEYS)
    voice = None
    if "voice" in header:
        voice = _build_voice(p, header["voice"], a, features.dim)
    return AcousticModel(features, units, Mixtures(w, mu, var), lexicon, BigramCounts(words, counts),
                         dict(info) if isinstance(info, dict) else {}, calibration, scorer, voice, own)


def _build_voice(p: Path, settings, a: dict, dim: int) -> VoiceMixture:
    k = settings.get("components") if isinstance(settings, dict) else None
    tables = [a[name] for name in _VOICE_NAMES]
    if any(t.dtype != np.float64 for t in tables):
        raise _damaged(p, "holds voice mixture tables that are not float64")
    try:
        voice = VoiceMixture(*tables)
    except ValueError as exc:
        raise ModelFileError(f"{p}: the voice mixture is malformed ({exc}); {_RETRAIN}") from None
    if type(k) is not int or voice.n_components != k or voice.dim != dim:
        raise ModelFileError(f"{p}: the voice mixture has {voice.n_components} Gaussians over {voice.dim} values "
                             f"(header: {k!r}), the features {dim}; {_RETRAIN}")
    return voice
