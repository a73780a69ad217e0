#!/usr/bin/env python3
"""Why commands in long recordings are lost, and scan settings compared, on dev material only.

The dev long recordings of ``dev_long.py`` (dev voices, the demo generator's plan with other
seeds and other talk; never the demo's long.csv) are scanned as ``wordspot scan`` does
(detector, then each stretch recognised by :func:`wordspot.stream.scan.decode_stretch`,
words grouped into commands), keeping every word heard (kept and dropped, with the reason).
Each labelled command that is not found with the right words gets one cause, the first
that applies:

- ``no stretch``: no speech stretch overlaps it;
- ``cut by detector``: its speech is not wholly inside one stretch;
- ``no word heard``: no word (kept or dropped) overlaps it;
- ``threshold``: with no confidence threshold (words said amid other talk still dropped)
  a command with its words would have been found over it;
- ``amid-talk rule``: the words heard over it are its words, some dropped as said amid
  other talk;
- ``grouping``: the words heard over it are its words, grouped with other words (or split);
- ``wrong words``: the words heard over it are not its words (``+talk``: its stretch also
  holds talk; ``alone``: it does not).

A found command whose words match a label but whose span does not overlap it would be a
scoring (boundary) miss; it is counted separately (``timing``) before the causes above.

    python tests/benchmarks/long_found_dev.py --model /tmp/dev.model --folder /tmp/dev-long --seeds 1 2 3

``--far``: the far dev long recordings of ``dev_long.py --far`` (the dev voices given another
vocal tract and pitch: voices the model never heard); ``--new-voices``: those of
``dev_long.py --new-voices`` (the starter's dev voices the demo has not). Keep each kind in
its own folder.
"""

from __future__ import annotations

import argparse
import sys
from collections import Counter
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

from dev_long import far_factors, make_dev_long  # noqa: E402

CAUSES = ("no stretch", "cut by detector", "timing", "no word heard", "threshold", "amid-talk rule", "grouping",
          "wrong words +talk", "wrong words alone")


def _overlap(a0, a1, b0, b1) -> float:
    return min(a1, b1) - max(a0, b0)


def scan_one(recognizer, path, settings):
    """(duration s, stretches in s, final commands, every word heard as (word, start, end, kept, why),
    the commands with no threshold)."""
    from dataclasses import replace

    from wordspot.audio.reading import load_audio
    from wordspot.stream.detector import find_stretches
    from wordspot.stream.scan import decode_stretch, stretch_commands

    rate = recognizer.features.sample_rate
    wave = load_audio(path, sample_rate=rate)
    stretches = find_stretches(wave, rate, settings.detector)
    commands, heard, candidates = [], [], []
    everything = replace(settings, min_confidence=0.0, command_rule="mean", command_confidence=0.0)
    for st in stretches:
        r = decode_stretch(recognizer, wave[st.start:st.end], settings.normalise_seconds)
        if r is None:
            continue
        off = st.start / rate
        commands += stretch_commands(r, off, float(recognizer.min_confidence), settings, str(path))
        candidates += stretch_commands(r, off, 0.0, everything, str(path))  # every group of words heard
        for s in r.segments:
            heard.append((s.word, off + s.start, off + s.end, True, ""))
        for s in r.dropped:
            heard.append((s.word, off + s.start, off + s.end, False, "talk" if s.amid_talk else "confidence"))
    heard.sort(key=lambda h: h[1])
    spans = [(st.start / rate, st.end / rate) for st in stretches]
    return wave.shape[0] / rate, spans, commands, heard, candidates


