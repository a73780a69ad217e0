"""The demo: the starter alone, adapted, and trained from scratch, measured on every demo test set.

The demo corpus (``recordings/`` in a checkout) is synthetic speech from several
text-to-speech engines and voices; its test sets use voices that training never heard.
Real users train on their own voice (see the README's quick tour).
"""

from __future__ import annotations

import csv
from dataclasses import dataclass
from pathlib import Path

from wordspot.errors import WordspotError

__all__ = ["DemoSet", "DemoRow", "SYSTEMS", "find_recordings", "demo_sets", "run_demo", "render_table"]

_NOISY_LEVELS = (20, 10, 5)


@dataclass(frozen=True)
class DemoSet:
    """One row of the demo table: a name, the utterances, and a note on what it shows."""

    name: str
    utterances: tuple
    note: str


@dataclass(frozen=True)
class DemoRow:
    """Measured figures of one demo set."""

    name: str
    utterances: int
    words: int
    wer: float
    wer_ci95: tuple[float, float]
    substitutions: int
    deletions: int
    insertions: int
    note: str

    def to_dict(self) -> dict:
        return {
            "utterances": self.utterances,
            "reference_words": self.words,
            "wer": self.wer,
            "wer_ci95": list(self.wer_ci95),
            "substitutions": self.substitutions,
            "deletions": self.deletions,
            "insertions": self.insertions,
            "note": self.note,
        }


def find_recordings(explicit=None) -> Path:
    """The demo recordings folder: ``explicit`` or ``recordings/`` beside the package.

    Raises
    ------
    WordspotError
        The folder or its training manifest is missing.
    """
    if explicit is not None:
        folder = Path(explicit)
    else:
        folder = Path(__file__).resolve().parent.parent / "recordings"
    if not (folder / "train.csv").is_file():
        raise WordspotError(
            f"{folder}: demo recordings not found (no train.csv); run the demo from a checkout of "
            "the wordspot repository, or pass --recordings FOLDER"
        )
    return folder


def _column(manifest: Path, name: str) -> list[str]:
    with open(manifest, newline="", encoding="utf-8") as f:
        return [row.get(name, "") for row in csv.DictReader(f)]


def demo_sets(folder: Path) -> list[DemoSet]:
    """The demo's test sets, in table order (noisy recordings split by SNR)."""
    from wordspot.corpus import read_manifest

    sets = [DemoSet("test", tuple(read_manifest(folder / "test.csv")), "clean, voices unseen in training")]
    noisy = folder / "test-noisy.csv"
    utts = read_manifest(noisy)
    snr = _column(noisy, "snr_db")
    for level in _NOISY_LEVELS:
        chosen = tuple(u for u, s in zip(utts, snr) if s and float(s) == level)
        sets.append(DemoSet(f"test-noisy-{level}dB", chosen, f"babble or fan noise at {level} dB SNR"))
    sets.append(DemoSet("test-phrases", tuple(read_manifest(folder / "test-phrases.csv")),
                        "2-4 word commands"))
    sets.append(DemoSet("new-words", tuple(read_manifest(folder / "new-words.csv")),
                        "words with no training recordings"))
    return sets


#: The demo's systems, in table order: name -> what it is.
SYSTEMS = {
    "starter": "the shipped starter model alone (no bakery recordings)",
    "adapted": "the starter adapted on the bakery training set (wordspot train's default)",
    "scratch": "trained from scratch on the bakery training set (wordspot train --from-scratch)",
}


