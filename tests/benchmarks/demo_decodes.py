"""Every demo test file decoded in both modes, written to JSON or compared with an earlier run.

Not a test (pytest does not collect it). A change that should not alter recognition (a
faster kernel, a rewritten feature step) is checked by running this before and after the
change on the same model and comparing: the same words, the same frames and times, and
the largest score difference.

Usage::

    python tests/benchmarks/demo_decodes.py --model demo.model --out before.json
    ...change the code...
    python tests/benchmarks/demo_decodes.py --model demo.model --out after.json --against before.json
"""

from __future__ import annotations

import argparse
import json
import sys
import time
from pathlib import Path

from wordspot.corpus import read_manifest
from wordspot.decoding.decoder import DecoderSettings, recognize_files
from wordspot.model import load_model

REPO = Path(__file__).resolve().parents[2]
MANIFESTS = ("test.csv", "test-phrases.csv", "test-noisy.csv", "new-words.csv")
MODES = {"word-loop": False, "single-word": True}


def decode_all(model, jobs: int) -> dict:
    """``{mode: {path: record}}`` for every file of the demo test manifests."""
    paths = [u.path for name in MANIFESTS for u in read_manifest(REPO / "recordings" / name)]
    out = {}
    for mode, single in MODES.items():
        results = recognize_files(model, paths, settings=DecoderSettings(single_word=single), jobs=jobs)
        out[mode] = {
            str(Path(r.path).relative_to(REPO)): {
                "words": r.words,
                "frames": [[s.first_frame, s.last_frame] for s in r.segments],
                "times": [[s.start, s.end] for s in r.segments],
                "score": r.score,
                "acoustic": [s.acoustic for s in r.segments],
                "confidence": [s.confidence for s in r.segments],
                "reason": r.reason,
                "error": r.error,
            }
            for r in results
        }
    return out


def compare(before: dict, after: dict) -> bool:
    """Print what differs; True when words, frames and times are the same everywhere."""
    same = True
    for mode in MODES:
        a, b = before[mode], after[mode]
        if set(a) != set(b):
            print(f"{mode}: the file lists differ")
            same = False
            continue
        differ = [p for p in a if any(a[p][k] != b[p][k] for k in ("words", "frames", "times", "reason", "error"))]
        finite = [p for p in a if a[p]["score"] is not None and b[p]["score"] is not None]
        score = max((abs(a[p]["score"] - b[p]["score"]) for p in finite), default=0.0)
        exact = sum(a[p] == b[p] for p in a)
        print(f"{mode}: {len(a)} files; words/frames/times differ on {len(differ)}; "
              f"identical in every number on {exact}; largest score difference {score:.3g}")
        for p in differ[:10]:
            print(f"  {p}: {a[p]['words']} {a[p]['frames']} -> {b[p]['words']} {b[p]['frames']}")
        same = same and not differ
    return same


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--model", required=True, help="a trained model file")
    parser.add_argument("--out", required=True, help="JSON file to write the results to")
    parser.add_argument("--against", help="an earlier --out file to compare with")
    parser.add_argument("--jobs", type=int, default=2, help="threads (default 2)")
    args = parser.parse_args()
    t = time.perf_counter()
    results = decode_all(load_model(args.model), args.jobs)
    Path(args.out).write_text(json.dumps(results, indent=0), encoding="utf-8")
    print(f"decoded {sum(len(v) for v in results.values())} file-mode pairs in {time.perf_counter() - t:.1f} s")
    if args.against:
        return 0 if compare(json.loads(Path(args.against).read_text(encoding="utf-8")), results) else 1
    return 0


if __name__ == "__main__":
    sys.exit(main())
