"""The demo: the starter alone, adapted, and trained from scratch, measured on every demo test set.

Each system with a state scorer (the starter, the adapted model) can be shown beside its
"mixtures alone" counterpart, the same recipe with no scorer anywhere
(:mod:`wordspot.evaluation.mixtures_only`): ``starter-no-scorer`` (the starter with its
scorer taken out, its calibration fitted again on the starter corpus's dev split as the
shipped one was) and ``adapted-no-scorer`` (that starter adapted as ``adapted`` is, so its
calibration fits on the base measures). A model trained from scratch fits its own scorer
on the demo's training recordings, as ``wordspot train --from-scratch`` does;
``scratch-no-scorer`` is the same training without it (``--no-scorer``).

The demo corpus (``recordings/`` in a checkout) is synthetic speech from several
text-to-speech engines and voices; its test sets use voices that training never heard.
Real users train on their own voice (README: "Quick tour: train on your own recordings").

Three kinds of row: word sets (the WER table); the test commands among the distractors,
files with no command (miss rate, share of those files with a recognised word, false
accepts per hour, equal error rate); and the long recordings with embedded commands
(``long.csv``), scanned as ``wordspot scan`` does and scored against their time labels
(hits, false accepts per hour, boundaries). The detection set's trade-offs of every system
are drawn together in ``report/det.png`` (:func:`side_by_side_det`).
"""

from __future__ import annotations

import csv
import time
import warnings
from dataclasses import dataclass
from pathlib import Path

from wordspot.errors import WordspotError, WordspotWarning

__all__ = ["DemoSet", "DemoRow", "SYSTEMS", "DEFAULT_SYSTEMS", "WITH_SCORER", "find_recordings", "demo_sets",
           "demo_row", "starter_dev_manifest", "long_row", "side_by_side_det", "run_demo", "render_table"]

_NOISY_LEVELS = (20, 10, 5)


@dataclass(frozen=True)
class DemoSet:
    """One row of the demo tables: a name, the utterances, and a note on what it shows.

    ``kind`` is "words" (a row of the WER table) or "detection" (command recordings among
    recordings with no command: miss rate, false accepts, equal error rate).
    """

    name: str
    utterances: tuple
    note: str
    kind: str = "words"


@dataclass(frozen=True)
class DemoRow:
    """Measured figures of one demo set.

    ``kind`` "words" and "detection" rows come from the ordinary evaluation; the detection
    figures (with ``equal_error_rate``, None when the rates never meet or a confidence is
    missing) are filled for "detection" rows. A "long" row holds the scan of the long
    recordings: ``utterances`` files, ``words`` embedded commands, ``seconds`` of audio,
    ``hits``, ``false_accepts`` (and per hour), ``on_time`` (share of hits with both ends
    within 0.3 s) and ``scan_seconds``; no WER.
    """

    name: str
    utterances: int
    words: int
    wer: float
    wer_ci95: tuple[float, float]
    substitutions: int
    deletions: int
    insertions: int
    note: str
    kind: str = "words"
    miss_rate: float | None = None
    non_command_files: int = 0
    false_accept_files: int = 0
    false_accepts_per_hour: float | None = None
    seconds: float = 0.0
    hits: int = 0
    false_accepts: int = 0
    on_time: float | None = None
    scan_seconds: float = 0.0
    equal_error_rate: float | None = None

    @property
    def false_accept_share(self) -> float | None:
        """Share of the files with no command on which any word was recognised."""
        return self.false_accept_files / self.non_command_files if self.non_command_files else None

    def to_dict(self) -> dict:
        if self.kind == "long":
            return {"kind": "long", "files": self.utterances, "commands": self.words,
                    "seconds": round(self.seconds, 3), "hits": self.hits,
                    "hit_rate": self.hits / self.words if self.words else None,
                    "false_accepts": self.false_accepts, "false_accepts_per_hour": self.false_accepts_per_hour,
                    "on_time": self.on_time, "scan_seconds": round(self.scan_seconds, 3), "note": self.note}
        out = {
            "utterances": self.utterances,
            "reference_words": self.words,
            "wer": self.wer,
            "wer_ci95": list(self.wer_ci95),
            "substitutions": self.substitutions,
            "deletions": self.deletions,
            "insertions": self.insertions,
            "note": self.note,
        }
        if self.kind == "detection":
            out.update(kind="detection", miss_rate=self.miss_rate, non_command_files=self.non_command_files,
                       false_accept_files=self.false_accept_files, false_accept_share=self.false_accept_share,
                       false_accepts_per_hour=self.false_accepts_per_hour,
                       equal_error_rate=self.equal_error_rate)
        return out


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
    distractors = folder / "distractors.csv"
    if distractors.is_file():
        sets.append(DemoSet("test+distractors", sets[0].utterances + tuple(read_manifest(distractors)),
                            "the test commands among words, talk and kitchen noise with no command",
                            kind="detection"))
    return sets


