#!/usr/bin/env python3
"""Dev long recordings built like the demo's long recordings, with dev voices only.

The demo's long recordings (``recordings/long.csv``, a TEST set) are planned by the demo
generator (``recordings/synthesize.py``, ``plan_long``): talk sentences with commands (single
words and phrases) in the pauses between them, quiet and kitchen noise alone between two
sentences, kitchen noise under some of the speech, room tone everywhere. This module runs
the same plan and assembly with:

- the dev voices (``dev_candidate`` in ``recordings/voices.csv``: training voices, never a
  test voice) instead of the test voices;
- another seed than the demo's (the seed argument: 1, 2, 3, ... give different recordings);
- other talk text: the generator's babble sentences and the sentences of the starter
  corpus's dev split that hold no command or new word (the generator's own check) instead
  of its long-recording talk, so no sentence of the test set's talk is heard.

With ``far`` (``--far``), every dev voice's speech (commands and talk) is also given
another vocal tract and pitch before assembly (``far_voices_dev.far_wave``: every
frequency scaled by the voice's factor at the same length; by default the factors that
``far_voices_dev.py --per-voice 0.85 1.25 1.2 0.9 1.15 0.88 1.22`` gives them: flite-awb
0.9, espeak-en-gb-m3 1.25, espeak-en-gb-x-gbclan-f5 1.2): voices that neither the starter
nor a model adapted on the other training voices heard, as the demo's test voices are
unheard, without using them.

With ``new_voices`` (``--new-voices``), the voices are instead those of the starter corpus's
dev split that the demo has not at all (espeak-en-gb-x-gbclan-m6): heard by neither the
starter nor any adaptation on the demo's voices, and unchanged.

Six recordings of 1-2 minutes per seed, written as FLAC with a time-label file
(``labels.csv``; the talk sentences' times in ``talk.csv``, same columns) into a folder (kept as a cache: a folder that already has its label file
is reused). Needs the text-to-speech engines (espeak-ng, flite, festival, sox).

    python tests/benchmarks/dev_long.py /tmp/dev-long --seeds 1 2 3
    python tests/benchmarks/dev_long.py /tmp/far-long --seeds 1 2 3 --far
    python tests/benchmarks/dev_long.py /tmp/new-long --seeds 1 2 3 --new-voices
"""

from __future__ import annotations

import argparse
import shutil
import sys
import tempfile
from dataclasses import replace
from pathlib import Path

HERE = Path(__file__).resolve().parent
REPO = HERE.parents[1]
sys.path.insert(0, str(HERE))

#: The demo generator's own seed makes the test set; never use it here.
TEST_SEED = 3141

#: The per-voice frequency scales of far set 2 of far_voices_dev.py (the training voices in
#: name order get these in turn); the dev voices' share of them makes the far long recordings.
FAR_PER_VOICE = (0.85, 1.25, 1.2, 0.9, 1.15, 0.88, 1.22)


def far_factors(per_voice=FAR_PER_VOICE) -> dict:
    """The frequency scale of each dev voice for the far long recordings."""
    from compare_data import dev_voices
    from far_voices_dev import voice_factors

    factors = voice_factors(1.0, list(per_voice))
    return {v: factors[v] for v in dev_voices(REPO / "recordings" / "voices.csv")}


def _talk(demo) -> tuple[str, ...]:
    """Talk text: the generator's babble sentences and the starter corpus's dev sentences
    that hold no command or new word."""
    import csv

    with open(REPO / "recordings" / "starter" / "dev.csv", newline="", encoding="utf-8") as fh:
        starter = [r["transcript"] for r in csv.DictReader(fh) if r["kind"] == "sentence"]
    keep = []
    for text in dict.fromkeys(list(demo.BABBLE_TEXT) + starter):
        try:
            demo.check_not_commands([text], "talk sentence")
        except demo.CorpusError:
            continue
        keep.append(text)
    return tuple(keep)


def new_voices(demo) -> list:
    """The starter corpus's dev voices that the demo has not (``recordings/starter.py``)."""
    import starter

    have = {v.voice_id for v in demo.VOICES}
    return [v for v in starter.DEV_VOICES if v.voice_id not in have]


