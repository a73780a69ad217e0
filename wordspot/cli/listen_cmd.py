"""``wordspot listen``: commands from live audio on standard input, one line each as said."""

from __future__ import annotations

import argparse
import csv
import io
import json
import os
import signal
import sys

from wordspot.cli.recognize_cmd import add_decoder_options, scorer_note, settings_from_args
from wordspot.cli.scan_cmd import command_record, command_text, format_clock
from wordspot.stream.live import ListenSettings

__all__ = ["add_parser", "command_line", "COLUMNS"]

#: Fields of a command in the JSONL and CSV output (the CSV's header).
COLUMNS = ("start", "end", "words", "confidence")

_EPILOG = """\
examples (a bakery: a microphone above the counter, a program that acts on the commands):
  arecord -q -f S16_LE -r 16000 -c 1 -t raw | wordspot listen --model bakery.model --rate 16000 -
      00:00:04.12  00:00:04.80  oven start  0.93
      00:00:09.55  00:00:10.71  timer five minutes  0.81
  arecord -q -f S16_LE -r 16000 -c 1 -t wav | wordspot listen --model bakery.model --format jsonl
  sox morning.flac -t wav - | wordspot listen --model bakery.model --format csv

Input: standard input (or a named pipe or file) holding either a WAV stream (its header,
then the samples; a length the recorder left unknown is read to the end) or, with --rate,
raw little-endian PCM of 16 bits (--channels, default 1). Channels are averaged; any rate
is resampled to the model's.

Output: one line per command as soon as it is recognised, flushed at once; times are
seconds (csv, jsonl) or a clock (text) from the start of the stream, confidence is the
mean of the command's words' (a command is kept or dropped whole by it, as in wordspot
scan). csv and jsonl fields: start, end, words, confidence. A command is printed a
quarter of a second after it is said when a pause follows it, and within about a second
when other talk follows at once (the talk so far is recognised five times a second;
--wait-for-pause waits for the pause instead, with fewer false accepts in talk); --debug
adds a line a second on standard error with the level heard.

Stopping: Ctrl+C (SIGINT) or SIGTERM, or the end of the stream, recognises the stretch in
progress, prints it and exits with status 0. A broken stream (not WAV, a header cut short,
the end in the middle of a sample, a read error) prints the commands heard, one line
naming the problem on standard error, and exits with status 1; a bad model or option
exits with status 2. Voice commands are a convenience, never a safety device: keep a
physical stop within reach and let nothing dangerous start on voice alone.
"""