def demo_row(ds: DemoSet, result) -> DemoRow:
    """The table row of a set from its :class:`wordspot.evaluation.scoring.EvaluationResult`."""
    from wordspot.evaluation.detection import equal_error_rate_of

    false_accept_files = sum(1 for s in result.scores if not s.utterance.reference and s.utterance.recognised)
    return DemoRow(ds.name, result.utterances, result.reference_words, result.wer, tuple(result.wer_ci95),
                   result.substitutions, result.deletions, result.insertions, ds.note, kind=ds.kind,
                   miss_rate=result.miss_rate, non_command_files=result.non_command_utterances,
                   false_accept_files=false_accept_files, false_accepts_per_hour=result.false_accepts_per_hour,
                   equal_error_rate=equal_error_rate_of(result) if ds.kind == "detection" else None)


def long_row(model, labels: Path, *, jobs: int = 1) -> DemoRow:
    """The long recordings' row: every recording of ``labels`` scanned and scored."""
    from wordspot.decoding.decoder import build_recognizer
    from wordspot.evaluation.scan_run import evaluate_scan

    ev = evaluate_scan(build_recognizer(model), labels, jobs=jobs)
    sc = ev.score
    return DemoRow("long", len(sc.recordings), sc.labels, float("nan"), (float("nan"), float("nan")), 0, 0, 0,
                   "commands among talk, kitchen noise and quiet", kind="long",
                   false_accepts_per_hour=sc.false_accepts_per_hour, seconds=sc.hours * 3600.0, hits=sc.hits,
                   false_accepts=sc.false_accepts, on_time=sc.boundary()["on_time"] if sc.hits else None,
                   scan_seconds=ev.seconds)


#: The demo's systems, in table order: name -> what it is.
SYSTEMS = {
    "starter": "the shipped starter model alone (no bakery recordings)",
    "starter-no-scorer": "the starter with its sound scorer taken out: the mixtures alone, its calibration "
                         "fitted again on the starter corpus's dev split as the shipped one was",
    "adapted": "the starter adapted on the bakery training set (wordspot train's default)",
    "adapted-no-scorer": "the starter without its sound scorer, adapted as 'adapted' is: the mixtures alone, "
                         "its calibration fitted on their measures",
    "scratch": "trained from scratch on the bakery training set (wordspot train --from-scratch, with a sound scorer fitted on those recordings)",
    "scratch-no-scorer": "trained from scratch as 'scratch' is, without the sound scorer (wordspot train --from-scratch "
                         "--no-scorer): the mixtures alone, its calibration fitted on their measures",
}
#: The systems whose word confidence reads the sound scorer (the others use the mixtures alone).
WITH_SCORER = ("starter", "adapted", "scratch")
#: The systems ``wordspot demo`` builds unless asked otherwise.
DEFAULT_SYSTEMS = ("starter", "adapted", "scratch")


