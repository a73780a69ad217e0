"""Dev: one talker's sentences of ordinary talk, then that talker's single words.

A user who trains on minutes of their own everyday sentences and then says single words,
most of them in no sentence, needs the phone models to carry to new words: the case where
adapting the starter should never do worse than training from scratch, at any amount of
speech. Two dev talkers of the starter corpus (voices the starter never trained on: flite
awb and the espeak-ng Lancashire accent, variant m6) say every starter sentence once and
150 common words found in no sentence, each file with small changes of rate and pitch and
the talker's own vocal tract (one person, not many). Per seed, the first 40, 100 and all
308 sentences (seeded order) train the starter adapted (``wordspot train``'s default) and a
model from scratch (``--from-scratch``), calibration included as ``wordspot train`` fits
it; each recognises the 150 words one word per file over a vocabulary of those words, at
the default confidence threshold and at 0 (the search alone).

    OPENBLAS_NUM_THREADS=1 python tests/benchmarks/one_talker_dev.py --data /tmp/one-talker \
        --seeds 0 1 2 --jobs 2

The recordings are made once into ``--data`` (about a minute); nothing is written to the
checkout. Dev material only: no demo test voice, accent or talker is used.
"""

from __future__ import annotations

import argparse
import csv
import json
import sys
import tempfile
import time
from dataclasses import replace
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT / "recordings"))

import starter  # noqa: E402  (the starter corpus generator)
import synthesize as demo  # noqa: E402

TALKERS = {v.voice_id: v for v in starter.DEV_VOICES if v.voice_id in ("flite-awb", "espeak-en-gb-x-gbclan-m6")}
AMOUNTS = (40, 100, 308)
N_WORDS = 150
SEED = 7  # the recordings' draws (rate, pitch, room); the runs' seeds vary the rest


def one_person_draw(seed: int, rel_path: str) -> starter.StarterDraw:
    """A starter draw narrowed to one person: rate 0.92-1.08, pitch within a semitone, the
    talker's own vocal tract (no warp), room tone at the corpus's levels."""
    rng = demo.rng_for(seed, "one-talker/" + rel_path)
    u = rng.random(8)
    lerp = lambda r, x: r[0] + (r[1] - r[0]) * x  # noqa: E731
    return starter.StarterDraw(
        rate=lerp((0.92, 1.08), u[0]), semitones=lerp((-1.0, 1.0), u[1]), warp=1.0, background="room",
        lead_s=lerp(starter.ROOM_PAD_S, u[2]), tail_s=lerp(starter.ROOM_PAD_S, u[3]),
        speech_dbfs=lerp(starter.SPEECH_RMS_DBFS, u[4]), bg_dbfs=lerp(starter.ROOM_TONE_DBFS, u[5]),
        tone_pole=lerp((0.95, 0.985), u[6]), mains_hz=50.0)


def chosen_words(words, sentences, lexicon, seed: int = SEED) -> list[str]:
    """``N_WORDS`` common words in no sentence, of two phones or more, in a seeded draw."""
    in_sentences = {w for s in sentences for w in s.split()}
    pool = sorted(w for w in words if w not in in_sentences and len(lexicon[w][0]) >= 2)
    rng = np.random.default_rng([seed, 0x776F7264])
    return sorted(rng.choice(pool, size=N_WORDS, replace=False).tolist())


def make_recordings(data: Path, jobs: int) -> dict:
    """Every talker's sentences and test words in ``data`` (made where missing); the plan."""
    words, sentences, lexicon = starter.read_text()
    chosen = chosen_words(words, sentences, lexicon)
    items = []
    for vid, voice in TALKERS.items():
        for i, text in enumerate(sentences):
            items.append(starter.Item("dev", voice, "sentence", text, 1,
                                      f"{vid}/s{i + 1:03d}-{demo.slug(text)}.flac"))
        for w in chosen:
            items.append(starter.Item("dev", voice, "word", w, 1, f"{vid}/w-{w}.flac"))
    todo = [it for it in items if not (data / it.rel_path).is_file()]
    if todo:
        starter.draw_for = one_person_draw  # finish_take reads the draw through this name
        with tempfile.TemporaryDirectory(prefix="one-talker-") as tmp:
            work = Path(tmp)
            raws = [work / f"{k}.wav" for k in range(len(todo))]
            demo.synthesize_raw([(it.voice, it.text, starter.engine_draw(it.voice, one_person_draw(SEED, it.rel_path)),
                                  raw) for it, raw in zip(todo, raws)], jobs)
            for it, raw in zip(todo, raws):
                (data / it.rel_path).parent.mkdir(parents=True, exist_ok=True)
                (data / it.rel_path).write_bytes(starter.finish_take(it, raw, SEED))
    lex_file = data / "lexicon.txt"
    if not lex_file.is_file():
        used = sorted({w for s in sentences for w in s.split()} | set(chosen))
        lex_file.write_text("".join(f"{w} {' '.join(p)}\n" for w in used for p in lexicon[w]), encoding="utf-8")
    test_lex = data / "test-words.txt"
    if not test_lex.is_file():
        test_lex.write_text("".join(f"{w} {' '.join(p)}\n" for w in chosen for p in lexicon[w]), encoding="utf-8")
    for vid in TALKERS:
        with open(data / f"{vid}-words.csv", "w", newline="", encoding="utf-8") as f:
            wr = csv.writer(f)
            wr.writerow(["path", "transcript", "speaker"])
            for it in items:
                if it.voice.voice_id == vid and it.kind == "word":
                    wr.writerow([it.rel_path, it.text, vid])
    return {"sentences": sentences, "items": items}


