"""Recognition from audio file to words: this tree against an earlier commit, side by side.

Not a test (pytest does not collect it). For a change that should make recognition faster
without changing what it hears, this runs ``Recognizer.decode_file`` over the same files
with the code of this tree and with the code of ``--rev`` (read with ``git archive`` into
a temporary folder), each in its own worker process with one thread, and

- compares the results file by file: the words kept and dropped, their frames, the
  reason of an empty result, the narrowband flag, each word's confidence and its measures (largest differences printed; the words must be identical and the
  confidences within ``--tolerance``, default 1e-4);
- times the two alternately, whole passes over the files in several rounds (CPU time of
  each worker, ``time.process_time``; the order swapped every other round), and prints
  each tree's real-time factor (CPU seconds per second of audio) and the ratio of their
  times (median over rounds, with each round's ratio).

Files: ``--manifest`` (default the demo's ``recordings/train.csv``, the training voices,
dev voices included), every ``--every``-th row. Settings: as ``tests/benchmarks/compare.py``
times recognition (``DecoderSettings(single_word=True)``, the default beams and scorer
weight), or the word loop with ``--word-loop``.

Usage::

    python tests/benchmarks/bench_recognition_change.py --model bakery.model --rev main
    python tests/benchmarks/bench_recognition_change.py --model bakery.model --rev 1a2b3c4 --every 4 --rounds 7
"""

from __future__ import annotations

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "NUMBA_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse  # noqa: E402
import json  # noqa: E402
import math  # noqa: E402
import statistics  # noqa: E402
import subprocess  # noqa: E402
import sys  # noqa: E402
import tarfile  # noqa: E402
import tempfile  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

REPO = Path(__file__).resolve().parents[2]


# ----------------------------------------------------------------------------- worker side

def _worker(model_path: str, list_path: str, word_loop: bool) -> int:
    """Load the model, then answer every line on stdin: ``results`` or ``time``."""
    from wordspot.audio.reading import audio_duration
    from wordspot.decoding.decoder import DecoderSettings, build_recognizer
    from wordspot.model import load_model

    paths = Path(list_path).read_text(encoding="utf-8").split("\n")
    paths = [p for p in paths if p]
    rec = build_recognizer(load_model(model_path), settings=DecoderSettings(single_word=not word_loop))
    for p in paths[:3]:  # compiled kernels, caches
        rec.decode_file(p)
    audio = sum(audio_duration(p) for p in paths)
    print(json.dumps({"ready": True, "audio": audio}), flush=True)
    for line in sys.stdin:
        what = line.strip()
        if what == "time":
            t0 = time.process_time()
            for p in paths:
                rec.decode_file(p)
            print(json.dumps({"cpu": time.process_time() - t0}), flush=True)
        elif what == "results":
            out = []
            for p in paths:
                r = rec.decode_file(p)
                words = [[s.word, s.confidence, [None if math.isnan(m) else m for m in s.measures], s.first_frame,
                          s.last_frame] for s in r.segments + r.dropped]
                out.append({"kept": r.words, "words": words, "error": r.error, "reason": r.reason,
                            "narrow_band": r.narrow_band})
            print(json.dumps({"results": out}), flush=True)
        else:
            break
    return 0


# ----------------------------------------------------------------------------- parent side

class _Tree:
    def __init__(self, name: str, root: Path, args, list_path: Path):
        env = dict(os.environ, PYTHONPATH=str(root))
        cmd = [sys.executable, str(Path(__file__).resolve()), "--worker", "--model", str(Path(args.model).resolve()),
               "--file-list", str(list_path)] + (["--word-loop"] if args.word_loop else [])
        self.name = name
        self.proc = subprocess.Popen(cmd, cwd=REPO, env=env, stdin=subprocess.PIPE, stdout=subprocess.PIPE,
                                     text=True)
        self.audio = self._read()["audio"]

    def _read(self) -> dict:
        line = self.proc.stdout.readline()
        if not line:
            raise SystemExit(f"the worker for {self.name} stopped (see its messages above)")
        return json.loads(line)

    def ask(self, what: str) -> dict:
        self.proc.stdin.write(what + "\n")
        self.proc.stdin.flush()
        return self._read()

    def close(self) -> None:
        try:
            self.proc.stdin.write("stop\n")
            self.proc.stdin.close()
        except (BrokenPipeError, ValueError):
            pass
        self.proc.wait(timeout=60)


