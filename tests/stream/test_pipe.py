"""The stream reader against a reference library: WAV files written and read by soundfile."""

from __future__ import annotations

import io

import numpy as np
import pytest
import soundfile as sf

from wordspot.stream.pipe import PcmReader, read_wav_header


@pytest.mark.parametrize("subtype, encoding, tol", [
    ("PCM_U8", "u8", 0.0), ("PCM_16", "s16", 0.0), ("PCM_24", "s24", 0.0), ("PCM_32", "s32", 1e-7),
    ("FLOAT", "f32", 0.0)])
@pytest.mark.parametrize("channels", [1, 2])
def test_wav_written_by_soundfile_reads_as_soundfile_reads_it(subtype, encoding, tol, channels):
    # Reference: soundfile (libsndfile) writes the WAV file and reads it back as float;
    # our reader, fed the same bytes as a stream in small pieces, must give the same
    # samples (channels averaged, as wordspot's file reader does) and format.
    rng = np.random.default_rng(7)
    x = (0.5 * rng.uniform(-1, 1, size=(3001, channels))).astype(np.float32)
    buf = io.BytesIO()
    sf.write(buf, x, 22050, subtype=subtype, format="WAV")
    data = buf.getvalue()
    expected, rate = sf.read(io.BytesIO(data), dtype="float32", always_2d=True)
    assert rate == 22050

    stream = io.BytesIO(data)
    fmt, limit = read_wav_header(stream.read)
    assert (fmt.rate, fmt.channels, fmt.encoding) == (22050, channels, encoding)
    got = np.concatenate(list(PcmReader(lambda n: stream.read(min(n, 999)), fmt, limit=limit,
                                        block_seconds=0.01)))
    np.testing.assert_allclose(got, expected.mean(axis=1), rtol=0, atol=tol + 1e-7)