def sentence_manifest(data: Path, vid: str, items, n: int, seed: int) -> Path:
    sent = [it for it in items if it.voice.voice_id == vid and it.kind == "sentence"]
    order = np.random.default_rng([seed, 0x73656E74]).permutation(len(sent))[:n]
    path = data / f"{vid}-sentences-{n}-seed{seed}.csv"
    with open(path, "w", newline="", encoding="utf-8") as f:
        wr = csv.writer(f)
        wr.writerow(["path", "transcript", "speaker"])
        for k in sorted(order):
            wr.writerow([sent[k].rel_path, sent[k].text, vid])
    return path


def minutes_of(data: Path, manifest: Path) -> float:
    import soundfile as sf

    with open(manifest, encoding="utf-8") as f:
        return sum(sf.info(str(data / r["path"])).duration for r in csv.DictReader(f)) / 60


def run(data: Path, seeds, amounts, jobs: int, talkers) -> list[dict]:
    from wordspot import api
    from wordspot.evaluation.calibrate import CalibrationConfig
    from wordspot.training.adapt import AdaptationConfig
    from wordspot.training.trainer import TrainingConfig

    plan = make_recordings(data, jobs)
    rows = []
    for vid in talkers:
        words = data / f"{vid}-words.csv"
        for seed in seeds:
            for n in amounts:
                manifest = sentence_manifest(data, vid, plan["items"], n, seed)
                for system in ("adapted", "scratch"):
                    began = time.perf_counter()
                    if system == "adapted":
                        model = api.train(manifest, data / "lexicon.txt", start="starter",
                                          config=AdaptationConfig(jobs=jobs, seed=seed),
                                          calibration=CalibrationConfig(seed=seed))
                    else:
                        model = api.train(manifest, data / "lexicon.txt", start=None,
                                          config=TrainingConfig(jobs=jobs, seed=seed),
                                          calibration=CalibrationConfig(seed=seed))
                    seconds = time.perf_counter() - began
                    row = {"talker": vid, "seed": seed, "sentences": n, "minutes": round(minutes_of(data, manifest), 2),
                           "system": system, "train_s": round(seconds, 1),
                           "strength": (model.info.get("strength") or {}).get("follow_passes"),
                           "calibration": (model.info.get("calibration") or {}).get("held_out", "none")}
                    for thr in (0.05, 0.0):
                        ev = api.evaluate(model, words, lexicon=data / "test-words.txt", single_word=True, jobs=jobs,
                                          n_bootstrap=10, min_confidence=thr)
                        r = ev.result
                        row[f"wer@{thr}"] = round(100 * r.wer, 1)
                        row[f"sub/del@{thr}"] = f"{r.substitutions}/{r.deletions}"
                    rows.append(row)
                    print(json.dumps(row), flush=True)
    return rows


def table(rows) -> str:
    out = ["| talker | sentences (min) | seed | adapted WER (sub/del) | scratch WER (sub/del) | adapted at 0 | scratch at 0 | strength |",
           "| --- | --- | ---: | ---: | ---: | ---: | ---: | ---: |"]
    key = lambda r: (r["talker"], r["sentences"], r["seed"])  # noqa: E731
    by = {}
    for r in rows:
        by.setdefault(key(r), {})[r["system"]] = r
    for k in sorted(by):
        a, s = by[k].get("adapted"), by[k].get("scratch")
        if not a or not s:
            continue
        out.append(f"| {k[0]} | {k[1]} ({a['minutes']:.1f}) | {k[2]} | {a['wer@0.05']} ({a['sub/del@0.05']}) | "
                   f"{s['wer@0.05']} ({s['sub/del@0.05']}) | {a['wer@0.0']} | {s['wer@0.0']} | {a['strength']} |")
    return "\n".join(out)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--data", type=Path, required=True, help="folder for the recordings (made once)")
    ap.add_argument("--seeds", type=int, nargs="+", default=[0, 1, 2])
    ap.add_argument("--amounts", type=int, nargs="+", default=list(AMOUNTS))
    ap.add_argument("--talkers", nargs="+", default=list(TALKERS), choices=list(TALKERS))
    ap.add_argument("--jobs", type=int, default=2)
    ap.add_argument("--save", type=Path, help="write the rows as JSON lines here")
    args = ap.parse_args(argv)
    args.data.mkdir(parents=True, exist_ok=True)
    rows = run(args.data, args.seeds, args.amounts, args.jobs, args.talkers)
    if args.save:
        args.save.write_text("".join(json.dumps(r) + "\n" for r in rows), encoding="utf-8")
    print(table(rows))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