def _earlier_tree(rev: str, folder: Path) -> Path:
    """The package as it was at ``rev`` under ``folder`` (``git archive``)."""
    archive = folder / "earlier.tar"
    subprocess.run(["git", "archive", "--format=tar", "-o", str(archive), rev, "wordspot"], cwd=REPO, check=True)
    with tarfile.open(archive) as tar:
        tar.extractall(folder / "tree", filter="data")
    return folder / "tree"


def compare_results(a: list, b: list, tolerance: float) -> tuple[list[str], float, float, int]:
    """(files whose words differ or whose confidences differ by more than ``tolerance``,
    largest confidence difference, largest measure difference, words compared)."""
    bad, conf_diff, measure_diff, n_words = [], 0.0, 0.0, 0
    for i, (x, y) in enumerate(zip(a, b)):
        same_words = (x["kept"] == y["kept"] and [w[0] for w in x["words"]] == [w[0] for w in y["words"]]
                      and [w[3:] for w in x["words"]] == [w[3:] for w in y["words"]] and x["error"] == y["error"]
                      and x["reason"] == y["reason"] and x.get("narrow_band") == y.get("narrow_band"))
        worst = 0.0
        for wx, wy in zip(x["words"], y["words"]):
            n_words += 1
            worst = max(worst, abs(wx[1] - wy[1]))
            for mx, my in zip(wx[2], wy[2]):
                if (mx is None) != (my is None):
                    measure_diff = math.inf
                elif mx is not None:
                    measure_diff = max(measure_diff, abs(mx - my))
        conf_diff = max(conf_diff, worst)
        if not same_words or worst > tolerance:
            bad.append(f"file {i}: {x['kept']} / {y['kept']}, confidence difference {worst:.2e}")
    return bad, conf_diff, measure_diff, n_words


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--model", required=True, help="a trained model file (with its state scorer)")
    parser.add_argument("--rev", default="main", help="the git commit to compare with (default main)")
    parser.add_argument("--manifest", default=str(REPO / "recordings" / "train.csv"),
                        help="the files to recognise (default the demo's train.csv)")
    parser.add_argument("--every", type=int, default=4, help="take every N-th row (default 4)")
    parser.add_argument("--rounds", type=int, default=5, help="timing rounds (default 5)")
    parser.add_argument("--tolerance", type=float, default=1e-4, help="largest confidence difference allowed")
    parser.add_argument("--word-loop", action="store_true", help="the word loop instead of one word per file")
    parser.add_argument("--worker", action="store_true", help=argparse.SUPPRESS)
    parser.add_argument("--file-list", help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.worker:
        return _worker(args.model, args.file_list, args.word_loop)

    from wordspot.corpus import read_manifest

    manifest = Path(args.manifest)
    paths = [str(u.path) for u in read_manifest(manifest)][:: max(1, args.every)]
    with tempfile.TemporaryDirectory() as tmp:
        list_path = Path(tmp) / "files.txt"
        list_path.write_text("\n".join(paths) + "\n", encoding="utf-8")
        here = _Tree("this tree", REPO, args, list_path)
        old = _Tree(args.rev, _earlier_tree(args.rev, Path(tmp)), args, list_path)
        try:
            mode = "word loop" if args.word_loop else "one word per file"
            print(f"{len(paths)} files of {manifest.name} ({here.audio:.1f} s of audio), {mode}; "
                  f"this tree against {args.rev}")
            ra, rb = here.ask("results")["results"], old.ask("results")["results"]
            bad, conf_diff, measure_diff, n_words = compare_results(ra, rb, args.tolerance)
            print(f"results: {len(paths) - len(bad)} of {len(paths)} files the same ({n_words} words; words and "
                  f"frames identical, confidences within {args.tolerance:g}); largest confidence difference "
                  f"{conf_diff:.2e}, largest measure difference {measure_diff:.2e}")
            for line in bad[:10]:
                print("  differs: " + line)
            times = {here.name: [], old.name: []}
            for r in range(args.rounds):
                for tree in (here, old) if r % 2 == 0 else (old, here):
                    times[tree.name].append(tree.ask("time")["cpu"])
            ratios = [o / n for n, o in zip(times[here.name], times[old.name])]
            for name, t in times.items():
                med = statistics.median(t)
                print(f"  {name}: median {med:.3f} s CPU, real-time factor {med / here.audio:.5f} "
                      f"(rounds {' '.join(f'{x:.3f}' for x in t)})")
            print(f"  {args.rev} / this tree: {statistics.median(ratios):.2f}x (median of {args.rounds} rounds: "
                  f"{' '.join(f'{x:.2f}' for x in ratios)})")
        finally:
            here.close()
            old.close()
    return 0 if not bad else 1


if __name__ == "__main__":
    sys.exit(main())