def classify(label, spans, found, heard, candidates, talk) -> str:
    """The cause of one missed label (see the module docstring)."""
    a, b, words = label.start, label.end, tuple(label.words)
    if not any(_overlap(a, b, s0, s1) > 0 for s0, s1 in spans):
        return "no stretch"
    inside = [(s0, s1) for s0, s1 in spans if s0 <= a and b <= s1]
    if not inside:
        return "cut by detector"
    if any(tuple(c.words) == words and _overlap(a, b, c.start, c.end) <= 0 and abs(c.start - a) < 1.0
           for c in found):
        return "timing"
    over = [h for h in heard if _overlap(a, b, h[1], h[2]) > 0]
    if not over:
        return "no word heard"
    if any(tuple(c.words) == words and _overlap(a, b, c.start, c.end) > 0 for c in candidates):
        return "threshold"
    if tuple(h[0] for h in over) == words:
        return "amid-talk rule" if any(h[4] == "talk" for h in over) else "grouping"
    s0, s1 = inside[0]
    with_talk = any(_overlap(s0, s1, t.start, t.end) > 0 for t in talk)
    return "wrong words +talk" if with_talk else "wrong words alone"


def evaluate(recognizer, folder: Path, seeds, settings, show: bool = False, far: dict | None = None,
             new: bool = False):
    """Per seed: the score and the causes of the misses (``far``, ``new``: see ``dev_long.make_dev_long``)."""
    from wordspot.evaluation.time_labels import TimedCommand, read_time_labels
    from wordspot.evaluation.timed import BOUNDARY_TOLERANCE, score_timed

    out = []
    for seed in seeds:
        recs = make_dev_long(folder / f"seed-{seed}", seed, far=far, new=new)
        talk = {str(r.path): r.commands for r in read_time_labels(folder / f"seed-{seed}" / "talk.csv")}
        found, durations, detail = {}, {}, {}
        for rec in recs:
            d, spans, commands, heard, candidates = scan_one(recognizer, rec.path, settings)
            key = str(rec.path)
            found[key] = [TimedCommand(c.start, c.end, c.words) for c in commands]
            durations[key] = d
            detail[key] = (spans, heard, candidates)
        score = score_timed(recs, found, durations)
        causes = Counter()
        for rs in score.recordings:
            spans, heard, candidates = detail[rs.path]
            for lab in rs.misses:
                cause = classify(lab, spans, rs.found, heard, candidates, talk[rs.path])
                causes[cause] += 1
                if show:
                    near = [f"{h[0]}{'' if h[3] else '(' + h[4] + ')'}" for h in heard
                            if _overlap(lab.start - 0.5, lab.end + 0.5, h[1], h[2]) > 0]
                    print(f"  seed {seed} {Path(rs.path).name} {lab.start:7.2f}-{lab.end:7.2f} "
                          f"{' '.join(lab.words):24s} {cause:18s} heard: {' '.join(near)}")
        if show:
            for rs in score.recordings:
                for c in rs.false_accepts:
                    print(f"  seed {seed} {Path(rs.path).name} FA {c.start:7.2f}-{c.end:7.2f} {' '.join(c.words)}")
        b = score.boundary()
        out.append({"seed": seed, "labels": score.labels, "hits": score.hits, "found": 100 * score.hit_rate,
                    "fa5": score.false_accepts / (score.hours * 12), "fa": score.false_accepts,
                    "on_time": 100 * b["on_time"], "causes": causes, "tol": BOUNDARY_TOLERANCE})
    return out


def report(name: str, rows, per_seed: bool = False) -> str:
    f = np.array([r["found"] for r in rows])
    fa = np.array([r["fa5"] for r in rows])
    ot = np.array([r["on_time"] for r in rows])
    causes = Counter()
    for r in rows:
        causes.update(r["causes"])
    cells = " | ".join(str(causes.get(c, 0)) for c in CAUSES)
    if per_seed:  # found (hits) and false accepts of each seed, for paired comparisons
        cells += " | " + " ".join(f"{r['hits']}/{r['fa']}" for r in rows)
    return (f"| {name} | {f.mean():.1f} ({f.min():.1f}-{f.max():.1f}) | {fa.mean():.1f} ({fa.min():.1f}-{fa.max():.1f}) "
            f"| {ot.mean():.1f} ({ot.min():.1f}-{ot.max():.1f}) | {cells} |")


