"""``wordspot record``: a page in the browser for recording takes of every command word."""

from __future__ import annotations

import argparse
import signal
import sys
from pathlib import Path

__all__ = ["add_parser"]

_EPILOG = """\
examples (a bakery: bakers with dough on their hands call out commands):
  wordspot record my-takes/                              words typed in on the page
  wordspot record my-takes/ --lexicon lexicon/bakery.txt --takes 3
  wordspot record my-takes/ --speaker baker-b --port 8766

Open the address it prints in a browser on this computer (the server answers only at
127.0.0.1). Press R to record and to stop, K to keep a take, A to record it again, L to
listen to it, N and B for the next word and back. Each take is trimmed of its quiet ends
and saved as a 16-bit WAV file at the model rate in FOLDER/audio/SPEAKER/, and listed in
FOLDER/train.csv (or FOLDER/held-out.csv when kept for testing). Words typed on the page
go into FOLDER/pronunciations.txt unless --lexicon names a file. When every word has
enough takes the page trains a model (FOLDER/words.model), lets you try it, and listens
for commands while you switch Listen on (S), listing each one heard with its confidence.
Stop the server with Ctrl+C (or a TERM signal, as service managers send); nothing
half-written is left behind.
"""


def add_parser(sub, **options):
    p = sub.add_parser(
        "record",
        **options,
        description="Serve a recording page on this computer (127.0.0.1 only): it lists the words, "
        "records takes from the microphone, trims and checks them, keeps the manifests in step, "
        "offers training and a try-it box, and listens for commands while you ask it to.",
        epilog=_EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument("folder", metavar="FOLDER", help="takes folder (created if missing)")
    p.add_argument("--lexicon", metavar="LEX",
                   help="lexicon file whose words to record; words added on the page are appended to it "
                   "(default FOLDER/pronunciations.txt, or FOLDER/lexicon.txt, its earlier name, when only "
                   "that one is there)")
    p.add_argument("--takes", type=int, default=3, metavar="N", help="takes of every word per speaker (default 3)")
    p.add_argument("--speaker", default="baker-a", metavar="NAME", help="speaker name to start with (default baker-a)")
    p.add_argument("--port", type=int, default=8765, metavar="PORT",
                   help="port on 127.0.0.1 (default 8765; 0 picks a free one)")
    p.add_argument("--sample-rate", type=int, default=16000, metavar="HZ",
                   help="rate the takes are saved at, the model rate (default 16000)")
    p.add_argument("--open", action="store_true", help="open the page in the default browser")
    p.add_argument("--from-scratch", action="store_true",
                   help="train every phone from the takes alone instead of adapting the starter model")
    p.set_defaults(func=_run)
    return p


def _run(args) -> int:
    from wordspot.errors import WordspotError
    from wordspot.web.server import RecordingApp, RecordingSettings, serve

    if args.takes < 1:
        raise WordspotError(f"--takes must be 1 or more, got {args.takes}")
    if not 0 <= args.port <= 65535:
        raise WordspotError(f"--port must be 0-65535 (0 = any free port), got {args.port}")
    if args.sample_rate not in (8000, 16000):
        raise WordspotError(f"--sample-rate must be 16000 or 8000, got {args.sample_rate}")
    folder = Path(args.folder)
    lexicon = Path(args.lexicon) if args.lexicon else None  # None: the folder's own file
    app = RecordingApp(RecordingSettings(folder=folder, lexicon=lexicon, takes=args.takes,
                                         speaker=args.speaker, sample_rate=args.sample_rate,
                                         from_scratch=args.from_scratch))

    def ready(url: str) -> None:
        for note in app.notes:
            print(f"wordspot: note: {note}", file=sys.stderr)
        print(f"recording page: {url}  (takes in {app.takes.folder}; Ctrl+C stops)", flush=True)
        if args.open:
            import webbrowser

            webbrowser.open(url)

    old_term = signal.signal(signal.SIGTERM, _stop_on_terminate)
    try:
        serve(app, port=args.port, verbose=not args.quiet and args.debug, ready=ready)
    except KeyboardInterrupt:
        print("recording page stopped", file=sys.stderr)
    finally:
        signal.signal(signal.SIGTERM, old_term)
    return 0


def _stop_on_terminate(signum, frame):
    """A TERM signal stops the page the way Ctrl+C does (the server closes, then the message).

    Ctrl+C itself is left as the shell set it up: a page started as a background command by
    a shell without job control (a script, some CI runners) inherits SIGINT ignored (POSIX
    shell rules for asynchronous lists), so stop that one with ``kill PID``.
    """
    raise KeyboardInterrupt
