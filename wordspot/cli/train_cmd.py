"""``wordspot train``: learn an acoustic model from labelled recordings."""

from __future__ import annotations

import argparse
import os

from wordspot.corpus import read_manifest
from wordspot.audio.features import FeatureSettings
from wordspot.errors import FeatureError, TrainingError
from wordspot.language.lexicon import read_lexicon
from wordspot.model import save_model
from wordspot.training.trainer import TrainingConfig, train

__all__ = ["add_parser", "mixture_schedule"]

_EPILOG = """\
examples (a bakery: bakers with dough on their hands call out commands):
  wordspot train my-takes/train.csv --lexicon lexicon/bakery.txt --out bakery.model
  wordspot train my-takes/train.csv --lexicon lexicon/bakery.txt --out bakery.model --jobs 2
  wordspot train my-takes/train.csv --lexicon lexicon/bakery.txt --out bakery.model --noise-copies 3
  wordspot train phone-takes/train.csv --lexicon lexicon/bakery.txt --out phone.model --sample-rate 8000
  wordspot train /mnt/takes/train.csv --lexicon lexicon/bakery.txt --out bakery.model \\
      --cluster tcp://oven-room:8786 --shared-dir /mnt/takes/scratch

The manifest is a CSV file with columns path,transcript,speaker (paths relative to the
manifest's folder), for example:
  path,transcript,speaker
  takes/oven-on-1.wav,oven on,ana
  takes/timer-five-minutes.wav,timer five minutes,ben
Recordings may hold single words or whole commands. Every word must be in the lexicon
(`wordspot lexicon suggest WORD` prints lines to add). Audio at other rates is resampled
to the model rate. Each pass prints the average log-likelihood per frame, which should
rise from pass to pass; the summary lists skipped recordings and units without data.
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


def add_parser(sub):
    p = sub.add_parser(
        "train",
        help="train an acoustic model from recordings and their transcripts",
        description="Train a model of every phone in the lexicon from recordings labelled only "
        "with their words, and write it (with the lexicon and word-pair counts) to one file.",
        epilog=_EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument("manifest", metavar="MANIFEST", help="CSV file: path,transcript,speaker")
    p.add_argument("--lexicon", required=True, metavar="LEX", help="pronunciation lexicon (text file)")
    p.add_argument("--out", required=True, metavar="MODEL", help="model file to write (e.g. bakery.model)")
    p.add_argument("--mixtures", type=_positive, default=8, metavar="N",
                   help="Gaussians per state at the end, reached by doubling (default 8)")
    p.add_argument("--passes", type=_positive, default=None, metavar="N",
                   help="re-estimation passes after each mixture doubling; the first stage gets N+2 "
                   f"(default {TrainingConfig.passes_per_split}, and {TrainingConfig.first_passes} "
                   "at the first stage)")
    p.add_argument("--jobs", type=_positive, default=1, metavar="N",
                   help="processes to use (default 1; the model is the same for any number)")
    p.add_argument("--cluster", metavar="ADDRESS", default=None,
                   help="run the work on the workers of a running Dask scheduler: its address "
                   "(tcp://host:8786) or the file `dask scheduler --scheduler-file FILE` wrote; "
                   'the model is the same as without (needs pip install "wordspot[cluster]")')
    p.add_argument("--shared-dir", metavar="DIR", default=None,
                   help="with --cluster: a folder every worker sees at the same path, for the "
                   "features (default: this machine's temporary folder, enough for local workers)")
    p.add_argument("--seed", type=int, default=0, metavar="N", help="seed for mixture splitting (default 0)")
    p.add_argument("--noise-copies", type=_count, default=TrainingConfig.noise_copies, metavar="N",
                   help="noisy copies of every recording (babble or machine noise made from the "
                   "recordings themselves) so that recognition works in a noisy room; 0: clean only "
                   f"(default {TrainingConfig.noise_copies})")
    p.add_argument("--noise-snr", type=float, nargs=2, default=TrainingConfig.noise_snr_db,
                   metavar=("LOW", "HIGH"), help="SNR range of the noisy copies in dB "
                   f"(default {TrainingConfig.noise_snr_db[0]:g} {TrainingConfig.noise_snr_db[1]:g})")
    p.add_argument("--speed", type=float, nargs="+", default=TrainingConfig.speed_factors, metavar="F",
                   help="speed perturbation: also train on copies of every recording played F times "
                   "faster (e.g. --speed 0.9 1.0 1.1 triples the data; helps with new voices) "
                   f"(default {' '.join(f'{f:g}' for f in TrainingConfig.speed_factors)})")
    p.add_argument("--sample-rate", type=int, default=16000, metavar="HZ",
                   help="model sample rate: 16000 (default) or 8000 for telephone recordings")
    p.set_defaults(func=_run)
    return p


def _run(args) -> int:
    try:
        settings = FeatureSettings(sample_rate=args.sample_rate)
    except FeatureError as exc:
        raise TrainingError(f"--sample-rate: {exc}") from None
    extra = {}
    if args.passes is not None:
        extra = {"passes_per_split": args.passes, "first_passes": args.passes + 2}
    config = TrainingConfig(mixtures=mixture_schedule(args.mixtures), jobs=args.jobs, seed=args.seed,
                            noise_copies=args.noise_copies, noise_snr_db=tuple(args.noise_snr),
                            speed_factors=tuple(args.speed), cluster=args.cluster,
                            shared_dir=args.shared_dir, **extra)
    lexicon = read_lexicon(args.lexicon)
    utterances = read_manifest(args.manifest)
    say = (lambda line: None) if args.quiet else (lambda line: print(line, flush=True))
    model, summary = train(utterances, lexicon, settings=settings, config=config,
                           manifest=args.manifest, quiet=args.quiet, report=say)
    for line in summary.lines():
        say(line)
    path = save_model(model, args.out)
    print(f"wrote {os.fspath(path)} ({summary.used} utterances, "
          f"{config.mixtures[-1]} Gaussians a state, {summary.seconds:.1f} s)")
    return 0
