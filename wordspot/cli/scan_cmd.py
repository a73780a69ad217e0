"""``wordspot scan``: the commands said in long recordings, with their times."""

from __future__ import annotations

import argparse
import csv
import io
import json
import sys

from wordspot.cli.recognize_cmd import add_decoder_options, scorer_note, settings_from_args
from wordspot.stream.scan import ScanResult, ScanSettings

__all__ = ["add_parser", "format_clock", "command_text", "command_record", "text_lines", "jsonl_lines",
           "write_csv", "COLUMNS"]

#: Fields of a command in the JSONL and CSV output (the CSV's header).
COLUMNS = ("path", "start", "end", "words", "confidence")

_EPILOG = """\
examples (a bakery: a microphone above the counter records the whole morning):
  wordspot scan --model bakery.model morning.flac
      morning.flac (02:14:06.30, 2 commands)
        00:01:23.45  00:01:24.10  oven start  0.93
        00:05:12.90  00:05:14.02  timer five minutes  0.81
  wordspot scan --model bakery.model --format csv -o found.csv recordings/*.flac
  wordspot scan --model bakery.model --format jsonl --min-confidence 0.5 morning.flac > found.jsonl
  wordspot scan --model bakery.model --reference long.csv       scan the labelled recordings, score

csv and jsonl: one record per command (path, start and end in seconds, words separated by
spaces, confidence = the mean of its words'); a file in which nothing was found gets one
record with empty times and words, so a csv output is itself a time-label file.

time-label file (--reference): CSV with the header `path,start,end,words`, one row per
command said (seconds from the start of the file); a recording without commands has one
row with start, end and words empty; paths relative to the file's folder:
  path,start,end,words
  long/morning.flac,83.41,84.12,oven start
  long/night.flac,,,
With --reference the score (hits, misses, false accepts per hour, boundary errors) goes to
standard output (after the commands in text format), or to standard error while csv or
jsonl records go there.

Exit status: 0 when every file was scanned, 1 when some could not be read, 2 on a bad
model, lexicon, label file or option. Voice commands are a convenience, never a safety device.
"""


