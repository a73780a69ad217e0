"""``wordspot train``: learn an acoustic model from labelled recordings."""

from __future__ import annotations

import argparse
import os

from wordspot.corpus import read_manifest
from wordspot.audio.features import FeatureSettings
from wordspot.errors import FeatureError, TrainingError
from wordspot.evaluation.calibrate import CalibrationConfig, calibration_note, train_calibrated
from wordspot.language.lexicon import read_lexicon
from wordspot.model import save_model
from wordspot.training.adapt import AdaptationConfig, adapting
from wordspot.training.own_scorer import SECOND_SCORER
from wordspot.training.pronunciations import LearningConfig
from wordspot.training.trainer import TrainingConfig, train
from wordspot.training.workers import end_with_starter

__all__ = ["add_parser", "mixture_schedule"]

_EPILOG = """\
examples (a bakery: bakers with dough on their hands call out commands):
  wordspot train my-takes/train.csv --lexicon lexicon/bakery.txt --out bakery.model
      adapt the shipped starter model to your takes (seconds)
  wordspot train phone-takes/train.csv --lexicon lexicon/bakery.txt --out phone.model --start starter-8k
      the same for telephone-band recordings
  wordspot train more-takes.csv --lexicon lexicon/bakery.txt --out bakery2.model --start bakery.model
      adapt a model you made earlier to new takes
  wordspot train my-takes/train.csv --lexicon lexicon/bakery.txt --out bakery.model --from-scratch --jobs 2
      learn every phone from your takes alone (minutes; needs many varied recordings)
  wordspot train my-takes/train.csv --lexicon lexicon/bakery.txt --out bakery.model --no-calibration
      skip the word-confidence calibration (confidences stay a rough score, not a probability)
  wordspot train /mnt/takes/train.csv --lexicon lexicon/bakery.txt --out bakery.model --from-scratch \\
      --cluster tcp://oven-room:8786 --shared-dir /mnt/takes/scratch
      train from scratch on the workers of a Dask scheduler (a folder they all see)

The manifest is a CSV file with columns path,transcript,speaker (paths relative to the
manifest's folder), for example:
  path,transcript,speaker
  takes/oven-on-1.wav,oven on,ana
  takes/timer-five-minutes.wav,timer five minutes,ben
Recordings may hold single words or whole commands. Every word must be in the lexicon
(`wordspot lexicon suggest WORD` prints lines to add), or, when adapting, in the starting
model's own lexicon. Audio at other rates is resampled
to the model rate. Each pass prints the average log-likelihood per frame, which should
rise from pass to pass; the summary lists skipped recordings and units without data.

Word confidences are calibrated by default: 15% of each transcript's recordings are held
out of a first training, recognised, and a logistic regression learns from them how
often a word with given scores is right; the model is then trained again on everything
(adapting; from scratch the first model is kept unless --refit) and stores the fit, so
`wordspot recognize` reports each word's confidence as the probability that it is right.
When transcripts rarely repeat (sentences, one take per word), 15% of the whole set is
held out instead, or, still too few, five parts each held out once. With fewer than 20
recordings in all, an adapted model keeps the calibration its starting model carries, if
any. The summary's last line says which calibration the model got.

Adapting runs, after the weighted pass, up to 6 further passes in which your recordings
(and copies of them played 10% faster and slower, and two with noise added at 10-25 dB)
take over, as many as make recordings held out of them fit better: whole speakers when
there are three or more, else held-out takes. The summary says how strongly the model was
adapted and why; --strength N fixes it.
"""


def mixture_schedule(final: int) -> tuple[int, ...]:
    """Doubling steps up to ``final`` Gaussians a state: 8 -> (1, 2, 4, 8), 6 -> (1, 2, 4, 6)."""
    steps = [1]
    while steps[-1] * 2 <= final:
        steps.append(steps[-1] * 2)
    if steps[-1] != final:
        steps.append(final)
    return tuple(steps)


