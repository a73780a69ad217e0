"""Tests of wordspot.audio.writing: 16-bit WAV files that read back exactly."""

import numpy as np
import pytest
import soundfile as sf

from wordspot.audio.writing import to_pcm16, wav_bytes, write_wav
from wordspot.errors import AudioError


def test_wav_reads_back_bit_exactly_with_soundfile(tmp_path, rng):
    # Reference library: soundfile (libsndfile) reads 16-bit PCM as the stored integers.
    x = np.concatenate([rng.uniform(-1, 1, 9000), [1.0, -1.0, 0.0, 1.5, -1.5]])
    path = write_wav(tmp_path / "take.wav", x, 16000)
    back, rate = sf.read(path, dtype="int16")
    assert rate == 16000
    np.testing.assert_array_equal(back, to_pcm16(x))
    info = sf.info(path)
    assert (info.channels, info.subtype, info.format) == (1, "PCM_16", "WAV")
    # and as floats, soundfile divides by 32768 (libsndfile's scaling)
    as_float, _ = sf.read(path, dtype="float64")
    np.testing.assert_array_equal(as_float, to_pcm16(x) / 32768.0)


def test_pcm16_scaling_and_clipping():
    # round(x * 32767), clipped at full scale (common practice for float to 16-bit)
    got = to_pcm16(np.array([0.0, 0.5, -0.5, 1.0, -1.0, 2.0, 1e-5]))
    np.testing.assert_array_equal(got, [0, 16384, -16384, 32767, -32767, 32767, 0])


def test_no_temporary_file_is_left(tmp_path):
    write_wav(tmp_path / "a.wav", np.zeros(100), 8000)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.wav"]
    assert len(wav_bytes(np.zeros(100), 8000)) == 44 + 200  # canonical 44-byte header + 2 bytes a sample


def test_bad_input_is_refused(tmp_path):
    with pytest.raises(AudioError, match="NaN"):
        write_wav(tmp_path / "a.wav", np.array([0.0, np.nan]), 16000)
    with pytest.raises(AudioError, match="one channel"):
        write_wav(tmp_path / "a.wav", np.zeros((10, 2)), 16000)
    with pytest.raises(AudioError, match="sample_rate"):
        write_wav(tmp_path / "a.wav", np.zeros(10), 0)
    with pytest.raises(AudioError, match="cannot write"):
        write_wav(tmp_path / "missing" / "a.wav", np.zeros(10), 16000)
    assert not (tmp_path / "a.wav").exists()