def add_parser(sub, **options):
    p = sub.add_parser(
        "scan",
        **options,
        description="Find the commands said in recordings of any length (minutes to hours): the "
        "stretches with speech are found by their energy and each is recognised with the model. "
        "Prints one line (or record) per command with its start, end, words and confidence.",
        epilog=_EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument("files", nargs="*", metavar="FILE", help="audio files (any format soundfile reads)")
    p.add_argument("--model", "-m", required=True, metavar="MODEL", help="model file made by `wordspot train`")
    p.add_argument("--reference", "-r", metavar="LABELS",
                   help="time-label CSV file: scan its recordings (when no FILE is given) and score the result")
    p.add_argument("--format", choices=("text", "jsonl", "csv"), default="text",
                   help="text (default): readable lines; jsonl: one JSON object per command; csv: one row per command")
    p.add_argument("--output", "-o", metavar="OUT", help="write the commands to this file (default: standard output)")
    d = ScanSettings()
    p.add_argument("--split-pause", type=float, default=d.split_pause, metavar="S",
                   help=f"a longer pause (seconds) between words starts a new command (default {d.split_pause:g})")
    add_decoder_options(p)
    p.set_defaults(func=_run)
    return p


def format_clock(seconds: float) -> str:
    """``HH:MM:SS.ss`` (hours as many digits as needed)."""
    centi = int(round(seconds * 100))
    h, rest = divmod(centi, 360000)
    m, rest = divmod(rest, 6000)
    return f"{h:02d}:{m:02d}:{rest / 100:05.2f}"


def command_text(command) -> str:
    """One command as text: start, end (``HH:MM:SS.ss``), words, confidence."""
    return f"{format_clock(command.start)}  {format_clock(command.end)}  {command.text}  {command.confidence:.2f}"


def command_record(command) -> dict:
    """One command's fields for JSON lines and CSV: start, end (s), words, confidence."""
    return {"start": round(command.start, 3), "end": round(command.end, 3), "words": command.text,
            "confidence": round(command.confidence, 4)}


def text_lines(result: ScanResult) -> list[str]:
    """A heading line for the file, then one indented line per command."""
    n = len(result.commands)
    head = f"{result.path} ({format_clock(result.duration)}, {n} command{'' if n == 1 else 's'})"
    return [head] + [f"  {command_text(c)}" for c in result.commands]


def _records(result: ScanResult):
    if not result.commands:
        yield {"path": result.path, "start": None, "end": None, "words": "", "confidence": None}
    for c in result.commands:
        yield {"path": result.path, **command_record(c)}


def jsonl_lines(result: ScanResult) -> list[str]:
    """One JSON object per command (keys ``COLUMNS``); one with empty words if none was found."""
    return [json.dumps(r, ensure_ascii=False) for r in _records(result)]


def write_csv(results, out, *, header: bool = True) -> None:
    """One row per command (columns ``COLUMNS``); one row with empty cells if none was found."""
    w = csv.writer(out, lineterminator="\n")
    if header:
        w.writerow(COLUMNS)
    for result in results:
        for r in _records(result):
            w.writerow(["" if r[c] is None else (f"{r[c]:.3f}" if c in ("start", "end") else r[c])
                        for c in COLUMNS])


def _emit(result: ScanResult, fmt: str, out, first: bool) -> None:
    if result.error:
        return
    if fmt == "text":
        out.write("\n".join(text_lines(result)) + "\n")
    elif fmt == "jsonl":
        out.write("\n".join(jsonl_lines(result)) + "\n")
    else:
        write_csv([result], out, header=first)


def _run(args) -> int:
    from wordspot.decoding.decoder import build_recognizer
    from wordspot.errors import DecodingError, WordspotError
    from wordspot.evaluation.time_labels import read_time_labels
    from wordspot.language.lexicon import read_lexicon
    from wordspot.model import load_model

    labels = read_time_labels(args.reference) if args.reference else None
    if labels is not None and args.files:
        raise DecodingError("give either audio files or --reference (which names its own recordings), not both")
    files = [str(r.path) for r in labels] if labels is not None else args.files
    if not files:
        raise DecodingError("no audio files given; name one or more, or a time-label file with --reference")
    # the decoder options carry --min-confidence; given, it judges whole commands too
    given = {} if getattr(args, "min_confidence", None) is None else {"command_confidence": None}
    settings = ScanSettings(split_pause=args.split_pause, **given)
    model = load_model(args.model)
    decoder_settings = settings_from_args(args)
    if scorer_note(model, decoder_settings):
        print(f"wordspot: note: {scorer_note(model, decoder_settings)}", file=sys.stderr)
    lexicon = read_lexicon(args.lexicon) if args.lexicon else None
    recognizer = build_recognizer(model, settings=decoder_settings, lexicon=lexicon, prior=args.prior)

    from wordspot.stream.scan import scan_files

    out = io.StringIO() if args.output else sys.stdout
    if args.output or args.jobs > 1:
        results = scan_files(recognizer, files, settings=settings, jobs=args.jobs, quiet=args.quiet)
        for i, result in enumerate(results):
            _emit(result, args.format, out, i == 0)
    else:  # print each file's commands as soon as it is scanned
        results = []
        for path in files:
            results.extend(scan_files(recognizer, [path], settings=settings, quiet=args.quiet))
            _emit(results[-1], args.format, out, len(results) == 1)
            out.flush()
    for r in results:
        if r.error:
            print(f"wordspot: error: {r.error}", file=sys.stderr)
    if args.output:
        from wordspot.util.atomic import write_bytes_atomically

        try:
            write_bytes_atomically(args.output, out.getvalue().encode("utf-8"))
        except OSError as exc:
            raise WordspotError(f"{args.output}: cannot write the output ({exc.strerror or exc}); "
                                "check that the folder exists and is writable") from None
    if labels is not None:
        from wordspot.evaluation.scan_run import score_results
        from wordspot.evaluation.timed import format_timed_score

        summary = format_timed_score(score_results(labels, results))
        print(summary, file=sys.stdout if args.output or args.format == "text" else sys.stderr)
    failed = sum(1 for r in results if r.error)
    if failed:
        print(f"wordspot: {failed} of {len(results)} files could not be scanned", file=sys.stderr)
        return 1
    return 0