def add_parser(sub, **options):
    p = sub.add_parser(
        "listen",
        **options,
        description="Listen to live audio on standard input (a recorder program's pipe) and print each command "
        "as soon as it is said, with its time from the start, words and confidence.",
        epilog=_EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument("source", nargs="?", default="-", metavar="SOURCE",
                   help="'-' (default) for standard input, or a named pipe or file")
    p.add_argument("--model", "-m", required=True, metavar="MODEL", help="model file made by `wordspot train`")
    p.add_argument("--rate", type=int, metavar="R",
                   help="the input is raw 16-bit little-endian PCM at R samples a second (default: a WAV stream)")
    p.add_argument("--channels", type=int, default=1, metavar="C", help="channels of the raw PCM input (default 1)")
    p.add_argument("--format", choices=("text", "jsonl", "csv"), default="text",
                   help="text (default): readable lines; jsonl: one JSON object per command; csv: one row per command")
    d = ListenSettings()
    p.add_argument("--split-pause", type=float, default=d.split_pause, metavar="S",
                   help=f"a longer pause (seconds) between words starts a new command (default {d.split_pause:g})")
    p.add_argument("--wait-for-pause", action="store_true",
                   help="report a command only when the sound around it pauses: fewer false accepts in talk, but a "
                        "command followed at once by other talk waits for the end of it (default: report a command as "
                        "soon as it is followed by split-pause + 0.1 s without a command word)")
    add_decoder_options(p)
    p.set_defaults(func=_run)
    return p


def command_line(command, fmt: str) -> str:
    """The output line of one command (no newline)."""
    if fmt == "text":
        return command_text(command)
    record = command_record(command)
    if fmt == "jsonl":
        return json.dumps(record, ensure_ascii=False)
    buf = io.StringIO()
    csv.writer(buf, lineterminator="").writerow([f"{record['start']:.3f}", f"{record['end']:.3f}", record["words"],
                                                  record["confidence"]])
    return buf.getvalue()


class _Stop(Exception):
    """A stop signal arrived while waiting for input."""


class _Signals:
    """SIGINT and SIGTERM ask to stop: at once while waiting for input, else after the current block."""

    def __init__(self):
        self.asked = False
        self.waiting = False
        self._old = {}

    def _handle(self, signum, frame):
        self.asked = True
        if self.waiting:
            raise _Stop()

    def __enter__(self):
        for sig in (signal.SIGINT, signal.SIGTERM):
            self._old[sig] = signal.signal(sig, self._handle)
        return self

    def __exit__(self, *exc):
        for sig, old in self._old.items():
            signal.signal(sig, old)


def _open_source(source: str):
    """``(fd, close, name)`` for '-' (standard input) or a path."""
    from wordspot.errors import AudioError

    if source == "-":
        fd, name, close = sys.stdin.fileno(), "standard input", lambda: None
    else:
        try:
            fd = os.open(source, os.O_RDONLY)
        except OSError as exc:
            raise AudioError(f"{source}: cannot open ({exc.strerror or exc}); check the path") from None
        name, close = source, lambda: os.close(fd)
    _widen_pipe(fd)
    return fd, close, name


def _widen_pipe(fd: int) -> None:
    """Let a pipe hold a few seconds more, so the recorder never waits while a command is recognised."""
    try:
        import fcntl

        fcntl.fcntl(fd, getattr(fcntl, "F_SETPIPE_SZ", 1031), 1 << 20)
    except (OSError, ImportError, ValueError):
        pass  # not a pipe, or not Linux: the default buffer


class _Heartbeat:
    """One line a second of audio on standard error: time heard, level, speech or not."""

    def __init__(self, rate: int):
        self.rate, self.every = rate, rate
        self.count, self.sum_sq, self.peak = 0, 0.0, 0.0

    def add(self, block, listener) -> None:
        import numpy as np

        i = 0
        while i < block.shape[0]:
            take = block[i : i + self.every - self.count]
            self.sum_sq += float(np.dot(take, take))
            self.peak = max(self.peak, float(np.max(np.abs(take))) if take.size else 0.0)
            self.count += take.shape[0]
            i += take.shape[0]
            if self.count >= self.every:
                level = 10 * np.log10(max(self.sum_sq / self.count, 1e-10))
                peak = 20 * np.log10(max(self.peak, 1e-5))
                at = listener.heard_seconds - (block.shape[0] - i) / self.rate
                print(f"wordspot: heard {format_clock(at)}  level {level:6.1f} dBFS  peak {peak:6.1f} dBFS  "
                      f"speech {'yes' if listener.in_speech else 'no '}  held {listener.held_samples / listener.rate:.1f} s",
                      file=sys.stderr, flush=True)
                self.count, self.sum_sq, self.peak = 0, 0.0, 0.0


def _warm_up(recognizer) -> None:
    """Decode a moment of quiet so the first command does not wait for compilation."""
    import numpy as np

    from wordspot.audio.features import compute_features

    rate = recognizer.features.sample_rate
    quiet = np.random.default_rng(0).normal(scale=1e-3, size=rate // 2).astype(np.float32)
    recognizer.decode(compute_features(quiet, recognizer.features))


def _run(args) -> int:
    from wordspot.decoding.decoder import build_recognizer
    from wordspot.errors import AudioError, DecodingError
    from wordspot.language.lexicon import read_lexicon
    from wordspot.model import load_model
    from wordspot.stream.live import LiveListener
    from wordspot.stream.pipe import PcmReader, StreamFormat, read_wav_header

    if args.rate is None and args.channels != 1:
        raise DecodingError("--channels is for raw PCM input; give --rate too (a WAV stream names its own)")
    raw = StreamFormat(rate=args.rate, channels=args.channels) if args.rate is not None else None
    # the decoder options carry --min-confidence; given, it judges whole commands too (as scan)
    given = {} if getattr(args, "min_confidence", None) is None else {"command_confidence": None}
    settings = ListenSettings(split_pause=args.split_pause, **given,
                              **({"early_every": 0.0} if args.wait_for_pause else {}))
    model = load_model(args.model)
    decoder_settings = settings_from_args(args)
    if scorer_note(model, decoder_settings) and not args.quiet:
        print(f"wordspot: note: {scorer_note(model, decoder_settings)}", file=sys.stderr)
    lexicon = read_lexicon(args.lexicon) if args.lexicon else None
    recognizer = build_recognizer(model, settings=decoder_settings, lexicon=lexicon, prior=args.prior)
    _warm_up(recognizer)

    out = sys.stdout
    if args.format == "csv":
        out.write(",".join(COLUMNS) + "\n")
        out.flush()
    problem = ""
    fd, close, name = _open_source(args.source)
    if args.debug:
        print(f"wordspot: ready, listening to {'standard input' if args.source == '-' else args.source}",
              file=sys.stderr, flush=True)
    read = lambda n: os.read(fd, n)  # noqa: E731  (what is there, up to n bytes)
    reader = None
    listener = None
    with _Signals() as signals:

        def emit(commands) -> None:
            for c in commands:
                out.write(command_line(c, args.format) + "\n")
            if commands:
                out.flush()

        def waiting_read(n: int) -> bytes:
            if signals.asked:
                raise _Stop()
            signals.waiting = True
            try:
                return read(n)
            finally:
                signals.waiting = False

        try:
            if raw is not None:
                fmt, limit = raw, None
                first = waiting_read(4)
                if first == b"RIFF":
                    raise AudioError(f"{name}: starts with a WAV header but --rate says raw PCM; leave out --rate "
                                     "(and --channels) for a WAV stream")
                pending = [first]

                def read_raw(n: int) -> bytes:
                    return pending.pop() if pending else waiting_read(n)

                reader = PcmReader(read_raw, fmt, source=name)
            else:
                fmt, limit = read_wav_header(waiting_read, name)
                reader = PcmReader(waiting_read, fmt, limit=limit, source=name)
            listener = LiveListener(recognizer, input_rate=fmt.rate, settings=settings, path=args.source)
            beat = _Heartbeat(fmt.rate) if args.debug else None
            for block in reader:
                emit(listener.push(block))
                if beat is not None:
                    beat.add(block, listener)
                if signals.asked:
                    break
            else:
                signals.asked = False  # the end of the stream, no signal
        except _Stop:
            pass
        except AudioError as exc:
            problem = str(exc)
        except BrokenPipeError:
            close()
            return _reader_gone()
        try:
            if signals.asked and listener is not None:
                emit(listener.push(_drain(fd, reader)))
            close()
            if listener is not None:
                emit(listener.finish())
        except BrokenPipeError:
            return _reader_gone()
    heard = f"{listener.heard_seconds:.1f} s" if listener is not None else "nothing"
    if problem:
        after = f" (heard {heard}; the commands said in it are printed above)" if listener is not None else ""
        print(f"wordspot: error: {problem}{after}", file=sys.stderr)
        return 1
    if args.debug:
        print(f"wordspot: stopped after {heard}", file=sys.stderr)
    return 0


def _drain(fd: int, reader, most_seconds: float = 30.0):
    """On a stop signal: the samples already in the pipe (whole sample frames), without waiting for more."""
    import numpy as np

    from wordspot.stream.pipe import decode_samples

    fmt = reader.fmt
    data, most = reader.take_rest(), int(most_seconds * fmt.rate) * fmt.frame_bytes
    try:
        os.set_blocking(fd, False)
        while len(data) < most:
            chunk = os.read(fd, 1 << 16)
            if not chunk:
                break
            data += chunk
    except OSError:  # nothing more there (or not a pipe)
        pass
    whole = len(data) - len(data) % fmt.frame_bytes
    return decode_samples(data[:whole], fmt) if whole else np.zeros(0, np.float32)


def _reader_gone() -> int:
    """Standard output was closed by the program reading it: stop quietly."""
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
    except OSError:
        pass
    return 0
