"""The command line as a whole: help with examples, one-line errors, exit statuses.

What counts as right here is our own contract (README "Command line"): a bad input gives
one line starting "wordspot: error:" and a non-zero status, never a traceback, unless
--debug is given.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
import soundfile as sf

from decoding_helpers import tiny_model
from wordspot.cli import build_parser, chosen_command, main
from wordspot.errors import ModelFileError, TrainingError
from wordspot.evaluation.calibrate import CalibrationConfig
from wordspot.model import save_model

ENTRIES = {"oven": [["AA", "B", "AA"]], "start": [["S", "T", "AA", "T"]], "stop": [["S", "T", "AA", "B"]]}


@pytest.fixture
def setup(rng, tmp_path):
    model = tiny_model(rng, ENTRIES, transcripts=[["oven", "start"], ["oven", "stop"]])
    model_path = save_model(model, tmp_path / "bakery.model")
    good = tmp_path / "oven-start.wav"
    sf.write(good, 0.1 * rng.normal(size=16000).astype(np.float32), 16000)
    broken = tmp_path / "broken.wav"
    broken.write_bytes(b"RIFF\x00\x00\x00\x00WAVEjunkjunkjunk")
    return tmp_path, str(model_path), good, broken


def _run(capsys, argv):
    status = main(argv)
    out, err = capsys.readouterr()
    return status, out, err


def _one_line_error(err: str) -> bool:
    lines = [line for line in err.splitlines() if line.startswith("wordspot: error:")]
    return bool(lines) and "Traceback" not in err


@pytest.mark.parametrize("command", ["demo", "train", "recognize", "evaluate", "lexicon"])
def test_help_has_bakery_examples(command, capsys):
    with pytest.raises(SystemExit) as exit_info:
        main([command, "--help"])
    assert exit_info.value.code == 0
    out = capsys.readouterr().out
    assert "example" in out and ("bakery" in out or "oven" in out)


def test_top_level_help_mentions_safety(capsys):
    with pytest.raises(SystemExit):
        main(["--help"])
    out = capsys.readouterr().out
    assert "never a safety device" in out and "physical stop" in out


def test_evaluate_unknown_word_lists_it(setup, capsys):
    folder, model_path, good, _ = setup
    manifest = folder / "held-out.csv"
    manifest.write_text(f"path,transcript,speaker\n{good},oven knead,baker-a\n{good},proof,baker-a\n",
                        encoding="utf-8")
    status, _, err = _run(capsys, ["evaluate", "--model", model_path, str(manifest)])
    assert status == 2 and _one_line_error(err)
    assert "knead" in err and "proof" in err  # every problem listed at once


def test_evaluate_unreadable_audio_counts_and_fails(setup, capsys):
    folder, model_path, good, broken = setup
    manifest = folder / "held-out.csv"
    manifest.write_text(f"path,transcript,speaker\n{good},oven start,a\n{broken},oven stop,a\n",
                        encoding="utf-8")
    status, out, err = _run(capsys, ["evaluate", "--model", model_path, str(manifest), "--json"])
    assert status == 1
    record = json.loads(out)
    assert record["utterances"] == 2 and len(record["failed_files"]) == 1
    assert "broken.wav" in record["failed_files"][0]["path"]
    assert "broken.wav" in err and "Traceback" not in err


def test_evaluate_missing_manifest(setup, capsys):
    folder, model_path, _, _ = setup
    status, _, err = _run(capsys, ["evaluate", "--model", model_path, str(folder / "nope.csv")])
    assert status == 2 and _one_line_error(err) and "nope.csv" in err


@pytest.mark.parametrize("damage", ["truncated", "garbage", "missing"])
def test_bad_model_file(setup, capsys, damage):
    folder, model_path, good, _ = setup
    bad = folder / "bad.model"
    data = open(model_path, "rb").read()
    if damage == "truncated":
        bad.write_bytes(data[: len(data) // 2])
    elif damage == "garbage":
        bad.write_bytes(b"not a model at all")
    status, _, err = _run(capsys, ["recognize", "--model", str(bad), str(good)])
    assert status == 2 and _one_line_error(err) and "bad.model" in err


def test_recognize_missing_audio_continues(setup, capsys):
    folder, model_path, good, _ = setup
    status, out, err = _run(capsys, ["recognize", "--model", model_path, str(folder / "gone.wav"), str(good)])
    assert status == 1
    assert "gone.wav" in err and "Traceback" not in err
    assert str(good) in out  # the batch went on to the next file


def _train(setup, capsys, transcripts, *options):
    """``wordspot train`` on the setup's good file with these transcripts and a one-word lexicon."""
    folder, _, good, _ = setup
    lex = folder / "lex.txt"
    lex.write_text("oven AA B AA\n", encoding="utf-8")
    manifest = folder / "train.csv"
    manifest.write_text("path,transcript,speaker\n" + "".join(f"{good},{t},a\n" for t in transcripts),
                        encoding="utf-8")
    return _run(capsys, ["train", str(manifest), "--lexicon", str(lex), "--out", str(folder / "m.model"), *options])


