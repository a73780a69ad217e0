"""Reading a file in blocks: the same samples as reading it whole, whatever the rate."""

import numpy as np
import pytest
import soundfile as sf
import soxr

from wordspot.audio.reading import load_audio
from wordspot.errors import AudioError
from wordspot.stream.blocks import BlockReader


def _write(path, rng, rate, seconds=3.3, channels=1):
    x = (0.2 * rng.normal(size=(int(seconds * rate), channels))).astype(np.float32)
    sf.write(path, x, rate, subtype="FLOAT")
    return x


def _blocks(path, rate, block_seconds):
    with BlockReader(path, rate, block_seconds=block_seconds) as reader:
        return [b for b in reader]


def test_same_rate_blocks_are_the_file(rng, tmp_path):
    x = _write(tmp_path / "a.wav", rng, 16000)
    blocks = _blocks(tmp_path / "a.wav", 16000, 0.25)
    assert max(b.size for b in blocks) == 4000 and len(blocks) == 14
    np.testing.assert_array_equal(np.concatenate(blocks), np.clip(x[:, 0], -1, 1))


@pytest.mark.parametrize("rate", [8000, 22050, 44100])
def test_other_rates_resample_as_soxr_does_for_the_whole_file(rng, tmp_path, rate):
    # soxr.resample of the whole signal is the reference (the library's one-shot call);
    # the streaming resampler keeps its filter state between blocks.
    x = _write(tmp_path / "a.wav", rng, rate)
    got = np.concatenate(_blocks(tmp_path / "a.wav", 16000, 0.37))
    want = soxr.resample(x[:, 0], rate, 16000, quality="HQ")
    assert got.shape == want.shape
    np.testing.assert_allclose(got, np.clip(want, -1, 1), atol=1e-6)
    np.testing.assert_allclose(got, load_audio(tmp_path / "a.wav", sample_rate=16000), atol=1e-6)


def test_channels_are_averaged(rng, tmp_path):
    x = _write(tmp_path / "st.wav", rng, 16000, channels=2)
    got = np.concatenate(_blocks(tmp_path / "st.wav", 16000, 1.0))
    np.testing.assert_allclose(got, np.clip(x.mean(axis=1), -1, 1), atol=1e-7)


def test_bad_files_name_the_file(tmp_path):
    with pytest.raises(AudioError, match="missing.wav.*not found"):
        BlockReader(tmp_path / "missing.wav", 16000)
    (tmp_path / "junk.wav").write_bytes(b"this is not audio at all" * 10)
    with pytest.raises(AudioError, match="junk.wav.*cannot read"):
        BlockReader(tmp_path / "junk.wav", 16000)
    sf.write(tmp_path / "empty.wav", np.zeros(0, np.float32), 16000)
    with pytest.raises(AudioError, match="empty.wav.*no samples"):
        BlockReader(tmp_path / "empty.wav", 16000)
    with pytest.raises(AudioError, match="block_seconds"):
        BlockReader(tmp_path / "empty.wav", 16000, block_seconds=0)


def test_nan_samples_are_reported_with_the_time(rng, tmp_path):
    x = (0.1 * rng.normal(size=48000)).astype(np.float32)
    x[40000] = np.nan
    sf.write(tmp_path / "nan.wav", x, 16000, subtype="FLOAT")
    with pytest.raises(AudioError, match=r"nan.wav: NaN or infinite samples after 2\.0 s"):
        _blocks(tmp_path / "nan.wav", 16000, 1.0)
