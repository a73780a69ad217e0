"""A state scorer fitted on the user's own recordings alone, for a model trained from scratch.

After the mixtures are trained, the recordings, their speed and noisy copies and the
background-only items (the same ones training made, from the same seed) are aligned with
the new model (:func:`wordspot.training.frame_labels.align_frames`; noisy copies take their
clean recording's labels) and a state scorer is fitted on those frame labels
(:func:`wordspot.training.scorer_fit.fit_scorer_with_report`; copies of one recording are
held out together for early stopping). Fitting needs scikit-learn, as building the
starters does; without it, or with no frame aligned, the model stays without a scorer
and the note says why.

Whether a model trained from scratch gains from it is measured on dev material in
docs/experiments/2026-12-03-scratch-scorer.md.
"""

from __future__ import annotations

import importlib.util
from dataclasses import replace

from wordspot.training.frame_labels import align_frames
from wordspot.training.scorer_fit import ScorerConfig, fit_scorer_with_report

__all__ = ["SCRATCH_SCORER", "SECOND_SCORER", "fit_own_scorer"]

#: The scorer's size for a user's recordings (some 100,000-500,000 frames with copies):
#: smaller than the starters' 512x512, context 5 (11 frames) as theirs.
SCRATCH_SCORER = ScorerConfig(hidden=(256, 256), context=5, max_frames=200_000)

#: The second network of an adapted model (``AdaptationConfig.own_scorer``): the same size on
#: at most 60,000 frames (the setting measured on the dev voices,
#: docs/experiments/2026-12-04-adapted-scorer-unheard-accents.md).
SECOND_SCORER = replace(SCRATCH_SCORER, max_frames=60_000)


def fit_own_scorer(model, utterances, *, noise=None, speeds=(), background_share: float = 0.0, seed: int = 0,
                   scorer: ScorerConfig = SCRATCH_SCORER, jobs: int = 1, quiet: bool = True, executor=None,
                   background_kinds=None):
    """A state scorer for ``model`` fitted on ``utterances`` aligned with it.

    Parameters
    ----------
    model : AcousticModel
        A trained model (its mixtures label the frames).
    utterances : sequence of wordspot.corpus.Utterance
    noise : wordspot.audio.augment.NoiseSettings, optional
        Noisy copies of every recording (labels of the clean one).
    speeds : sequence of float
        Speed copies, each aligned through its own chain.
    background_share : float
        Background-only items as a share of the recordings.
    background_kinds : mix of ``(kind, parts)`` pairs, optional
        Their kinds (the training's, so the items are the ones it made).
    seed : int
        Seeds the copies and background items; the scorer's own seed is ``scorer.seed``.
    scorer : ScorerConfig
    jobs : int
    quiet : bool
    executor : wordspot.training.cluster.Executor, optional

    Returns
    -------
    scorer : StateScorer or None
        None when scikit-learn is missing or no frame could be aligned.
    info : dict
        Frames, items, epochs and held-out accuracy, for the model's info (the same for
        the same data and seed; or
        the reason there is no scorer).
    note : str
        One plain line for the training summary.
    """
    if importlib.util.find_spec("sklearn") is None:
        why = "scikit-learn is not installed (pip install scikit-learn)"
        return None, {"fitted": False, "reason": why}, f"sound scorer: not fitted, {why}"
    got = align_frames(model, utterances, jobs=jobs, background_share=background_share, noise=noise,
                       speeds=speeds, seed=seed, quiet=quiet, executor=executor, background_kinds=background_kinds)
    if got.n_frames == 0:
        why = "no recording could be aligned"
        return None, {"fitted": False, "reason": why}, f"sound scorer: not fitted, {why}"
    net, fit = fit_scorer_with_report(got.frames, got.labels, model.mixtures.n_mixtures, scorer,
                                      groups=[str(it.path) for it in got.items])
    info = {"fitted": True, "hidden": list(scorer.hidden), "context": scorer.context, "seed": scorer.seed,
            "items": len(got.items), "frames": got.n_frames, "train_frames": fit.train_frames,
            "epochs": len(fit.train_loss), "best_epoch": fit.best_epoch,
            "held_out_accuracy": round(float(fit.held_out_accuracy), 4)}
    note = (f"sound scorer: fitted on {got.n_frames} frames of your recordings and their copies "
            f"({fit.train_frames} used), {len(fit.train_loss)} passes")
    return net, info, note