def test_train_missing_words_listed_before_work(setup, capsys):
    folder = setup[0]
    status, _, err = _train(setup, capsys, ["oven knead", "bagel"], "--from-scratch")
    assert status == 2 and _one_line_error(err)
    assert "knead" in err and "bagel" in err
    assert not (folder / "m.model").exists()


def test_train_options_of_full_training_need_from_scratch(setup, capsys):
    status, _, err = _train(setup, capsys, ["oven"], "--mixtures", "4", "--speed", "1.0")
    assert status == 2 and _one_line_error(err)
    assert "--mixtures, --speed only apply with --from-scratch" in err
    status, _, err = _train(setup, capsys, ["oven"], "--from-scratch", "--start", "starter")
    assert status == 2 and "exclude each other" in err


def test_train_jumbled_clips_reach_the_calibration_and_bad_counts_are_named(setup, capsys, monkeypatch):
    import wordspot.cli.train_cmd as train_cmd

    seen = []

    def fake(fit, utterances, *, config, **_):
        seen.append(config)
        raise TrainingError("stopped here by the test")

    monkeypatch.setattr(train_cmd, "train_calibrated", fake)
    status, _, err = _train(setup, capsys, ["oven"], "--jumbled-clips", "0")
    assert status == 2 and "stopped here by the test" in err
    assert seen[-1].jumbled == 0
    _train(setup, capsys, ["oven"])
    assert seen[-1].jumbled == CalibrationConfig().jumbled == 150
    status, _, err = _train(setup, capsys, ["oven"], "--jumbled-clips", "-3")
    assert status == 2 and _one_line_error(err) and "number of jumbled clips" in err


def test_train_learn_pronunciations_reaches_the_adaptation_and_needs_adapting(setup, capsys, monkeypatch):
    import wordspot.cli.train_cmd as train_cmd

    seen = []

    def fake(start, lexicon, *, config, **_):
        seen.append(config)
        raise TrainingError("stopped here by the test")

    monkeypatch.setattr(train_cmd, "adapting", fake)
    status, _, err = _train(setup, capsys, ["oven"], "--learn-pronunciations")
    assert status == 2 and "stopped here by the test" in err
    assert seen[-1].pronunciations.enabled
    _train(setup, capsys, ["oven"])
    assert not seen[-1].pronunciations.enabled
    status, _, err = _train(setup, capsys, ["oven"], "--from-scratch", "--learn-pronunciations")
    assert status == 2 and _one_line_error(err) and "--learn-pronunciations applies when adapting" in err


def test_debug_shows_the_traceback(setup):
    folder, _, good, _ = setup
    with pytest.raises(ModelFileError):
        main(["--debug", "recognize", "--model", str(folder / "none.model"), str(good)])


def test_debug_after_the_subcommand_shows_the_traceback(setup):
    folder, _, good, _ = setup
    with pytest.raises(ModelFileError):
        main(["recognize", "--model", str(folder / "none.model"), str(good), "--debug"])


@pytest.mark.parametrize("argv, quiet, debug", [
    (["recognize", "-m", "m", "f"], False, False),
    (["-q", "recognize", "-m", "m", "f"], True, False),
    (["recognize", "-m", "m", "f", "-q"], True, False),
    (["--quiet", "recognize", "--debug", "-m", "m", "f"], True, True),
    (["--debug", "lexicon", "check", "lex.txt", "--quiet"], True, True),
    (["lexicon", "suggest", "knead", "--debug"], False, True),
])
def test_global_options_before_or_after_the_subcommand(argv, quiet, debug):
    args = build_parser(chosen_command(argv)).parse_args(argv)
    assert (args.quiet, args.debug) == (quiet, debug)


