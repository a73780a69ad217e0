"""The demo: train on the shipped bakery recordings, measure on every demo test set.

The demo corpus (``recordings/`` in a checkout) is synthetic speech from several
text-to-speech engines and voices; its test sets use voices that training never heard.
Real users train on their own voice (see the README's quick tour).
"""

from __future__ import annotations

import csv
from dataclasses import dataclass
from pathlib import Path

from wordspot.errors import WordspotError

__all__ = ["DemoSet", "DemoRow", "find_recordings", "demo_sets", "run_demo", "render_table"]

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


def run_demo(folder: Path, out_dir: Path, *, model_path: Path | None = None, jobs: int = 2,
             quiet: bool = False, say=print):
    """Train (unless ``model_path`` is given) and evaluate every demo set.

    Returns
    -------
    rows : list of DemoRow
    model_file : Path
    evaluations : list of ManifestEvaluation
    """
    from wordspot.corpus import read_manifest
    from wordspot.evaluation.run import evaluate_utterances
    from wordspot.language.lexicon import read_lexicon
    from wordspot.model import load_model, save_model
    from wordspot.evaluation.html_report import write_html_report
    from wordspot.evaluation.report import write_report
    from wordspot.training.trainer import TrainingConfig, train

    out_dir.mkdir(parents=True, exist_ok=True)
    if model_path is None:
        lexicon = read_lexicon(folder.parent / "lexicon" / "bakery.txt")
        train_utts = read_manifest(folder / "train.csv")
        say(f"training on {len(train_utts)} recordings of {len({u.speaker for u in train_utts})} voices "
            f"({folder / 'train.csv'}) ...")
        model, summary = train(train_utts, lexicon, config=TrainingConfig(jobs=jobs),
                               manifest=folder / "train.csv", quiet=quiet,
                               report=None if quiet else say)
        model_file = out_dir / "bakery.model"
        save_model(model, model_file)
        say(f"model written to {model_file} ({summary.seconds:.0f} s of training)")
    else:
        model_file = Path(model_path)
        model = load_model(model_file)
    rows, evaluations = [], []
    for ds in demo_sets(folder):
        if not ds.utterances:
            continue
        say(f"evaluating {ds.name} ({len(ds.utterances)} recordings) ...")
        ev = evaluate_utterances(model, ds.utterances, name=ds.name, jobs=jobs, quiet=quiet)
        files = write_report(ev.result, out_dir / "report" / ds.name)
        write_html_report(ev, files.folder, confusions=files.confusions)
        r = ev.result
        rows.append(DemoRow(ds.name, r.utterances, r.reference_words, r.wer, tuple(r.wer_ci95),
                            r.substitutions, r.deletions, r.insertions, ds.note))
        evaluations.append(ev)
    return rows, model_file, evaluations


def _pct(x: float) -> str:
    return f"{100 * x:.1f}%"


def render_table(rows: list[DemoRow]) -> str:
    """The demo's results as aligned plain-text columns."""
    header = ["set", "utts", "words", "WER", "95% interval", "sub", "del", "ins", "what it shows"]
    body = [
        [r.name, str(r.utterances), str(r.words), _pct(r.wer),
         f"{_pct(r.wer_ci95[0])} .. {_pct(r.wer_ci95[1])}",
         str(r.substitutions), str(r.deletions), str(r.insertions), r.note]
        for r in rows
    ]
    widths = [max(len(x) for x in col) for col in zip(header, *body)]
    right = {1, 2, 3, 4, 5, 6, 7}

    def line(cells):
        return "  ".join(c.rjust(w) if i in right else c.ljust(w) for i, (c, w) in enumerate(zip(cells, widths))).rstrip()

    out = [line(header), line(["-" * w for w in widths])]
    out += [line(b) for b in body]
    return "\n".join(out)
