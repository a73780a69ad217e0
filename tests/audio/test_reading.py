"""Tests for wordspot.audio.reading: reading, downmixing, resampling and checking recordings."""

import os
import tempfile
import warnings

import numpy as np
import pytest
import soundfile
from hypothesis import HealthCheck, given, settings as hsettings, strategies as st

from wordspot.audio.reading import audio_duration, load_audio
from wordspot.errors import AudioError, AudioWarning, WordspotError


def tone(freq, rate, *, seconds=1.0, amplitude=0.5):
    t = np.arange(int(round(seconds * rate))) / rate
    return amplitude * np.sin(2 * np.pi * freq * t)


def peak_frequency(wave, rate):
    spectrum = np.abs(np.fft.rfft(wave * np.hanning(len(wave))))
    return np.argmax(spectrum) * rate / len(wave)


def rms_db(wave):
    return 20 * np.log10(np.sqrt(np.mean(np.square(wave, dtype=np.float64))))


@pytest.mark.parametrize("rate_in", [8000, 22050, 44100, 48000])
@pytest.mark.parametrize("rate_out", [16000, 8000])
def test_resampling_keeps_tone_frequency_and_level(tmp_path, rate_in, rate_out):
    path = tmp_path / f"beep-{rate_in}.wav"
    soundfile.write(path, tone(1000.0, rate_in), rate_in, subtype="FLOAT")
    wave = load_audio(path, sample_rate=rate_out)
    assert wave.dtype == np.float32 and wave.ndim == 1
    assert len(wave) == pytest.approx(rate_out, abs=2)
    # one FFT bin is 1 Hz for a one-second signal (DFT definition)
    assert peak_frequency(wave, rate_out) == pytest.approx(1000.0, abs=1.0)
    # a sine of amplitude A has RMS A / sqrt(2) (definition); trim the resampler's edge transients
    middle = wave[rate_out // 10 : -rate_out // 10]
    assert rms_db(middle) == pytest.approx(20 * np.log10(0.5 / np.sqrt(2)), abs=0.1)


def test_same_rate_is_returned_unchanged(tmp_path, rng):
    y = (0.1 * rng.standard_normal(16000)).astype(np.float32)
    soundfile.write(tmp_path / "proof.wav", y, 16000, subtype="FLOAT")
    np.testing.assert_array_equal(load_audio(tmp_path / "proof.wav"), y)


def test_stereo_is_averaged(tmp_path, rng):
    left = 0.4 * rng.standard_normal(8000)
    right = 0.2 * rng.standard_normal(8000)
    soundfile.write(tmp_path / "st.wav", np.stack([left, right], axis=1), 16000, subtype="FLOAT")
    np.testing.assert_allclose(load_audio(tmp_path / "st.wav"), (left + right) / 2, atol=1e-6, rtol=0)


@pytest.mark.parametrize(
    "name,subtype,step",
    [
        ("u8.wav", "PCM_U8", 2.0 / 2**8),  # quantisation step of n-bit PCM is 2 / 2^n (definition)
        ("s16.wav", "PCM_16", 2.0 / 2**16),
        ("s24.wav", "PCM_24", 2.0 / 2**24),
        ("s32.wav", "PCM_32", 2.0 / 2**31),
        ("f32.wav", "FLOAT", 1e-7),
        ("s16.flac", "PCM_16", 2.0 / 2**16),
        ("s24.flac", "PCM_24", 2.0 / 2**24),
    ],
)
def test_sample_formats(tmp_path, name, subtype, step):
    y = tone(440.0, 16000, seconds=0.3)
    soundfile.write(tmp_path / name, y, 16000, subtype=subtype)
    wave = load_audio(tmp_path / name)
    assert wave.dtype == np.float32 and wave.shape == y.shape
    np.testing.assert_allclose(wave, y, atol=step + 1e-6, rtol=0)


def test_ogg_vorbis_is_read(tmp_path):
    y = tone(1000.0, 16000)
    soundfile.write(tmp_path / "oven.ogg", y, 16000, format="OGG", subtype="VORBIS")
    wave = load_audio(tmp_path / "oven.ogg")
    assert peak_frequency(wave, 16000) == pytest.approx(1000.0, abs=2.0)


def test_duration_from_header(tmp_path):
    soundfile.write(tmp_path / "a.wav", np.zeros(22050), 44100)
    assert audio_duration(tmp_path / "a.wav") == pytest.approx(0.5, abs=1e-12)
    with pytest.raises(AudioError, match="not found"):
        audio_duration(tmp_path / "none.wav")


def test_missing_file(tmp_path):
    with pytest.raises(AudioError, match=r"missing\.wav: audio file not found"):
        load_audio(tmp_path / "missing.wav")


def test_folder_is_not_a_file(tmp_path):
    with pytest.raises(AudioError, match="is a folder"):
        load_audio(tmp_path)


def test_unreadable_file(tmp_path):
    (tmp_path / "notes.wav").write_text("knead the dough for ten minutes\n")
    with pytest.raises(AudioError, match=r"notes\.wav: cannot read this audio file"):
        load_audio(tmp_path / "notes.wav")


def test_truncated_wav(tmp_path):
    soundfile.write(tmp_path / "full.wav", tone(1000.0, 16000), 16000, subtype="PCM_16")
    data = (tmp_path / "full.wav").read_bytes()
    (tmp_path / "cut.wav").write_bytes(data[: len(data) // 2])
    with pytest.raises(AudioError, match=r"cut\.wav: file is truncated"):
        load_audio(tmp_path / "cut.wav")
    (tmp_path / "head.wav").write_bytes(data[:30])
    with pytest.raises(AudioError, match=r"head\.wav: cannot read"):
        load_audio(tmp_path / "head.wav")


def test_empty_and_short_files(tmp_path):
    soundfile.write(tmp_path / "empty.wav", np.zeros(0), 16000)
    with pytest.raises(AudioError, match=r"empty\.wav: holds no samples"):
        load_audio(tmp_path / "empty.wav")
    soundfile.write(tmp_path / "blip.wav", tone(500.0, 16000, seconds=0.05), 16000)
    with pytest.raises(AudioError, match=r"blip\.wav: is only 50 ms long.*at least 100 ms"):
        load_audio(tmp_path / "blip.wav")


def test_nan_and_inf_samples(tmp_path):
    y = tone(500.0, 16000, seconds=0.3).astype(np.float32)
    y[100] = np.nan
    y[200] = np.inf
    soundfile.write(tmp_path / "bad.wav", y, 16000, subtype="FLOAT")
    with pytest.raises(AudioError, match=r"bad\.wav: 2 sample\(s\) are NaN or infinite"):
        load_audio(tmp_path / "bad.wav")


def test_bad_sample_rate_argument(tmp_path):
    with pytest.raises(AudioError, match="sample_rate must be a positive whole number"):
        load_audio(tmp_path / "x.wav", sample_rate=0)


def test_silence_and_clipping_warn_but_load(tmp_path):
    soundfile.write(tmp_path / "quiet.wav", np.zeros(8000), 16000, subtype="PCM_16")
    with pytest.warns(AudioWarning, match=r"quiet\.wav: is digital silence"):
        wave = load_audio(tmp_path / "quiet.wav")
    assert wave.shape == (8000,)
    loud = np.clip(3.0 * tone(300.0, 16000, seconds=0.5), -1.0, 1.0)
    soundfile.write(tmp_path / "loud.wav", loud, 16000, subtype="PCM_16")
    with pytest.warns(AudioWarning, match=r"loud\.wav: .*% of samples are clipped"):
        wave = load_audio(tmp_path / "loud.wav")
    assert np.max(np.abs(wave)) <= 1.0


def test_clean_file_gives_no_warning(tmp_path):
    soundfile.write(tmp_path / "ok.wav", tone(300.0, 16000, seconds=0.5), 16000, subtype="PCM_16")
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        load_audio(tmp_path / "ok.wav")


@hsettings(max_examples=80, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    st.one_of(
        st.binary(max_size=2000),
        # a valid WAV header followed by random bytes, so the reader gets past the header
        st.binary(max_size=600).map(lambda tail: _wav_header() + tail),
    ),
    st.sampled_from([".wav", ".flac", ".ogg", ".bin"]),
)
def test_random_bytes_give_only_audio_errors(data, suffix):
    fd, name = tempfile.mkstemp(suffix=suffix)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", AudioWarning)
            try:
                wave = load_audio(name)
            except WordspotError as exc:
                assert isinstance(exc, AudioError) and name in str(exc)
                return
        assert wave.dtype == np.float32 and np.all(np.abs(wave) <= 1.0)
    finally:
        os.unlink(name)


def _wav_header():
    import io

    buf = io.BytesIO()
    soundfile.write(buf, np.zeros(2000, dtype=np.int16), 8000, format="WAV", subtype="PCM_16")
    return buf.getvalue()[:44]