@pytest.mark.parametrize("where", ["before", "after"])
def test_quiet_evaluate_in_either_place(setup, capsys, where):
    folder, model_path, good, _ = setup
    manifest = folder / "held-out.csv"
    manifest.write_text(f"path,transcript,speaker\n{good},oven start,a\n", encoding="utf-8")
    argv = ["evaluate", "--model", model_path, str(manifest), "--report", str(folder / "report")]
    status, out, _ = _run(capsys, argv)
    assert status == 0 and "report written to" in out
    status, out, _ = _run(capsys, ["-q", *argv] if where == "before" else [*argv, "-q"])
    assert status == 0 and "report written to" not in out and "word error rate" in out


def test_evaluate_prints_misses_and_false_accepts(setup, capsys):
    folder, model_path, good, _ = setup
    manifest = folder / "held-out.csv"
    # the second row says "no command here": an empty transcript
    manifest.write_text(f"path,transcript,speaker\n{good},oven start,a\n{good},,a\n", encoding="utf-8")
    status, out, _ = _run(capsys, ["evaluate", "--model", model_path, str(manifest), "--json"])
    assert status == 0
    record = json.loads(out)
    heard = record["recognised_words"] // 2  # the same file twice: the same words each time
    assert record["non_command_utterances"] == 1 and record["false_accepts"] == heard
    # one second of audio (16,000 samples at 16 kHz), counted as frames x hop, so short by
    # at most one 25 ms analysis window
    assert record["non_command_seconds"] == pytest.approx(1.0, abs=0.025)
    assert record["false_accepts_per_hour"] == pytest.approx(heard * 3600 / record["non_command_seconds"], rel=1e-12)
    assert record["miss_rate"] == pytest.approx((record["substitutions"] + record["deletions"]) / 2, abs=1e-12)
    assert "equal_error_rate" in record
    status, out, _ = _run(capsys, ["evaluate", "--model", model_path, str(manifest), "--report", str(folder / "r")])
    assert status == 0
    assert "miss rate" in out and "on 1 recording(s) without a command" in out and "per hour" in out
    assert (folder / "r" / "det.csv").is_file() and (folder / "r" / "det.png").is_file()


def test_train_with_few_takes_keeps_the_starting_models_calibration_and_says_so(tmp_path, capsys):
    # A starting model that carries a calibration (as the shipped starters do), adapted on
    # six takes: 15% held out is too few for a calibration of the user's own, so the model
    # keeps the start's and the training summary says so in plain words.
    from dataclasses import replace as _replace
    from pathlib import Path

    from wordspot.decoding.confidence import BASE_MEASURE_NAMES
    from wordspot.model import load_model
    from wordspot.util.logistic import Calibration

    repo = Path(__file__).resolve().parents[2]
    k = len(BASE_MEASURE_NAMES)
    cal = Calibration(BASE_MEASURE_NAMES, np.zeros(k), np.ones(k), np.full(k, 0.2), -0.5)
    start = save_model(_replace(load_model("starter"), calibration=cal), tmp_path / "start.model")
    rows = [ln for ln in (repo / "recordings" / "train.csv").read_text(encoding="utf-8").splitlines()[1:]
            if ln.split(",")[1] in ("oven start", "stop")][:6]
    manifest = tmp_path / "takes.csv"
    manifest.write_text("path,transcript,speaker\n" + "".join(
        f"{repo / 'recordings' / r.split(',')[0]},{r.split(',')[1]},{r.split(',')[2]}\n" for r in rows),
        encoding="utf-8")
    status, out, err = _run(capsys, ["train", str(manifest), "--lexicon", str(repo / "lexicon" / "bakery.txt"),
                                     "--start", str(start), "--out", str(tmp_path / "m.model")])
    assert status == 0, err
    assert "keeps the calibration it started with" in out
    got = load_model(tmp_path / "m.model")
    assert got.calibration.to_dict() == cal.to_dict() and got.info["calibration"]["kept_from_start"] is True
