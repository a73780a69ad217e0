"""How fast ``wordspot scan`` runs on long recordings, and that its memory stays flat.

Not a test (pytest does not collect it). Goal: one hour of audio scanned in under a minute
on one core, with the same peak memory for 10 and 60 minutes.

What it does: glues recordings of the demo's test voices (single words and phrases) into
a 10-minute and a 60-minute 16 kHz WAV file in a temporary folder (tests/long_audio.py:
mostly background, a noise bed at -50 dBFS with clatter bursts, commands 5-40 s apart),
then scans each in its own child process (so that each peak is its own) with every thread
pool limited to one thread. Each child reports CPU time (``time.process_time``), wall time,
resident memory after loading the model (``VmRSS``) and its peak (``ru_maxrss``), and the
score against the glued file's time labels.

Usage::

    python tests/benchmarks/bench_scan.py                      # the starter with the bakery words
    python tests/benchmarks/bench_scan.py --model bakery.model
"""

from __future__ import annotations

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "NUMBA_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse  # noqa: E402
import json  # noqa: E402
import subprocess  # noqa: E402
import sys  # noqa: E402
import tempfile  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

LEXICON = HERE.parents[1] / "lexicon" / "bakery.txt"
TEST_VOICES = ("flite-rms", "festival-ked", "espeak-en-gb-scotland-f2", "espeak-en-029-m4",
               "espeak-en-gb-x-gbcwmd-f4")


def _rss_mb() -> float:
    with open("/proc/self/status") as f:
        for line in f:
            if line.startswith("VmRSS:"):
                return int(line.split()[1]) / 1024
    return float("nan")


def _child(audio: str, labels: str, model_name: str) -> None:
    import resource

    from wordspot.decoding.decoder import build_recognizer
    from wordspot.evaluation.scan_run import score_results
    from wordspot.evaluation.time_labels import read_time_labels
    from wordspot.language.lexicon import read_lexicon
    from wordspot.model import load_model
    from wordspot.stream.scan import scan_file

    lexicon = read_lexicon(LEXICON) if model_name == "starter" else None
    recognizer = build_recognizer(load_model(model_name), lexicon=lexicon)
    # compile or load the kernels before timing (as any second file would find them)
    warm = np.random.default_rng(0).normal(size=(100, recognizer.mixtures.dim)).astype(np.float32)
    recognizer.decode(warm)
    rss_loaded = _rss_mb()
    cpu, wall = time.process_time(), time.perf_counter()
    result = scan_file(recognizer, audio)
    cpu, wall = time.process_time() - cpu, time.perf_counter() - wall
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    score = score_results(read_time_labels(labels), [result])
    print(json.dumps({"minutes": result.duration / 60, "cpu": cpu, "wall": wall, "rss_loaded": rss_loaded,
                      "peak": peak, "stretches": result.stretches, "commands": len(result.commands),
                      "labels": score.labels, "hits": score.hits, "false_accepts": score.false_accepts,
                      "on_time": score.boundary()["on_time"]}))


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--model", default="starter", help="model file (default: the starter with the bakery words)")
    ap.add_argument("--minutes", type=float, nargs="+", default=[10.0, 60.0])
    ap.add_argument("--seed", type=int, default=20261202)
    ap.add_argument("--gap", type=float, nargs=2, default=[5.0, 40.0], metavar=("MIN", "MAX"),
                    help="seconds between commands (default 5 40; 0.5 2 gives speech nearly all the time)")
    ap.add_argument("--child", nargs=3, help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.child:
        _child(*args.child)
        return 0
    from long_audio import demo_items, glue
    from wordspot.evaluation.time_labels import write_time_labels

    items = demo_items("test.csv", TEST_VOICES) + demo_items("test-phrases.csv", TEST_VOICES)
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        for minutes in args.minutes:
            rng = np.random.default_rng(args.seed)
            order = [items[i] for i in rng.permutation(len(items))]
            audio = Path(tmp) / f"long-{minutes:g}min.wav"
            began = time.perf_counter()
            rec = glue(audio, order, rng, minutes=minutes, gap=tuple(args.gap), noise_dbfs=-50.0, clatter=2.0)
            labels = write_time_labels(Path(tmp) / f"long-{minutes:g}min.csv", [rec])
            print(f"made {audio.name} ({len(rec.commands)} commands) in {time.perf_counter() - began:.0f} s",
                  flush=True)
            out = subprocess.run([sys.executable, __file__, "--child", str(audio), str(labels), args.model],
                                 check=True, capture_output=True, text=True)
            rows.append(json.loads(out.stdout.strip().splitlines()[-1]))
    load = os.getloadavg()
    print(f"\nwordspot scan, one core (load average {load[0]:.1f} / {load[1]:.1f} / {load[2]:.1f}), model {args.model}, "
          f"gaps {args.gap[0]:g}-{args.gap[1]:g} s")
    print("| audio | CPU s | wall s | CPU s per audio hour | RSS after loading (MB) | peak RSS (MB) "
          "| stretches | hits / labels | false accepts | hits on time |")
    print("| ---: | ---: | ---: | ---: | ---: | ---: | ---: | ---: | ---: | ---: |")
    for r in rows:
        print(f"| {r['minutes']:.0f} min | {r['cpu']:.1f} | {r['wall']:.1f} | {r['cpu'] / r['minutes'] * 60:.1f} "
              f"| {r['rss_loaded']:.0f} | {r['peak']:.0f} | {r['stretches']} | {r['hits']} / {r['labels']} "
              f"| {r['false_accepts']} | {100 * r['on_time']:.0f}% |")
    return 0


if __name__ == "__main__":
    sys.exit(main())
