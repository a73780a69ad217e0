"""Data for the benchmark: manifests, deterministic subsets, dev split, cached features."""

from __future__ import annotations

import csv
from collections import defaultdict
from dataclasses import dataclass
from pathlib import Path
from typing import Sequence

import numpy as np

__all__ = ["Item", "read_items", "dev_voices", "takes_subset", "by_word", "compute_features_all",
           "durations"]


@dataclass(frozen=True)
class Item:
    """One recording: absolute path, reference words, speaker (voice id), extra columns."""

    path: Path
    words: tuple[str, ...]
    speaker: str
    extra: tuple[tuple[str, str], ...] = ()
    utterance: object = None

    def get(self, key: str, default: str = "") -> str:
        return dict(self.extra).get(key, default)


def read_items(manifest: Path) -> list[Item]:
    """Read a manifest with wordspot's reader; extra columns (e.g. ``snr_db``) are kept."""
    from wordspot.corpus import read_manifest

    utts = read_manifest(manifest)
    with open(manifest, newline="", encoding="utf-8-sig") as fh:
        rows = {(Path(manifest).parent / r["path"].strip()).resolve(): r for r in csv.DictReader(fh)}
    items = []
    for u in utts:
        path = Path(u.path).resolve()
        row = rows.get(path, {})
        extra = tuple((k, v) for k, v in row.items() if k not in ("path", "transcript", "speaker"))
        items.append(Item(path, tuple(u.words), u.speaker, extra, u))
    return items


def dev_voices(voices_csv: Path) -> list[str]:
    """Training voices marked ``dev_candidate`` in ``voices.csv`` (held out for tuning baselines)."""
    with open(voices_csv, newline="", encoding="utf-8") as fh:
        return [r["voice"] for r in csv.DictReader(fh)
                if r.get("split") == "train" and r.get("dev_candidate", "").lower() in ("1", "true", "yes")]


def takes_subset(items: Sequence[Item], takes: int | None) -> list[Item]:
    """The first ``takes`` recordings of each (voice, transcript) in manifest order (None: all)."""
    seen: dict[tuple[str, tuple[str, ...]], int] = defaultdict(int)
    out = []
    for it in items:
        key = (it.speaker, it.words)
        if takes is None or seen[key] < takes:
            out.append(it)
        seen[key] += 1
    return out


def by_word(items: Sequence[Item], feats: dict[Path, np.ndarray]) -> dict[str, list[np.ndarray]]:
    """``{word: [frames, ...]}`` for single-word items."""
    out: dict[str, list[np.ndarray]] = defaultdict(list)
    for it in items:
        out[" ".join(it.words)].append(feats[it.path])
    return dict(out)


def _features(paths: Sequence[Path]) -> list[np.ndarray]:
    from wordspot.audio.features import FeatureSettings, file_features

    s = FeatureSettings()
    return [file_features(p, s) for p in paths]


def compute_features_all(paths: Sequence[Path], n_jobs: int) -> dict[Path, np.ndarray]:
    """Features (wordspot's default settings) of every path, computed with joblib."""
    from joblib import Parallel, delayed

    paths = list(dict.fromkeys(paths))
    chunks = [paths[i::max(1, n_jobs * 4)] for i in range(max(1, n_jobs * 4))]
    parts = Parallel(n_jobs=n_jobs)(delayed(_features)(c) for c in chunks if c)
    out = {}
    for c, f in zip([c for c in chunks if c], parts):
        out.update(zip(c, f))
    return out


def durations(paths: Sequence[Path]) -> float:
    """Total audio duration in seconds."""
    import soundfile

    return float(sum(soundfile.info(str(p)).duration for p in paths))