def _build(system: str, folder: Path, out_dir: Path, *, jobs: int, quiet: bool, say):
    """The model of one system, written to ``out_dir/bakery-<system>.model``."""
    from wordspot.corpus import read_manifest
    from wordspot.language.lexicon import read_lexicon
    from wordspot.model import load_model, save_model

    lexicon = read_lexicon(folder.parent / "lexicon" / "bakery.txt")
    if system == "starter":
        model = load_model("starter")
        model.lexicon = lexicon  # recognise the bakery words; no word-pair counts for them (uniform prior)
        seconds = 0.0
    else:
        train_utts = read_manifest(folder / "train.csv")
        say(f"{system}: {len(train_utts)} recordings of {len({u.speaker for u in train_utts})} voices "
            f"({folder / 'train.csv'}) ...")
        if system == "adapted":
            from wordspot.training.adapt import AdaptationConfig, adapt

            model, summary = adapt(train_utts, lexicon, load_model("starter"), config=AdaptationConfig(jobs=jobs),
                                   manifest=folder / "train.csv", quiet=quiet, report=None if quiet else say)
        else:
            from wordspot.training.trainer import TrainingConfig, train

            model, summary = train(train_utts, lexicon, config=TrainingConfig(jobs=jobs),
                                   manifest=folder / "train.csv", quiet=quiet, report=None if quiet else say)
        seconds = summary.seconds
    model_file = out_dir / f"bakery-{system}.model"
    save_model(model, model_file)
    if seconds:
        say(f"{system}: model written to {model_file} ({seconds:.0f} s)")
    return model, model_file, seconds


def run_demo(folder: Path, out_dir: Path, *, model_path: Path | None = None, systems=tuple(SYSTEMS),
             jobs: int = 2, quiet: bool = False, say=print):
    """Build each system's model (or load ``model_path``) and evaluate it on every demo set.

    Returns
    -------
    results : dict of system name -> list of DemoRow
    model_files : dict of system name -> Path
    evaluations : dict of system name -> list of ManifestEvaluation
    seconds : dict of system name -> float
        Training or adaptation time (0 for the starter alone and a given model).
    """
    from wordspot.evaluation.html_report import write_html_report
    from wordspot.evaluation.report import write_report
    from wordspot.evaluation.run import evaluate_utterances
    from wordspot.model import load_model

    out_dir.mkdir(parents=True, exist_ok=True)
    results, files, evaluations, seconds = {}, {}, {}, {}
    if model_path is not None:
        plan = [("model", None)]
    else:
        unknown = [s for s in systems if s not in SYSTEMS]
        if unknown:
            raise WordspotError(f"unknown demo system(s) {', '.join(unknown)}; choose from {', '.join(SYSTEMS)}")
        plan = [(s, s) for s in systems]
    for name, system in plan:
        if system is None:
            model, files[name], seconds[name] = load_model(model_path), Path(model_path), 0.0
        else:
            model, files[name], seconds[name] = _build(system, folder, out_dir, jobs=jobs, quiet=quiet, say=say)
        rows, evs = [], []
        for ds in demo_sets(folder):
            if not ds.utterances:
                continue
            say(f"{name}: evaluating {ds.name} ({len(ds.utterances)} recordings) ...")
            ev = evaluate_utterances(model, ds.utterances, name=ds.name, jobs=jobs, quiet=quiet)
            files_ = write_report(ev.result, out_dir / "report" / name / ds.name)
            write_html_report(ev, files_.folder, confusions=files_.confusions)
            r = ev.result
            rows.append(DemoRow(ds.name, r.utterances, r.reference_words, r.wer, tuple(r.wer_ci95),
                                r.substitutions, r.deletions, r.insertions, ds.note))
            evs.append(ev)
        results[name], evaluations[name] = rows, evs
    return results, files, evaluations, seconds


def _pct(x: float) -> str:
    return f"{100 * x:.1f}%"


def render_table(results: dict) -> str:
    """The demo's results as aligned plain-text columns: one row per set, WER of each system."""
    names = list(results)
    first = results[names[0]]
    header = ["set", "utts", "words"] + [f"WER {n}" for n in names] + ["what it shows"]
    body = []
    for k, row in enumerate(first):
        cells = [row.name, str(row.utterances), str(row.words)]
        for n in names:
            r = results[n][k]
            cells.append(f"{_pct(r.wer)} ({_pct(r.wer_ci95[0])}-{_pct(r.wer_ci95[1])})")
        body.append(cells + [row.note])
    widths = [max(len(x) for x in col) for col in zip(header, *body)]
    right = set(range(1, 3 + len(names)))

    def line(cells):
        return "  ".join(c.rjust(w) if i in right else c.ljust(w) for i, (c, w) in enumerate(zip(cells, widths))).rstrip()

    out = [line(header), line(["-" * w for w in widths])]
    out += [line(b) for b in body]
    return "\n".join(out)