def starter_dev_manifest(folder: Path) -> Path:
    """The starter corpus's dev manifest in the demo recordings ``folder`` (``starter/dev.csv``,
    where ``recordings/starter.py build`` writes it): the split the shipped starter's
    calibration was fitted on, and so the one ``starter-no-scorer``'s is fitted on."""
    return Path(folder) / "starter" / "dev.csv"


def _starter_no_scorer(out_dir: Path, dev_manifest: Path, say):
    """The starter without its scorer (bakery lexicon set by the caller), kept in ``out_dir``."""
    from wordspot.evaluation.mixtures_only import cached_starter_mixtures_only

    cache = out_dir / "starter-no-scorer.model"
    model, reused, seconds = cached_starter_mixtures_only(cache, dev_manifest, report=say)
    if reused:
        say(f"starter-no-scorer: reused {cache} (made earlier from the same starter, dev manifest and settings)")
    else:
        say(f"starter-no-scorer: calibration fitted on the mixtures' measures in {seconds:.0f} s, kept in {cache}")
    return model, seconds


def _build(system: str, folder: Path, out_dir: Path, *, jobs: int, quiet: bool, say, dev_manifest: Path,
           start_without_scorer=None):
    """The model of one system, written to ``out_dir/bakery-<system>.model``.

    ``start_without_scorer``: the starter without its scorer made earlier in the run (its
    calibration then is the fallback of ``adapted-no-scorer``); else the starter's scorer
    and calibration are taken out here.
    """
    from wordspot.corpus import read_manifest
    from wordspot.language.lexicon import read_lexicon
    from wordspot.model import load_model, save_model

    lexicon = read_lexicon(folder.parent / "lexicon" / "bakery.txt")
    if system == "starter":
        model = load_model("starter")
        model.lexicon = lexicon  # recognise the bakery words; no word-pair counts for them (uniform prior)
        seconds = 0.0
    elif system == "starter-no-scorer":
        model, seconds = _starter_no_scorer(out_dir, dev_manifest, say)
        model.lexicon = lexicon
    else:
        train_utts = read_manifest(folder / "train.csv")
        say(f"{system}: {len(train_utts)} recordings of {len({u.speaker for u in train_utts})} voices "
            f"({folder / 'train.csv'}) ...")
        from wordspot.evaluation.calibrate import CalibrationConfig, train_calibrated

        if system in ("adapted", "adapted-no-scorer"):
            from wordspot.training.adapt import AdaptationConfig, adapting

            start = load_model("starter")
            if system == "adapted-no-scorer":
                from wordspot.evaluation.mixtures_only import without_scorer

                start = without_scorer(start) if start_without_scorer is None else start_without_scorer
            fit = adapting(start, lexicon, config=AdaptationConfig(jobs=jobs),
                           manifest=folder / "train.csv", quiet=quiet, report=None if quiet else say)
        else:
            from wordspot.training.trainer import TrainingConfig, train

            config = TrainingConfig(jobs=jobs) if system == "scratch" else TrainingConfig(jobs=jobs, scorer=None)

            def fit(utts):
                return train(utts, lexicon, config=config, manifest=folder / "train.csv",
                             quiet=quiet, report=None if quiet else say)
        # as `wordspot train` does: calibrated confidences, fitted on held-out recordings
        began = time.perf_counter()
        model, _summary = train_calibrated(fit, train_utts, config=CalibrationConfig().decided(
            adapting=not system.startswith("scratch")), quiet=quiet, report=None if quiet else say,
            fallback=getattr(fit, "start_calibration", None), jobs=jobs)
        seconds = time.perf_counter() - began
    model_file = out_dir / f"bakery-{system}.model"
    save_model(model, model_file)
    if seconds:
        say(f"{system}: model written to {model_file} ({seconds:.0f} s)")
    return model, model_file, seconds


