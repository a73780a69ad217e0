"""The mixtures alone: a model with its state scorer taken out, and a starter made so.

A model with a state scorer uses it, with the default decoder settings, only in the word
confidence: its calibration reads four posterior measures beside the base ones
(:data:`wordspot.evaluation.calibrate.CALIBRATION_POSTERIOR_MEASURES`). Such a calibration
cannot serve a model without the scorer, so "the mixtures alone" is the same recipe with no
scorer anywhere, its calibration fitted on the base measures only:

- :func:`without_scorer`: the model with no scorer and no calibration that names a
  posterior measure (a calibration over the base measures alone is kept);
- :func:`starter_mixtures_only`: a starter with its scorer taken out and a calibration
  fitted the way the shipped one is (:func:`fit_starter_calibration` on the starter
  corpus's dev split, ``recordings/build_starters.py`` ``add_calibration``);
- :func:`cached_starter_mixtures_only`: the same, kept in a model file and reused while the
  starter file, the dev manifest and the settings are unchanged.

An adapted model made from :func:`without_scorer`'s starter fits its own calibration on the
base measures by itself (:func:`wordspot.evaluation.calibrate.calibration_measures` takes
the posterior measures only when they are finite, which needs a scorer).
"""

from __future__ import annotations

import hashlib
import time
from dataclasses import asdict, replace
from pathlib import Path
from typing import Callable, Sequence

from wordspot.decoding.confidence import OWN_POSTERIOR_MEASURE_NAMES, POSTERIOR_MEASURE_NAMES
from wordspot.errors import WordspotError
from wordspot.evaluation.starter_calibration import StarterCalibrationConfig, fit_starter_calibration

__all__ = ["without_scorer", "starter_mixtures_only", "cached_starter_mixtures_only", "build_key"]


def without_scorer(model):
    """``model`` with its state scorer (and a second network, ``own_scorer``) taken out.

    Its calibration is kept when it reads no posterior measure, else dropped (the word
    confidence falls back to the heuristic until a new one is fitted). ``info`` says what was
    taken out (``scorer_taken_out``) and loses the scorer's and the dropped calibration's
    entries. The model given is not changed.
    """
    cal = model.calibration
    if cal is not None and set(cal.names) & set(POSTERIOR_MEASURE_NAMES + OWN_POSTERIOR_MEASURE_NAMES):
        cal = None
    info = {k: v for k, v in model.info.items()
            if k not in ("scorer", "scorer_adaptation", "own_scorer") and (k != "calibration" or cal is not None)}
    info["scorer_taken_out"] = {"had_scorer": model.scorer is not None,
                                "calibration_dropped": cal is None and model.calibration is not None}
    return replace(model, scorer=None, own_scorer=None, calibration=cal, info=info)


def starter_mixtures_only(starter, dev_utterances: Sequence, config: StarterCalibrationConfig = StarterCalibrationConfig(),
                          *, made_from: str = "", report: Callable[[str], None] | None = None):
    """A starter with its scorer taken out and its calibration fitted again without it.

    Parameters
    ----------
    starter : AcousticModel
        With its own lexicon (the dev recordings' words).
    dev_utterances : sequence of Utterance
        Recordings the starter was not trained on (the starter corpus's dev split).
    config : StarterCalibrationConfig
        The shipped starters use the default.
    made_from : str
        Where the recordings come from, for ``info["calibration"]``.

    Returns
    -------
    model : AcousticModel
        No scorer; a calibration over the base measures (None when the fit failed).
    examples : CalibrationExamples
    """
    t0 = time.monotonic()
    model = without_scorer(starter)
    cal, ex = fit_starter_calibration(model, dev_utterances, config, report=report)
    info = {k: v for k, v in model.info.items() if k != "calibration"}
    if cal is not None:
        info["calibration"] = {
            "starter": True, "made_from": made_from, "vocabularies": config.vocabularies,
            "words_per_vocabulary": list(config.words), "other_talk_per_vocabulary": config.other_talk,
            "jumbled_per_vocabulary": config.jumbled, "noise_per_vocabulary": config.noise, "seed": config.seed,
            "measures": list(cal.names), "right_words": int(ex.right.sum()), "wrong_words": int((~ex.right).sum()),
            "seconds": round(time.monotonic() - t0, 1),
            "how": "fitted again on the mixtures' measures alone, the starter's state scorer taken out",
        }
    return replace(model, calibration=cal, info=info), ex


def _digest(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def build_key(starter_file: Path, dev_manifest: Path, config: StarterCalibrationConfig) -> dict:
    """What a cached starter without its scorer was made from: both files' SHA-256 and the settings."""
    settings = {k: v for k, v in asdict(config).items() if k != "settings"}
    settings["decoder"] = repr(config.settings)
    return {"starter_sha256": _digest(starter_file), "dev_manifest_sha256": _digest(dev_manifest),
            "config": {k: list(v) if isinstance(v, tuple) else v for k, v in settings.items()}}


def cached_starter_mixtures_only(cache: Path, dev_manifest: Path, *, starter: str = "starter",
                                 config: StarterCalibrationConfig = StarterCalibrationConfig(),
                                 report: Callable[[str], None] | None = None):
    """:func:`starter_mixtures_only` of the named starter on ``dev_manifest``, kept in ``cache``.

    The model file ``cache`` is reused when it was made from the same starter file, dev
    manifest and settings (``info["made_without_scorer"]``); else the model is made and
    written there (atomically).

    Returns
    -------
    model : AcousticModel
        With the starter's own lexicon.
    reused : bool
    seconds : float
        Time spent fitting (0 when reused).

    Raises
    ------
    WordspotError
        The dev manifest is missing or unreadable, or the fit gave no calibration.
    """
    from wordspot.corpus import read_manifest
    from wordspot.errors import ModelFileError
    from wordspot.model import load_model, save_model
    from wordspot.starters import starter_path

    say = report or (lambda line: None)
    dev_manifest = Path(dev_manifest)
    if not dev_manifest.is_file():
        raise WordspotError(f"{dev_manifest}: the starter corpus's dev split is not there; build the starter "
                            "corpus with `python recordings/starter.py build` (needs espeak-ng, flite and festival) "
                            "or name its dev manifest")
    key = build_key(starter_path(starter), dev_manifest, config)
    cache = Path(cache)
    if cache.is_file():
        try:
            kept = load_model(cache)
        except ModelFileError:
            kept = None
        if kept is not None and kept.info.get("made_without_scorer") == key and kept.calibration is not None:
            return kept, True, 0.0
    t0 = time.monotonic()
    say(f"{starter} without its state scorer: fitting its calibration on {dev_manifest} as the shipped one "
        "was fitted (about a minute) ...")
    model, ex = starter_mixtures_only(load_model(starter), read_manifest(dev_manifest), config,
                                      made_from=str(dev_manifest), report=report)
    if model.calibration is None:
        raise WordspotError(f"{dev_manifest}: the calibration of the starter without its state scorer could not be "
                            f"fitted ({int(ex.right.sum())} right, {int((~ex.right).sum())} wrong words); check "
                            "that the manifest lists the starter corpus's dev recordings")
    model.info["made_without_scorer"] = key
    cache.parent.mkdir(parents=True, exist_ok=True)
    save_model(model, cache)
    return model, False, time.monotonic() - t0
