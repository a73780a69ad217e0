"""``wordspot recognize``: the words spoken in audio files, with times and confidences."""

from __future__ import annotations

import argparse
import csv
import json
import math
import sys

from wordspot.decoding.confidence import DEFAULT_MIN_CONFIDENCE
from wordspot.decoding.decoder import DecoderSettings, Recognition, recognize_files

__all__ = ["add_parser", "add_decoder_options", "add_warp_option", "warp_note", "settings_from_args", "scorer_note",
           "format_text", "format_jsonl", "write_csv"]

_EPILOG = """\
examples (a bakery: commands called out with dough on your hands):
  wordspot recognize --model bakery.model oven-start.wav
      oven-start.wav  oven start
  wordspot recognize --model bakery.model --times takes/*.wav
      takes/timer.wav  timer 0.42-0.80 five 0.86-1.21 minutes 1.24-1.83
  wordspot recognize --model bakery.model --format jsonl --jobs 4 takes/*.wav > words.jsonl
  wordspot recognize --model bakery.model --single-word yes.wav        isolated commands
  wordspot recognize --model bakery.model --lexicon more-words.txt knead.wav
      a new vocabulary without retraining (words made of the model's phones)
  wordspot recognize --model bakery.model --prior orders.txt takes/*.wav
  wordspot recognize --model bakery.model --min-confidence 0.8 takes/*.wav
      only words the model is at least 80% sure of (its confidences are probabilities
      when `wordspot train` calibrated them, as it does by default)

prior file (plain text): one word pair a line, previous word, next word, a count;
'^' is the start and '$' the end of a recording; '#' starts a comment:
  ^      oven   12
  oven   start  10
  start  $      10

Exit status: 0 when every file was processed, 1 when some could not be read, 2 on a bad
model, lexicon, prior or option. Voice commands are a convenience, never a safety device.
"""