def _whole_number(minimum: int):
    """An argparse type: a whole number of at least ``minimum``."""

    def parse(text: str) -> int:
        try:
            value = int(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"expected a whole number, got {text!r}") from None
        if value < minimum:
            what = "at least 1" if minimum == 1 else f"{minimum} or more"
            raise argparse.ArgumentTypeError(f"must be {what}, got {value}")
        return value

    return parse


_positive = _whole_number(1)
_count = _whole_number(0)


def add_parser(sub, **options):
    p = sub.add_parser(
        "train",
        **options,
        description="Train a model of every phone in the lexicon from recordings labelled only "
        "with their words, and write it (with the lexicon and word-pair counts) to one file.",
        epilog=_EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument("manifest", metavar="MANIFEST", help="CSV file: path,transcript,speaker")
    p.add_argument("--lexicon", required=True, metavar="LEX", help="pronunciation lexicon (text file)")
    p.add_argument("--out", required=True, metavar="MODEL", help="model file to write (e.g. bakery.model)")
    start = p.add_argument_group("adapting a model (the default)")
    start.add_argument("--start", metavar="MODEL", default=None,
                       help="model to adapt: a model file, or 'starter' / 'starter-8k' (the shipped "
                       "starter models; default: starter, or starter-8k with --sample-rate 8000)")
    start.add_argument("--prior-weight", type=float, default=AdaptationConfig.prior_weight, metavar="TAU",
                       help="how many frames of your recordings weigh as much as the starting model "
                       f"(default {AdaptationConfig.prior_weight:g}; larger keeps closer to the start)")
    start.add_argument("--adapt-passes", type=_positive, default=AdaptationConfig.passes, metavar="N",
                       help=f"adaptation passes (default {AdaptationConfig.passes})")
    start.add_argument("--strength", type=_count, default=None, metavar="N",
                       help="further passes in which your recordings take over from the starting model "
                       "(0: the weighted pass only; default: as many as improve the fit of recordings "
                       f"held out to check, at most {AdaptationConfig.follow_passes})")
    start.add_argument("--no-mean-transform", action="store_true",
                       help="skip the shared transform that first moves every phone towards your voice")
    start.add_argument("--adapt-variances", action="store_true", help="also adapt the variances")
    start.add_argument("--keep-starter-scorer", action="store_true",
                       help="when the starting model has a sound scorer (a network that rates every "
                       "sound from a short window of audio), keep it as it is; by default it is tuned to "
                       "your recordings after the phones are adapted")
    start.add_argument("--learn-pronunciations", action="store_true",
                       help="add to the lexicon pronunciations learned from your recordings: a word's "
                       "pronunciation with one or two vowels moved to a neighbouring vowel, when your takes "
                       "of it clearly fit that better (for accents); the summary names them")
    start.add_argument("--second-scorer", action="store_true",
                       help="also fit a second sound scorer on your recordings alone and let the confidence "
                       "use both (about twice the training time; better at telling other talk from "
                       "commands on our dev voices, a little worse on phrases)")
    full = p.add_argument_group("training from scratch")
    full.add_argument("--from-scratch", action="store_true",
                      help="learn every phone from these recordings alone, starting from nothing")
    full.add_argument("--mixtures", type=_positive, default=None, metavar="N",
                      help="detail of each sound's model at the end (Gaussians a state), reached by doubling; "
                           "more needs more recordings (default 8)")
    full.add_argument("--passes", type=_positive, default=None, metavar="N",
                      help="re-estimation passes after each mixture doubling; the first stage gets N+2 "
                      f"(default {TrainingConfig.passes_per_split}, and {TrainingConfig.first_passes} "
                      "at the first stage)")
    full.add_argument("--seed", type=int, default=None, metavar="N", help="seed for mixture splitting (default 0)")
    full.add_argument("--noise-copies", type=_count, default=None, metavar="N",
                      help="noisy copies of every recording (babble or machine noise made from the "
                      "recordings themselves) so that recognition works in a noisy room; 0: clean only "
                      f"(default {TrainingConfig.noise_copies})")
    full.add_argument("--noise-snr", type=float, nargs=2, default=None,
                      metavar=("LOW", "HIGH"), help="SNR range of the noisy copies in dB "
                      f"(default {TrainingConfig.noise_snr_db[0]:g} {TrainingConfig.noise_snr_db[1]:g})")
    full.add_argument("--speed", type=float, nargs="+", default=None, metavar="F",
                      help="speed perturbation: also train on copies of every recording played F times "
                      "faster (e.g. --speed 0.9 1.0 1.1 triples the data; helps with new voices) "
                      f"(default {' '.join(f'{f:g}' for f in TrainingConfig.speed_factors)})")
    full.add_argument("--no-scorer", action="store_true", default=None,
                      help="skip the sound scorer (a network that rates every sound from a short window of "
                      "audio) otherwise fitted on these recordings after the phones are learnt; it helps the "
                      "word confidences tell commands from other talk and adds about 0.8 times the training "
                      "time")
    p.add_argument("--background-share", type=float, default=None, metavar="F",
                   help="add background-only training items (noise, hum, dithered silence, babble, fan; "
                   "no command) as this share of the recordings, at least 20 (0: none; default "
                   f"{TrainingConfig.background_share:g}), so that pauses over other backgrounds stay pauses")
    p.add_argument("--jobs", type=_positive, default=1, metavar="N",
                   help="processes to use (default 1; the model is the same for any number)")
    full.add_argument("--cluster", metavar="ADDRESS", default=None,
                      help="run the work on the workers of a running Dask scheduler: its address "
                      "(tcp://host:8786) or the file `dask scheduler --scheduler-file FILE` wrote; "
                      'the model is the same as without (needs pip install "wordspot[cluster]")')
    full.add_argument("--shared-dir", metavar="DIR", default=None,
                      help="with --cluster: a folder every worker sees at the same path, for the "
                      "features (default: this machine's temporary folder, enough for local workers)")
    cal = p.add_argument_group("confidence calibration (on by default)")
    cal.add_argument("--no-calibration", action="store_true",
                     help="do not calibrate word confidences (train once on every recording)")
    cal.add_argument("--calibration-share", type=float, default=CalibrationConfig.held_out_share, metavar="F",
                     help="share of each transcript's recordings held out to fit the calibration "
                     f"(default {CalibrationConfig.held_out_share:g})")
    cal.add_argument("--jumbled-clips", type=int, default=CalibrationConfig.jumbled, metavar="N",
                     help="clips of the held-out recordings cut into short pieces and joined in random "
                     "order, whose words count as wrong when fitting the calibration: your own voice "
                     f"saying no command (default {CalibrationConfig.jumbled}; 0: none)")
    cal.add_argument("--refit", action=argparse.BooleanOptionalAction, default=None,
                     help="after calibrating, train again on every recording (default: yes when adapting, "
                     "no with --from-scratch, which keeps the model trained without the held-out share "
                     "rather than take twice as long)")
    p.add_argument("--sample-rate", type=int, default=None, metavar="HZ",
                   help="model sample rate: 16000 (default) or 8000 for telephone recordings; when "
                   "adapting it must match the starting model's")
    p.set_defaults(func=_run)
    return p


_SCRATCH_ONLY = ("mixtures", "passes", "seed", "noise_copies", "noise_snr", "speed", "cluster", "shared_dir",
                 "no_scorer")


def _run(args) -> int:
    end_with_starter()  # started by the recording page: end when it ends
    say = (lambda line: None) if args.quiet else (lambda line: print(line, flush=True))
    lexicon = read_lexicon(args.lexicon)
    utterances = read_manifest(args.manifest)
    if args.from_scratch:
        if args.start is not None:
            raise TrainingError("--start and --from-scratch exclude each other: choose one")
        for flag, on in (("--learn-pronunciations", args.learn_pronunciations), ("--second-scorer", args.second_scorer)):
            if on:
                raise TrainingError(f"{flag} applies when adapting a model only; leave out --from-scratch, "
                                    "or this option")
        fit, what = _scratch(args, lexicon, say)
    else:
        given = [f"--{n.replace('_', '-')}" for n in _SCRATCH_ONLY if getattr(args, n) is not None]
        if given:
            raise TrainingError(f"{', '.join(given)} only apply with --from-scratch; "
                                "add --from-scratch, or leave them out to adapt a model")
        fit, what = _adapted(args, lexicon, say)
    if args.no_calibration:
        model, summary = fit(utterances)
    else:
        config = CalibrationConfig(held_out_share=args.calibration_share, refit=args.refit,
                                   jumbled=args.jumbled_clips)
        model, summary = train_calibrated(fit, utterances, config=config.decided(adapting=not args.from_scratch),
                                          quiet=args.quiet, report=say,
                                          fallback=getattr(fit, "start_calibration", None), jobs=args.jobs)
    if model.info.get("borrowed_pronunciations"):
        say("pronunciations taken from the starting model: " + ", ".join(model.info["borrowed_pronunciations"]))
    for line in summary.lines():
        say(line)
    say(calibration_note(model))
    path = save_model(model, args.out)
    print(f"wrote {os.fspath(path)} ({summary.used} recordings, {what}, {summary.seconds:.1f} s)")
    return 0


def _scratch(args, lexicon, say):
    """The training function (recordings -> model, summary) and what it makes, from the options."""
    try:
        settings = FeatureSettings(sample_rate=args.sample_rate or 16000)
    except FeatureError as exc:
        raise TrainingError(f"--sample-rate: {exc}") from None
    extra = {}
    if args.passes is not None:
        extra = {"passes_per_split": args.passes, "first_passes": args.passes + 2}
    defaults = TrainingConfig()
    config = TrainingConfig(
        mixtures=mixture_schedule(args.mixtures) if args.mixtures else defaults.mixtures, jobs=args.jobs,
        seed=args.seed if args.seed is not None else defaults.seed,
        noise_copies=args.noise_copies if args.noise_copies is not None else defaults.noise_copies,
        noise_snr_db=tuple(args.noise_snr) if args.noise_snr else defaults.noise_snr_db,
        speed_factors=tuple(args.speed) if args.speed else defaults.speed_factors,
        cluster=args.cluster, shared_dir=args.shared_dir, **({"scorer": None} if args.no_scorer else {}),
        **_share(args), **extra)

    def fit(utterances):
        return train(utterances, lexicon, settings=settings, config=config,
                     manifest=args.manifest, quiet=args.quiet, report=say)

    return fit, f"trained from scratch to detail {config.mixtures[-1]} (Gaussians a state)"


def _share(args) -> dict:
    """``background_share`` when given (the configs check it), else nothing (their defaults)."""
    return {} if args.background_share is None else {"background_share": args.background_share}


def _adapted(args, lexicon, say):
    """The adapting function (recordings -> model, summary) and what it makes, from the options."""
    from wordspot.model import load_model

    name = args.start or ("starter-8k" if args.sample_rate == 8000 else "starter")
    start = load_model(name)
    if args.sample_rate is not None and args.sample_rate != start.features.sample_rate:
        raise TrainingError(
            f"--sample-rate {args.sample_rate} does not match the starting model {name} "
            f"({start.features.sample_rate} Hz); choose --start starter-8k for 8000, or --from-scratch"
        )
    config = AdaptationConfig(prior_weight=args.prior_weight, passes=args.adapt_passes,
                              mean_transform=not args.no_mean_transform,
                              update_variances=args.adapt_variances, jobs=args.jobs, strength=args.strength,
                              pronunciations=LearningConfig(enabled=args.learn_pronunciations),
                              **({"scorer": None} if args.keep_starter_scorer else {}),
                              **({"own_scorer": SECOND_SCORER} if args.second_scorer else {}), **_share(args))

    return adapting(start, lexicon, config=config, manifest=args.manifest, quiet=args.quiet, report=say), \
        f"adapted from {name}"

