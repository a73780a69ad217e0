#!/usr/bin/env python3
"""Live listening on the dev long recordings, per command rule, on dev material only.

Each dev long recording of ``dev_long.py`` (dev voices, the demo generator's plan with other
seeds and other talk; never the demo's long.csv) is pushed through
:class:`wordspot.stream.live.LiveListener` in 20 ms blocks, as ``wordspot listen`` hears a
microphone, with ``ListenSettings()`` except the command rule. Per rule and seed: commands
found with the right words (as ``wordspot scan --reference`` scores them), false accepts
per 5 minutes, and each found command's delay (the stream time of the block after which it
was reported minus its labelled end): median, 95th percentile, max. Printed as one table
row per rule, mean (min-max) over the seeds, and each seed's found / false accepts.

    python tests/benchmarks/live_dev_long.py --model /tmp/dev.model --folder /tmp/far-long --far --seeds 1 2 3
    python tests/benchmarks/live_dev_long.py --model starter --folder /tmp/dev-long --rules word mean:0.35

``--model``: a model adapted without the dev voices (``tune_filler.make_dev_model``) or
``starter`` (what ``wordspot listen`` uses by default); the bakery words either way.
``--rules``: ``word`` or ``mean:THRESHOLD`` (``ScanSettings.command_confidence``).
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
REPO = HERE.parents[1]
sys.path.insert(0, str(HERE))

from dev_long import far_factors, make_dev_long  # noqa: E402

BLOCK = 0.02  # seconds pushed at a time


def listen(recognizer, path, settings):
    """[(stream seconds at report, FoundCommand)] for one recording pushed in 20 ms blocks."""
    from wordspot.audio.reading import load_audio
    from wordspot.stream.live import LiveListener

    rate = recognizer.features.sample_rate
    wave = load_audio(path, sample_rate=rate)
    listener = LiveListener(recognizer, input_rate=rate, settings=settings, path=str(path))
    n = int(round(BLOCK * rate))
    out = []
    for i in range(0, wave.shape[0], n):
        out += [(min(i + n, wave.shape[0]) / rate, c) for c in listener.push(wave[i : i + n])]
    out += [(wave.shape[0] / rate, c) for c in listener.finish()]
    return wave.shape[0] / rate, out


def settings_for(rule: str):
    """``ListenSettings()`` with the rule ``word`` or ``mean:THRESHOLD``."""
    from wordspot.stream.live import ListenSettings

    name, _, value = rule.partition(":")
    return ListenSettings(command_rule=name, **({"command_confidence": float(value)} if value else {}))


def evaluate(recognizer, folder: Path, seeds, rule: str, far=None, new=False):
    """Per seed: found %, false accepts per 5 min, the delays of the commands found, CPU s."""
    from wordspot.evaluation.time_labels import TimedCommand
    from wordspot.evaluation.timed import score_timed

    settings = settings_for(rule)
    rows = []
    for seed in seeds:
        recs = make_dev_long(folder / f"seed-{seed}", seed, far=far, new=new)
        found, durations, delays = {}, {}, []
        began = time.process_time()
        for rec in recs:
            d, heard = listen(recognizer, rec.path, settings)
            key = str(rec.path)
            found[key] = [TimedCommand(c.start, c.end, c.words) for _, c in heard]
            durations[key] = d
            for lab in rec.commands:  # the first report with its words over the label
                at = [t for t, c in heard if c.words == tuple(lab.words) and c.start < lab.end and lab.start < c.end]
                if at:
                    delays.append(at[0] - lab.end)
        score = score_timed(recs, found, durations)
        rows.append({"seed": seed, "hits": score.hits, "labels": score.labels, "found": 100 * score.hit_rate,
                     "fa": score.false_accepts, "fa5": score.false_accepts / (score.hours * 12),
                     "delays": np.array(delays), "cpu": time.process_time() - began})
    return rows


def _spread(values, fmt="{:.1f}") -> str:
    v = np.array(values, dtype=float)
    return f"{fmt.format(v.mean())} ({fmt.format(v.min())}-{fmt.format(v.max())})"


def report(name: str, rows) -> str:
    med = [np.median(r["delays"]) for r in rows]
    p95 = [np.percentile(r["delays"], 95) for r in rows]
    top = [r["delays"].max() for r in rows]
    seeds = " ".join(f"{r['hits']}/{r['fa']}" for r in rows)
    return (f"| {name} | {_spread([r['found'] for r in rows])} | {_spread([r['fa5'] for r in rows])} "
            f"| {_spread(med, '{:.2f}')} | {_spread(p95, '{:.2f}')} | {_spread(top, '{:.2f}')} | {seeds} "
            f"| {sum(r['cpu'] for r in rows):.0f} |")


HEADER = ("| rule | found % | false accepts / 5 min | delay median s | delay p95 s | delay max s "
          "| found/false accepts per seed | CPU s |\n| --- | ---: | ---: | ---: | ---: | ---: | --- | ---: |")


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--model", required=True, help="a model adapted without the dev voices, or 'starter'")
    ap.add_argument("--folder", type=Path, required=True, help="where the dev long recordings are (made if missing)")
    ap.add_argument("--seeds", type=int, nargs="+", default=[1, 2, 3])
    ap.add_argument("--far", action="store_true", help="the far dev long recordings (dev_long.py --far)")
    ap.add_argument("--new-voices", action="store_true", help="those of dev_long.py --new-voices")
    ap.add_argument("--rules", nargs="+", default=["word", "mean:0.35"], help="'word' or 'mean:THRESHOLD'")
    ap.add_argument("--lexicon", default=str(REPO / "lexicon" / "bakery.txt"), help="'' for the model's words")
    args = ap.parse_args(argv)

    from wordspot.decoding.decoder import build_recognizer
    from wordspot.language.lexicon import read_lexicon
    from wordspot.model import load_model

    lexicon = read_lexicon(args.lexicon) if args.lexicon else None
    recognizer = build_recognizer(load_model(args.model), lexicon=lexicon)
    far = far_factors() if args.far else None
    print(HEADER, flush=True)
    for rule in args.rules:
        rows = evaluate(recognizer, args.folder, args.seeds, rule, far=far, new=args.new_voices)
        print(report(rule, rows), flush=True)
        for r in rows:  # each seed, for paired comparisons and for joining runs of other seeds
            d = r["delays"]
            print(f"  {rule} seed {r['seed']}: found {r['hits']}/{r['labels']}, false accepts {r['fa']} "
                  f"({r['fa5']:.1f} per 5 min), delay median {np.median(d):.2f} s, p95 "
                  f"{np.percentile(d, 95):.2f} s, max {d.max():.2f} s", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