def side_by_side_det(evaluations: dict, folder: Path, set_name: str = "test+distractors"):
    """Every system's trade-off on ``set_name`` in one picture: ``folder/det.png`` and ``det.csv``.

    Parameters
    ----------
    evaluations : dict of system name -> list of ManifestEvaluation
        As :func:`run_demo` returns them.

    Returns
    -------
    (Path, Path or None) or None
        The table and the picture (None without matplotlib); None when no system's
        ``set_name`` has both kinds of recording with every confidence known.
    """
    from wordspot.evaluation.detection import measurable, trade_off
    from wordspot.evaluation.report import write_trade_offs

    curves = {}
    for name, evs in evaluations.items():
        for ev in evs:
            if ev.name == set_name and measurable(ev.result):
                curves[name] = trade_off([s.utterance for s in ev.result.scores])
    if not curves:
        return None
    return write_trade_offs(curves, folder, title=f"Detection error trade-off, {set_name}: one curve per system")


def run_demo(folder: Path, out_dir: Path, *, model_path: Path | None = None, systems=DEFAULT_SYSTEMS,
             jobs: int = 2, quiet: bool = False, say=print, starter_dev: Path | None = None):
    """Build each system's model (or load ``model_path``) and evaluate it on every demo set.

    ``starter_dev``: the starter corpus's dev manifest for ``starter-no-scorer`` (default
    :func:`starter_dev_manifest`); when it is missing that system is left out with a
    :class:`WordspotWarning` saying why.
    The trade-offs of every system on ``test+distractors`` go to ``out_dir/report/det.png``
    and ``det.csv`` (:func:`side_by_side_det`).

    Returns
    -------
    results : dict of system name -> list of DemoRow
    model_files : dict of system name -> Path
    evaluations : dict of system name -> list of ManifestEvaluation
    seconds : dict of system name -> float
        Training, adaptation or calibration time (0 for the starter alone, a reused
        ``starter-no-scorer`` and a given model).
    """
    from wordspot.evaluation.html_report import write_html_report
    from wordspot.evaluation.report import write_report
    from wordspot.evaluation.run import evaluate_utterances
    from wordspot.model import load_model

    out_dir.mkdir(parents=True, exist_ok=True)
    dev_manifest = Path(starter_dev) if starter_dev is not None else starter_dev_manifest(folder)
    results, files, evaluations, seconds = {}, {}, {}, {}
    if model_path is not None:
        plan = [("model", None)]
    else:
        unknown = [s for s in systems if s not in SYSTEMS]
        if unknown:
            raise WordspotError(f"unknown demo system(s) {', '.join(unknown)}; choose from {', '.join(SYSTEMS)}")
        systems = [s for s in SYSTEMS if s in systems]  # table order
        if "starter-no-scorer" in systems and not dev_manifest.is_file():
            warnings.warn(f"demo system starter-no-scorer left out: its calibration is fitted on the starter "
                          f"corpus's dev split, and {dev_manifest} is not there (build the corpus with `python "
                          "recordings/starter.py build`, or name its dev manifest with --starter-dev)",
                          WordspotWarning, stacklevel=2)
            systems.remove("starter-no-scorer")
            if not systems:
                raise WordspotError("no demo system left to run: starter-no-scorer needs the starter corpus's dev "
                                    f"split ({dev_manifest}); choose other systems with --systems")
        plan = [(s, s) for s in systems]
    start_without_scorer = None
    for name, system in plan:
        began = time.perf_counter()
        if system is None:
            model, files[name], seconds[name] = load_model(model_path), Path(model_path), 0.0
        else:
            model, files[name], seconds[name] = _build(system, folder, out_dir, jobs=jobs, quiet=quiet, say=say,
                                                       dev_manifest=dev_manifest,
                                                       start_without_scorer=start_without_scorer)
            if system == "starter-no-scorer":
                start_without_scorer = load_model(out_dir / "starter-no-scorer.model")  # its own lexicon
        rows, evs = [], []
        for ds in demo_sets(folder):
            if not ds.utterances:
                continue
            say(f"{name}: evaluating {ds.name} ({len(ds.utterances)} recordings) ...")
            ev = evaluate_utterances(model, ds.utterances, name=ds.name, jobs=jobs, quiet=quiet)
            files_ = write_report(ev.result, out_dir / "report" / name / ds.name)
            write_html_report(ev, files_.folder, confusions=files_.confusions)
            rows.append(demo_row(ds, ev.result))
            evs.append(ev)
        if (folder / "long.csv").is_file():
            say(f"{name}: scanning the long recordings (long.csv) ...")
            rows.append(long_row(model, folder / "long.csv", jobs=jobs))
        results[name], evaluations[name] = rows, evs
        say(f"{name}: built and evaluated in {time.perf_counter() - began:.0f} s")
    side_by_side_det(evaluations, out_dir / "report")
    return results, files, evaluations, seconds


