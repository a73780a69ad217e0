#!/usr/bin/env python3
"""Cost of the filler: search time with and without the background words, side by side.

Emissions of the demo test files (single words and phrases) are computed once; then the
search (with the confidence measures) runs over all of them with the filler off and on,
alternating, for several rounds. Prints the median time of each and their ratio.

    python tests/benchmarks/bench_filler.py --model MODEL [--rounds 5]
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

REPO = Path(__file__).resolve().parents[2]


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--model", required=True)
    ap.add_argument("--rounds", type=int, default=5)
    args = ap.parse_args(argv)

    from wordspot.audio.features import file_features
    from wordspot.corpus import read_manifest
    from wordspot.decoding.decoder import DecoderSettings, build_recognizer
    from wordspot.model import load_model

    model = load_model(args.model)
    on = build_recognizer(model, settings=DecoderSettings())
    off = build_recognizer(model, settings=DecoderSettings(filler=False))
    cols = np.searchsorted(on.network.used_mixtures, off.network.used_mixtures)
    utts = [u for name in ("test.csv", "test-phrases.csv") for u in read_manifest(REPO / "recordings" / name)]
    lls = [np.asarray(on.emissions(file_features(u.path, model.features)), dtype=np.float64) for u in utts]
    on.search(lls[0]), off.search(lls[0][:, cols])  # compile
    times = {"off": [], "on": []}
    for _ in range(args.rounds):
        for name, rec in (("off", off), ("on", on)):
            t0 = time.process_time()
            for ll in lls:
                rec.search(ll if name == "on" else ll[:, cols])
            times[name].append(time.process_time() - t0)
    m = {k: float(np.median(v)) for k, v in times.items()}
    print(f"{len(lls)} files, {sum(len(x) for x in lls)} frames; states {off.network.n_states} -> "
          f"{on.network.n_states}; CPU s (median of {args.rounds}): off {m['off']:.2f}, on {m['on']:.2f}, "
          f"ratio {m['on'] / m['off']:.2f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
