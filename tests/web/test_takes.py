"""Tests of wordspot.web.takes: the takes folder stays consistent whatever happens."""

import csv
import threading

import numpy as np
import pytest
import soundfile as sf

from wordspot.errors import LexiconError, WordspotError
from wordspot.util import atomic
from wordspot.web import takes as takes_module
from wordspot.web.takes import TakeFolder, speaker_slug


def _rows(path):
    with open(path, newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


def _tone(rng, seconds=0.5):
    return (0.2 * np.sin(2 * np.pi * 440 * np.arange(int(16000 * seconds)) / 16000)
            + 0.001 * rng.normal(size=int(16000 * seconds)))


def _consistent(folder: TakeFolder) -> None:
    """Every manifest row names an existing WAV; every WAV under audio/ has exactly one row."""
    listed = [r.path for held in (False, True) for r in folder.rows(held)]
    assert len(listed) == len(set(listed))
    on_disk = sorted(p.relative_to(folder.folder).as_posix() for p in (folder.folder / "audio").rglob("*.wav"))
    assert sorted(listed) == on_disk


def test_a_take_is_written_then_listed(tmp_path, rng):
    folder = TakeFolder(tmp_path / "takes")
    wave = _tone(rng)
    saved = folder.add_take(wave, "Oven", "Baker A")
    assert (saved.path, saved.manifest, saved.word, saved.speaker) == \
        ("audio/baker-a/oven-1.wav", "train.csv", "oven", "baker-a")
    assert _rows(tmp_path / "takes" / "train.csv") == [
        {"path": "audio/baker-a/oven-1.wav", "transcript": "oven", "speaker": "baker-a"}]
    back, rate = sf.read(tmp_path / "takes" / saved.path)
    assert rate == 16000
    np.testing.assert_allclose(back, wave, atol=1 / 32767)  # 16-bit rounding (half a step each way)
    second = folder.add_take(wave, "oven", "baker-a", held_out=True)
    assert (second.path, second.manifest) == ("audio/baker-a/oven-2.wav", "held-out.csv")
    assert folder.counts("baker-a") == {"oven": [1, 1]}
    _consistent(folder)


def test_hand_written_rows_are_kept_byte_for_byte(tmp_path, rng):
    root = tmp_path / "takes"
    root.mkdir()
    (root / "extra.wav").write_bytes(b"")
    text = 'path,transcript,speaker,note\r\nextra.wav,"oven start",baker-b,by hand'  # no final newline
    (root / "train.csv").write_text(text, encoding="utf-8", newline="")
    TakeFolder(root).add_take(_tone(rng), "stop", "baker-a")
    raw = (root / "train.csv").read_bytes().decode("utf-8")
    assert raw.startswith(text + "\n")
    assert raw.endswith("audio/baker-a/stop-1.wav,stop,baker-a\n")


def test_concurrent_saves_do_not_corrupt_the_manifest(tmp_path, rng):
    folder = TakeFolder(tmp_path / "takes")
    wave = _tone(rng, 0.2)
    errors = []

    def save(k):
        try:
            folder.add_take(wave, "timer", f"baker-{k % 2}")
        except Exception as exc:  # collected, so that a failure shows which save broke
            errors.append(exc)

    threads = [threading.Thread(target=save, args=(k,)) for k in range(16)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert errors == []
    rows = _rows(tmp_path / "takes" / "train.csv")
    assert len(rows) == 16 and len({r["path"] for r in rows}) == 16
    _consistent(folder)


def test_a_kill_between_the_wav_and_the_manifest_is_repaired(tmp_path, rng, monkeypatch):
    folder = TakeFolder(tmp_path / "takes")
    folder.add_take(_tone(rng), "oven", "baker-a")
    before = (tmp_path / "takes" / "train.csv").read_bytes()

    def killed(*args, **kwargs):
        raise KeyboardInterrupt("killed after the WAV, before the manifest")

    monkeypatch.setattr(folder, "_append_row", killed)
    with pytest.raises(KeyboardInterrupt):
        folder.add_take(_tone(rng), "oven", "baker-a")
    assert (tmp_path / "takes" / "audio" / "baker-a" / "oven-2.wav").is_file()
    assert (tmp_path / "takes" / "train.csv").read_bytes() == before
    # a half-written manifest from an earlier kill, left as a temporary file
    (tmp_path / "takes" / ".train.csv.abc123.tmp").write_text("path,transcr")

    found = TakeFolder(tmp_path / "takes").reconcile()  # what the server does when it starts
    assert found.set_aside == ["set-aside/audio/baker-a/oven-2.wav"]
    assert found.unfinished == [".train.csv.abc123.tmp"]
    assert (tmp_path / "takes" / "set-aside" / "audio" / "baker-a" / "oven-2.wav").is_file()  # kept, not deleted
    assert any("set-aside" in note for note in found.notes())
    assert (tmp_path / "takes" / "train.csv").read_bytes() == before
    _consistent(TakeFolder(tmp_path / "takes"))


def test_a_row_without_its_file_is_reported(tmp_path, rng):
    folder = TakeFolder(tmp_path / "takes")
    saved = folder.add_take(_tone(rng), "stop", "baker-a")
    (tmp_path / "takes" / saved.path).unlink()
    found = folder.reconcile()
    assert found.missing == [("train.csv", saved.path)]
    assert "missing" in found.notes()[0]


def test_a_kill_inside_the_manifest_write_leaves_the_old_manifest(tmp_path, rng, monkeypatch):
    folder = TakeFolder(tmp_path / "takes")
    folder.add_take(_tone(rng), "oven", "baker-a")
    before = (tmp_path / "takes" / "train.csv").read_bytes()

    def half_then_die(path, data):
        def write(handle):
            handle.write(data[:10])
            raise KeyboardInterrupt("killed while writing the manifest")
        return atomic.write_atomically(path, write)

    monkeypatch.setattr(takes_module, "write_bytes_atomically", half_then_die)
    with pytest.raises(KeyboardInterrupt):
        folder.add_take(_tone(rng), "oven", "baker-a")
    assert (tmp_path / "takes" / "train.csv").read_bytes() == before
    found = folder.reconcile()
    assert found.set_aside == ["set-aside/audio/baker-a/oven-2.wav"]
    _consistent(folder)


def test_paths_outside_the_folder_are_refused(tmp_path):
    folder = TakeFolder(tmp_path / "takes")
    for bad in ("../secret.txt", "audio/../../x", "/etc/passwd"):
        with pytest.raises(WordspotError, match="only paths inside the takes folder"):
            folder.resolve(bad)
    assert folder.resolve("audio/a.wav") == (tmp_path / "takes" / "audio" / "a.wav").resolve()


def test_bad_names_are_refused(tmp_path, rng):
    folder = TakeFolder(tmp_path / "takes")
    with pytest.raises(LexiconError, match="character"):
        folder.add_take(_tone(rng), "oven/../x", "baker-a")
    with pytest.raises(WordspotError, match="no letters or digits"):
        speaker_slug(" ../ ")
    assert speaker_slug("Baker A / night shift") == "baker-a-night-shift"