def _pct(x: float) -> str:
    return f"{100 * x:.1f}%"


def _columns(header: list[str], body: list[list[str]], right: set[int]) -> list[str]:
    widths = [max(len(x) for x in col) for col in zip(header, *body)]

    def line(cells):
        return "  ".join(c.rjust(w) if i in right else c.ljust(w) for i, (c, w) in enumerate(zip(cells, widths))).rstrip()

    return [line(header), line(["-" * w for w in widths])] + [line(b) for b in body]


def _optional_pct(x: float | None) -> str:
    return "-" if x is None else _pct(x)


def render_table(results: dict) -> str:
    """The demo's results as aligned plain text.

    The WER table (one row per word set, a column per system); then, when the sets hold
    them, the commands among files with no command (a row per system: miss rate on the
    commands, share of the other files with any recognised word, false accepts per hour,
    equal error rate as the confidence threshold moves) and the long recordings.
    """
    names = list(results)
    first = results[names[0]]
    header = ["set", "files", "words"] + [f"WER {n}" for n in names] + ["what it shows"]
    body = []
    for k, row in enumerate(first):
        if row.kind != "words":
            continue
        cells = [row.name, str(row.utterances), str(row.words)]
        for n in names:
            r = results[n][k]
            cells.append(f"{_pct(r.wer)} ({_pct(r.wer_ci95[0])}-{_pct(r.wer_ci95[1])})")
        body.append(cells + [row.note])
    out = _columns(header, body, set(range(1, 3 + len(names))))
    for k, row in enumerate(first):
        if row.kind == "detection":
            out += ["", f"{row.name}: {row.note}",
                    f"({row.utterances - row.non_command_files} command files with {row.words} words, "
                    f"{row.non_command_files} files with no command)"]
            body = []
            for n in names:
                r = results[n][k]
                share = "-" if r.false_accept_share is None else (
                    f"{_pct(r.false_accept_share)} ({r.false_accept_files} of {r.non_command_files})")
                per_hour = "-" if r.false_accepts_per_hour is None else f"{r.false_accepts_per_hour:.1f}"
                body.append([n, _optional_pct(r.miss_rate), share, per_hour, _optional_pct(r.equal_error_rate)])
            out += _columns(["system", "miss rate", "files with no command that got a word", "false accepts/hour",
                             "EER"], body, {1, 2, 3, 4})
        elif row.kind == "long":
            out += ["", f"long recordings (wordspot scan): {row.utterances} files, {row.seconds / 60:.1f} min, "
                        f"{row.words} embedded commands (long.csv)"]
            body = []
            for n in names:
                r = results[n][k]
                on_time = "-" if r.on_time is None else _pct(r.on_time)
                body.append([n, f"{_pct(r.hits / r.words) if r.words else '-'} ({r.hits} of {r.words})",
                             f"{r.false_accepts} ({r.false_accepts_per_hour / 12:.1f} per 5 min)", on_time,
                             f"{r.scan_seconds:.1f}"])
            out += _columns(["system", "found, right words", "false accepts", "both ends within 0.3 s",
                             "scan s"], body, {1, 2, 3, 4})
    return "\n".join(out)