def header(per_seed: bool = False) -> str:
    return ("| settings | found % | false accepts per 5 min | both ends within 0.3 s % | " + " | ".join(CAUSES)
            + (" | found/false accepts per seed" if per_seed else "")
            + " |\n| --- | ---: | ---: | ---: |" + " ---: |" * (len(CAUSES) + per_seed))


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--model", type=Path, required=True, help="a model adapted without the dev voices")
    ap.add_argument("--folder", type=Path, required=True, help="where the dev long recordings are (made if missing)")
    ap.add_argument("--seeds", type=int, nargs="+", default=[1, 2, 3])
    ap.add_argument("--show", action="store_true", help="print every miss and false accept")
    ap.add_argument("--per-seed", action="store_true", help="also each seed's commands found and false accepts")
    ap.add_argument("--far", action="store_true", help="the far dev long recordings (dev_long.py --far)")
    ap.add_argument("--new-voices", action="store_true", help="those of dev_long.py --new-voices")
    ap.add_argument("--talk-gap", type=float, nargs="+", default=[None])
    ap.add_argument("--min-confidence", type=float, nargs="+", default=[None])
    ap.add_argument("--split-pause", type=float, nargs="+", default=[None])
    ap.add_argument("--padding", type=float, nargs="+", default=[None])
    ap.add_argument("--hangover", type=float, nargs="+", default=[None])
    ap.add_argument("--normalise", type=float, nargs="+", default=[None], help="ScanSettings.normalise_seconds values")
    ap.add_argument("--scan-confidence", type=float, nargs="+", default=[None],
                    help="ScanSettings.min_confidence values (the decoder's threshold is --min-confidence)")
    ap.add_argument("--command-confidence", nargs="+", default=[None],
                    help="ScanSettings.command_confidence values ('none': the recognizer's threshold)")
    ap.add_argument("--max-stretch", type=float, nargs="+", default=[None])
    ap.add_argument("--command-rule", nargs="+", default=[None], help="ScanSettings.command_rule values")
    ap.add_argument("--word-rule", nargs="+", default=[None], help="DecoderSettings.word_rule values")
    args = ap.parse_args(argv)

    import itertools
    from dataclasses import replace

    from wordspot.decoding.decoder import DecoderSettings, build_recognizer
    from wordspot.model import load_model
    from wordspot.stream.scan import ScanSettings

    model = load_model(args.model)
    print(header(args.per_seed))
    for gap, conf, split, pad, hang, rule, norm, longest, scan_conf, whole, word_rule in itertools.product(
            args.talk_gap, args.min_confidence, args.split_pause, args.padding, args.hangover, args.command_rule,
            args.normalise, args.max_stretch, args.scan_confidence, args.command_confidence, args.word_rule):
        dec = {} if word_rule is None else {"word_rule": word_rule}
        if gap is not None:
            dec["talk_gap"] = gap
        if conf is not None:
            dec["min_confidence"] = conf
        recognizer = build_recognizer(model, settings=DecoderSettings(**dec))
        s = ScanSettings()
        det = s.detector
        if pad is not None:
            det = replace(det, padding=pad)
        if hang is not None:
            det = replace(det, hangover=hang)
        if longest is not None:
            det = replace(det, max_stretch=longest)
        s = replace(s, detector=det, **({} if split is None else {"split_pause": split}),
                    **({} if rule is None else {"command_rule": rule}),
                    **({} if norm is None else {"normalise_seconds": norm}),
                    **({} if scan_conf is None else {"min_confidence": scan_conf}),
                    **({} if whole is None else {"command_confidence": None if whole == "none" else float(whole)}))
        rows = evaluate(recognizer, args.folder, args.seeds, s, show=args.show,
                        far=far_factors() if args.far else None, new=args.new_voices)
        name = (f"gap {gap if gap is not None else 'def'}, thr {conf if conf is not None else 'def'}, "
                f"split {s.split_pause:g}, pad {det.padding:g}, hang {det.hangover:g}, "
                f"longest {det.max_stretch:g}, rule {s.command_rule}, norm {s.normalise_seconds:g}, "
                f"scan threshold {s.min_confidence:g}, command threshold {s.command_confidence}, "
                f"decoder word rule {word_rule or 'def'}")
        print(report(name, rows, args.per_seed), flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