def make_dev_long(folder: Path, seed: int, jobs: int = 1, far: dict | None = None, new: bool = False):
    """Write one seed's dev long recordings into ``folder``; return their labels.

    ``far``: voice -> frequency scale given to that voice's speech (``far_wave``) before
    assembly; None: the voices as they are. ``new``: the voices of :func:`new_voices`
    instead of the dev voices. A folder is a cache: keep far and ordinary
    recordings in different folders."""
    from wordspot.evaluation.time_labels import (LabelledRecording, TimedCommand, read_time_labels,
                                                 write_time_labels)

    if seed == TEST_SEED:
        raise SystemExit(f"seed {seed} is the demo generator's own (the test set); choose another")
    folder = Path(folder)
    labels_path = folder / "labels.csv"
    if labels_path.is_file():
        return read_time_labels(labels_path)
    if not all(shutil.which(p) for p in ("espeak-ng", "flite", "festival", "sox")):
        raise SystemExit("the text-to-speech engines are missing (see recordings/README.md)")
    sys.path.insert(0, str(REPO / "recordings"))
    import synthesize as demo

    voices, talk = demo.VOICES, demo.LONG_TALK
    dev = [replace(v, split="test") for v in voices if v.dev_candidate]
    assert dev and all(v.split == "train" for v in voices if v.dev_candidate)
    if new:
        dev = [replace(v, split="test") for v in new_voices(demo)]
        assert dev
    try:  # the generator's plan, with the dev voices standing in for the test voices
        demo.VOICES, demo.LONG_TALK = dev, _talk(demo)
        plans = demo.plan_long(seed)
    finally:
        demo.VOICES, demo.LONG_TALK = voices, talk
    folder.mkdir(parents=True, exist_ok=True)
    parts = [t for lp in plans for t in lp.takes]
    records, talk_records = [], []
    with tempfile.TemporaryDirectory(prefix="wordspot-dev-long-") as tmp:
        work = Path(tmp)
        raw = {t.rel_path: work / f"raw-{i:05d}.wav" for i, t in enumerate(parts)}
        demo.synthesize_raw([(t.voice, t.text, demo.draw_for(seed, t.rel_path), raw[t.rel_path]) for t in parts],
                            jobs)
        speech = {t.rel_path: demo.levelled_speech(t, raw[t.rel_path], seed) for t in parts}
        if far:
            from far_voices_dev import far_wave

            speech = {t.rel_path: far_wave(speech[t.rel_path], far[t.voice.voice_id]) for t in parts}
        streams = demo.babble_streams(seed, work, jobs) if any(
            e.noise == "babble" for lp in plans for e in lp.events) or any(
            b.noise == "babble" for lp in plans for b in lp.beds) else []
        for k, lp in enumerate(plans):
            try:
                data, labels = demo.assemble_long(lp, [speech[t.rel_path] for t in lp.takes], seed, streams)
            except demo.CorpusError as exc:  # longer or shorter than the generator allows
                print(f"note: dev long recording {k + 1} left out: {exc}", file=sys.stderr)
                continue
            path = folder / f"long-{k + 1:02d}-{lp.voice.voice_id}.flac"
            path.write_bytes(data)
            records.append(LabelledRecording(path, tuple(TimedCommand(round(a, 3), round(b, 3), tuple(w.split()))
                                                         for a, b, w in labels)))
            lengths = [len(speech[t.rel_path]) for t in lp.takes]
            _, starts, _ = demo.long_layout(lp, lengths)
            said = [e for e in lp.events if e.take is not None]
            talk_records.append(LabelledRecording(path, tuple(
                TimedCommand(round(a / demo.SAMPLE_RATE, 3), round((a + n) / demo.SAMPLE_RATE, 3),
                             tuple(e.take.text.split()))
                for e, a, n in zip(said, starts, lengths) if e.kind == "talk")))
    write_time_labels(folder / "talk.csv", talk_records)
    write_time_labels(labels_path, records)
    return read_time_labels(labels_path)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("folder", type=Path)
    ap.add_argument("--seeds", type=int, nargs="+", default=[1, 2, 3])
    ap.add_argument("--jobs", type=int, default=1)
    ap.add_argument("--far", action="store_true", help="the dev voices made far (far_voices_dev.far_wave)")
    ap.add_argument("--new-voices", action="store_true", help="the starter's dev voices the demo has not")
    args = ap.parse_args(argv)
    far = far_factors() if args.far else None
    for seed in args.seeds:
        recs = make_dev_long(args.folder / f"seed-{seed}", seed, args.jobs, far, args.new_voices)
        n = sum(len(r.commands) for r in recs)
        print(f"seed {seed}: {len(recs)} recordings, {n} commands in {args.folder / f'seed-{seed}'}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
