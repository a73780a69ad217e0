"""End to end: train a small model on part of the demo corpus, recognise, evaluate.

The bounds are chosen so that a broken pipeline cannot meet them: with 25 command words,
guessing gives about 96% word errors in single-word mode, and a recogniser that outputs
nothing gives 100% (deletions). A working pipeline trained on two takes of a voice
recognises a third take of the same voice almost perfectly (common practice: held-out
takes of seen speakers are the easy case).
"""

import json
from pathlib import Path

import pytest

from wordspot.decoding.decoder import DecoderSettings
from wordspot.cli import main
from wordspot.corpus import read_manifest
from wordspot.evaluation.run import evaluate_utterances
from wordspot.language.lexicon import read_lexicon
from wordspot.model import save_model
from wordspot.training.trainer import TrainingConfig, train

REPO = Path(__file__).resolve().parents[2]
RECORDINGS = REPO / "recordings"
VOICES = ("flite-slt", "festival-kal", "flite-kal16")

pytestmark = [
    pytest.mark.slow,
    pytest.mark.skipif(not (RECORDINGS / "train.csv").is_file(), reason="demo recordings not present"),
]


def _take(u) -> int:
    return int(Path(u.path).stem.rsplit("-t", 1)[1])


@pytest.fixture(scope="module")
def small_model(tmp_path_factory):
    utts = [u for u in read_manifest(RECORDINGS / "train.csv") if u.speaker in VOICES]
    train_set = [u for u in utts if _take(u) <= 2]
    held_out = [u for u in utts if _take(u) == 3]
    lexicon = read_lexicon(REPO / "lexicon" / "bakery.txt")
    config = TrainingConfig(mixtures=(1, 2), first_passes=4, passes_per_split=2, jobs=1)
    model, summary = train(train_set, lexicon, config=config, quiet=True)
    path = tmp_path_factory.mktemp("model") / "small.model"
    save_model(model, path)
    return model, path, held_out, summary


def test_training_used_every_recording(small_model):
    model, _, _, summary = small_model
    assert summary.used == 2 * 25 * len(VOICES)
    assert not summary.skipped
    passes = [ll for _, ll in summary.passes]
    assert passes[-1] > passes[0]  # Baum-Welch raised the likelihood (Baum et al. 1970)


def test_held_out_takes_single_word(small_model):
    model, _, held_out, _ = small_model
    ev = evaluate_utterances(model, held_out, settings=DecoderSettings(single_word=True), n_bootstrap=200)
    assert ev.result.utterances == 25 * len(VOICES)
    print("single-word WER", ev.result.wer)
    assert ev.result.wer <= 0.10, ev.result.wer
    assert not ev.failed


def test_held_out_takes_word_loop(small_model):
    model, _, held_out, _ = small_model
    ev = evaluate_utterances(model, held_out, n_bootstrap=200)
    print("word-loop WER", ev.result.wer)
    assert ev.result.wer <= 0.15, ev.result.wer


def test_cli_evaluate_json(small_model, tmp_path, capsys):
    _, path, held_out, _ = small_model
    manifest = tmp_path / "held-out.csv"
    lines = ["path,transcript,speaker"] + [f"{u.path},{' '.join(u.words)},{u.speaker}" for u in held_out[:20]]
    manifest.write_text("\n".join(lines) + "\n", encoding="utf-8")
    status = main(["evaluate", "--model", str(path), str(manifest), "--json", "--single-word",
                   "--report", str(tmp_path / "report")])
    assert status == 0
    record = json.loads(capsys.readouterr().out.strip())
    for key in ("wer", "substitutions", "deletions", "insertions", "reference_words", "utterances",
                "utterance_errors", "wer_ci95"):
        assert key in record
    assert record["utterances"] == 20
    low, high = record["wer_ci95"]
    assert low <= record["wer"] <= high
    assert (tmp_path / "report" / "errors.csv").is_file()


def test_cli_recognize_formats(small_model, capsys):
    _, path, held_out, _ = small_model
    files = [str(u.path) for u in held_out[:3]]
    assert main(["recognize", "--model", str(path), "--format", "jsonl", "--single-word", *files]) == 0
    records = [json.loads(line) for line in capsys.readouterr().out.splitlines()]
    assert [r["path"] for r in records] == files
    for r in records:
        assert len(r["words"]) == 1
        seg = r["segments"][0]
        assert 0.0 <= seg["start"] < seg["end"] and 0.0 <= seg["confidence"] <= 1.0