def add_parser(sub, **options):
    p = sub.add_parser(
        "recognize",
        **options,
        description="Recognise the commands spoken in one or many audio files with a trained model. "
        "Prints one line (or record) per file with the words, their times and confidences.",
        epilog=_EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument("files", nargs="+", metavar="FILE", help="audio files (any format soundfile reads)")
    p.add_argument("--model", "-m", required=True, metavar="MODEL", help="model file made by `wordspot train`")
    p.add_argument("--format", choices=("text", "jsonl", "csv"), default="text",
                   help="text (default): one line per file; jsonl: one JSON object per file; csv: one row per word")
    p.add_argument("--times", action="store_true", help="text format: show each word's start and end in seconds")
    add_decoder_options(p)
    add_warp_option(p)
    p.set_defaults(func=_run)
    return p


def add_decoder_options(p) -> None:
    """Vocabulary, prior and search options (shared with ``wordspot evaluate``)."""
    p.add_argument("--lexicon", metavar="FILE",
                   help="use this vocabulary instead of the model's (words made of the model's phones)")
    p.add_argument("--prior", metavar="FILE", help="word-pair prior file (format: see `wordspot recognize --help`)")
    p.add_argument("--single-word", action="store_true", help="exactly one word per file (isolated commands)")
    p.add_argument("--jobs", "-j", type=int, default=1, metavar="N", help="files decoded at once, in threads (default 1)")
    d = DecoderSettings()
    p.add_argument("--beam", type=float, default=d.beam,
                   help="how far behind the best guess a guess may fall and still be followed (search beam, "
                   f"log units); larger is slower but loses fewer words (default {d.beam:g})")
    p.add_argument("--word-end-beam", type=float, default=d.word_end_beam,
                   help=f"the same for the ends of words (word-end beam; default {d.word_end_beam:g})")
    p.add_argument("--state-limit", type=int, default=d.state_limit,
                   help=f"most guesses kept at each step of the sound (states a frame; default {d.state_limit})")
    p.add_argument("--grammar-weight", type=float, default=d.grammar_weight,
                   help="how much the usual word order counts (weight of the word-pair prior; "
                   f"default {d.grammar_weight:g})")
    p.add_argument("--insertion-penalty", type=float, default=d.insertion_penalty,
                   help=f"score added for each word heard (log units); negative gives fewer words (default {d.insertion_penalty:g})")
    p.add_argument("--no-filler", action="store_true",
                   help="let only the commands and the pause explain the audio (no rejection of other talk)")
    p.add_argument("--filler-penalty", type=float, default=d.filler_penalty,
                   help="score added for each sound of other talk (log units, a phone of the filler); lower (more negative) lets more audio "
                        f"through as commands (default {d.filler_penalty:g})")
    p.add_argument("--pause-penalty", type=float, default=d.pause_penalty,
                   help=f"score added for each pause between words (log units; default {d.pause_penalty:g})")
    p.add_argument("--min-confidence", type=_probability, default=None, metavar="P",
                   help="drop words whose confidence is below P (0 keeps every word; default "
                   f"{DEFAULT_MIN_CONFIDENCE:g} for a model with calibrated confidences, else 0)")
    p.add_argument("--talk-gap", type=_seconds, default=d.talk_gap, metavar="S",
                   help="drop a command said with less than S seconds of pause between it and other talk "
                        f"(said amid a sentence); 0 turns this off; needs a threshold above 0 (default {d.talk_gap:g})")
    p.add_argument("--talk-length", type=_seconds, default=d.talk_length, metavar="S",
                   help="how many seconds of other talk count as talk for --talk-gap (shorter sounds next to "
                        f"a command, a breath or a click, do not; default {d.talk_length:g})")
    p.add_argument("--scorer-weight", type=_probability, default=d.scorer_weight, metavar="W",
                   help="share of the model's state scorer (a network over a window of frames) in the state "
                        f"scores, from 0 (mixtures only) to 1 (network only); needs a model that has one "
                        f"(default {d.scorer_weight:g})")
    p.add_argument("--scorer-scale", type=_positive, default=d.scorer_scale, metavar="S",
                   help=f"multiplies the state scorer's log scores (default {d.scorer_scale:g})")


def _probability(text: str) -> float:
    """An argparse type: a number from 0 to 1."""
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a number from 0 to 1, got {text!r}") from None
    if not 0.0 <= value <= 1.0:
        raise argparse.ArgumentTypeError(f"must be from 0 to 1, got {text}")
    return value


def _seconds(text: str) -> float:
    """An argparse type: a finite number of seconds >= 0."""
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a number of seconds >= 0, got {text!r}") from None
    if not (0.0 <= value < math.inf):
        raise argparse.ArgumentTypeError(f"must be a finite number of seconds >= 0, got {text}")
    return value


def _positive(text: str) -> float:
    """An argparse type: a finite number > 0."""
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a number > 0, got {text!r}") from None
    if not (0.0 < value < math.inf):
        raise argparse.ArgumentTypeError(f"must be a finite number > 0, got {text}")
    return value


def add_warp_option(p) -> None:
    """``--warp-voice``: the files' frequency warp chosen per file (recognize and evaluate only)."""
    p.add_argument("--warp-voice", action="store_true",
                   help="warp each file's frequency axis by the factor (0.88-1.12) under which its speech fits the "
                        "model's voice mixture best, so an unusual voice looks more like the training voices; "
                        "off by default (no gain on the dev voices; docs/experiments/2026-12-04-frequency-warping.md)")


def warp_note(model, settings: DecoderSettings) -> str:
    """A note when a warp is asked of a model without a voice mixture ("" otherwise)."""
    if settings.voice_warp and getattr(model, "voice", None) is None:
        return ("--warp-voice has no effect: this model has no voice mixture (models trained from scratch get one; "
                "the shipped starters and models adapted from them have none), so every file is left unwarped")
    return ""


def scorer_note(model, settings: DecoderSettings) -> str:
    """A note when a scorer weight is asked of a model without a state scorer ("" otherwise)."""
    if settings.scorer_weight > 0 and getattr(model, "scorer", None) is None:
        return (f"--scorer-weight {settings.scorer_weight:g} has no effect: this model has no state scorer, "
                "so its mixtures alone score the audio")
    return ""


def settings_from_args(args) -> DecoderSettings:
    """Decoder settings from the parsed options (shared with ``wordspot evaluate``)."""
    return DecoderSettings(
        beam=args.beam,
        word_end_beam=args.word_end_beam,
        state_limit=args.state_limit,
        grammar_weight=args.grammar_weight,
        insertion_penalty=args.insertion_penalty,
        single_word=args.single_word,
        filler=not args.no_filler,
        filler_penalty=args.filler_penalty,
        pause_penalty=args.pause_penalty,
        min_confidence=args.min_confidence,
        scorer_weight=args.scorer_weight,
        scorer_scale=args.scorer_scale,
        talk_gap=args.talk_gap,
        talk_length=args.talk_length,
        voice_warp=bool(getattr(args, "warp_voice", False)),
    )


def _note(r: Recognition) -> str:
    if r.error:
        return f"error: {r.error}"
    if not r.segments:
        return f"nothing recognised: {r.reason}"
    return ""


def format_text(r: Recognition, *, times: bool = False) -> str:
    """One line: the path, a tab, the words (with times on request) or a note."""
    if not r.segments:
        return f"{r.path}\t({_note(r)})"
    if times:
        body = " ".join(f"{s.word} {s.start:.2f}-{s.end:.2f}" for s in r.segments)
    else:
        body = r.text
    return f"{r.path}\t{body}"


def _num(x: float):
    return None if not math.isfinite(x) else round(float(x), 4)


def format_jsonl(r: Recognition) -> str:
    """One JSON object: path, words, segments (word, start, end, confidence, scores)."""
    record = {
        "path": r.path,
        "words": r.words,
        "segments": [
            {
                "word": s.word,
                "start": round(s.start, 3),
                "end": round(s.end, 3),
                "confidence": round(s.confidence, 4),
                "acoustic": _num(s.acoustic),
                "grammar": _num(s.grammar),
            }
            for s in r.segments
        ],
        "score": _num(r.score),
    }
    if r.dropped:
        record["below_threshold"] = [{"word": s.word, "start": round(s.start, 3), "end": round(s.end, 3),
                                      "confidence": round(s.confidence, 4), **({"amid_talk": True} if s.amid_talk else {})}
                                     for s in r.dropped]
    if r.reason:
        record["reason"] = r.reason
    if r.error:
        record["error"] = r.error
    return json.dumps(record, ensure_ascii=False)


_CSV_COLUMNS = ("path", "index", "word", "start", "end", "confidence", "note")


def write_csv(results, out) -> None:
    """A table with one row per word; a file without words gets one row with a note."""
    w = csv.writer(out, lineterminator="\n")
    w.writerow(_CSV_COLUMNS)
    for r in results:
        if not r.segments:
            w.writerow([r.path, "", "", "", "", "", _note(r)])
        for i, s in enumerate(r.segments, start=1):
            w.writerow([r.path, i, s.word, f"{s.start:.3f}", f"{s.end:.3f}", f"{s.confidence:.4f}", ""])


def _run(args) -> int:
    from wordspot.audio.band import narrow_band_note
    from wordspot.language.lexicon import read_lexicon
    from wordspot.model import load_model

    settings = settings_from_args(args)
    model = load_model(args.model)
    for note in (scorer_note(model, settings), warp_note(model, settings)):
        if note:
            print(f"wordspot: note: {note}", file=sys.stderr)
    lexicon = read_lexicon(args.lexicon) if args.lexicon else None
    results = recognize_files(
        model, args.files, settings=settings, lexicon=lexicon, prior=args.prior, jobs=args.jobs
    )
    out = sys.stdout
    if args.format == "csv":
        write_csv(results, out)
    for r in results:
        if args.format == "text":
            print(format_text(r, times=args.times), file=out)
        elif args.format == "jsonl":
            print(format_jsonl(r), file=out)
        if r.error:
            print(f"wordspot: error: {r.error}", file=sys.stderr)
    narrow = sum(1 for r in results if r.narrow_band)
    if narrow:
        print(f"wordspot: note: {narrow_band_note(narrow, len(results), model.features.sample_rate)}",
              file=sys.stderr)
    failed = sum(1 for r in results if r.error)
    if failed:
        print(f"wordspot: {failed} of {len(results)} files could not be processed", file=sys.stderr)
        return 1
    return 0
