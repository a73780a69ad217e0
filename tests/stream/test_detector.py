"""The speech detector: stretches of a worked example, block/whole equality, bounds."""

import numpy as np
import pytest

from wordspot.errors import AudioError
from wordspot.stream.detector import DetectorSettings, SpeechDetector, find_stretches, frame_energies

RATE = 16000


def _noise(rng, seconds, dbfs):
    return 10 ** (dbfs / 20) * rng.normal(size=int(seconds * RATE))


def _with_bursts(rng, seconds, bursts, bed=-60.0, level=-20.0):
    """Noise bed with tone bursts (start, end in seconds) at ``level`` dBFS RMS."""
    x = _noise(rng, seconds, bed)
    t = np.arange(x.size) / RATE
    for a, b in bursts:
        on = (t >= a) & (t < b)
        x[on] += 10 ** (level / 20) * np.sqrt(2) * np.sin(2 * np.pi * 440 * t[on])
    return x.astype(np.float32)


def _in_blocks(x, sizes, settings=None):
    d = SpeechDetector(RATE, settings)
    out, i, k = [], 0, 0
    while i < x.size:
        n = sizes[k % len(sizes)]
        out += d.push(x[i : i + n])
        i, k = i + n, k + 1
    return out + d.finish()


def test_frame_energies_match_librosa_rms(rng):
    # librosa.feature.rms (center=False) is the root mean square of the same frames.
    import librosa

    x = rng.normal(size=8000).astype(np.float32) * 0.1
    rms = librosa.feature.rms(y=x, frame_length=400, hop_length=160, center=False)[0]
    np.testing.assert_allclose(frame_energies(x, 400, 160), 20 * np.log10(rms), atol=1e-4)


def test_one_burst_gives_one_padded_stretch(rng):
    # Worked by hand: a 1 s tone 40 dB above the bed from 2.0 s to 3.0 s; speech is every
    # frame touching the tone (frames of 25 ms every 10 ms), padded by 0.25 s each side.
    x = _with_bursts(rng, 6.0, [(2.0, 3.0)])
    (s,) = find_stretches(x, RATE)
    assert s.speech_start / RATE == pytest.approx(2.0, abs=0.03)
    assert s.speech_end / RATE == pytest.approx(3.0, abs=0.03)
    assert (s.speech_start - s.start) / RATE == pytest.approx(0.25, abs=1e-9)
    assert (s.end - s.speech_end) / RATE == pytest.approx(0.25, abs=1e-9)


def test_hangover_joins_short_gaps_and_min_speech_drops_clicks(rng):
    # gap 0.2 s < hangover 0.4 s: one stretch; gap 1.5 s: two; a 40 ms click < 0.1 s: none
    x = _with_bursts(rng, 10.0, [(1.0, 1.5), (1.7, 2.2), (3.7, 4.2), (7.0, 7.04)])
    spans = [(s.speech_start / RATE, s.speech_end / RATE) for s in find_stretches(x, RATE)]
    assert len(spans) == 2
    assert spans[0] == pytest.approx((1.0, 2.2), abs=0.03)
    assert spans[1] == pytest.approx((3.7, 4.2), abs=0.03)


def test_stationary_noise_gives_no_stretch(rng):
    # (common practice) a steady background is the floor itself, never speech
    assert find_stretches(_noise(rng, 20.0, -40.0).astype(np.float32), RATE) == []


def test_floor_follows_a_louder_background(rng):
    # The background steps up 20 dB at 10 s (a mixer starts) and stays: after the floor
    # window has passed, no stretch is found in it although it is loud.
    x = np.concatenate([_noise(rng, 10.0, -60.0), _noise(rng, 20.0, -40.0)]).astype(np.float32)
    stretches = find_stretches(x, RATE)
    assert all(s.speech_start / RATE < 10.0 + DetectorSettings().floor_back for s in stretches)


def test_long_speech_is_cut_at_its_quietest_frame(rng):
    # 30 s of talk: 0.6 s bursts with 0.25 s gaps (shorter than the hangover, so one run)
    # and one quieter 0.05 s dip inside every burst. The run is cut into pieces of at most
    # max_stretch that meet without a gap, each cut in a gap between bursts (the bed is
    # quieter than the dips).
    bursts = [(a, a + 0.6) for a in np.arange(1.0, 31.0, 0.85)]
    x = _with_bursts(rng, 32.0, bursts, level=-20.0)
    settings = DetectorSettings(max_stretch=8.0)
    stretches = find_stretches(x, RATE, settings)
    assert len(stretches) >= 4
    for a, b in zip(stretches[:-1], stretches[1:]):
        assert a.end == b.start
        cut = a.end / RATE
        assert any(end <= cut <= start for (_, end), (start, _) in zip(bursts[:-1], bursts[1:]))
    assert max(s.end - s.start for s in stretches) / RATE <= 8.0 + 2 * settings.padding


def test_stretches_never_overlap(rng):
    # bursts 0.5 s apart (more than the hangover, less than two paddings)
    x = _with_bursts(rng, 8.0, [(1.0, 1.5), (2.0, 2.5), (3.0, 3.5)])
    stretches = find_stretches(x, RATE, DetectorSettings(hangover=0.2, padding=0.4))
    assert len(stretches) == 3
    assert all(a.end <= b.start for a, b in zip(stretches[:-1], stretches[1:]))


@pytest.mark.parametrize("settings", [DetectorSettings(), DetectorSettings(max_stretch=1.0),
                                      DetectorSettings(hangover=0.1, padding=0.5, lookback=0.0),
                                      DetectorSettings(floor_ahead=0.0, hangover=0.3)])
def test_blocks_give_the_same_stretches_as_the_whole(rng, settings):
    # Streaming-exact by construction (state carried across blocks); checked against one
    # push of everything, for block sizes from one sample up, on bursts of varied length.
    starts = np.cumsum(rng.uniform(0.5, 4.0, size=25))
    x = _with_bursts(rng, float(starts[-1] + 3), [(a, a + rng.uniform(0.05, 2.5)) for a in starts], bed=-50.0,
                     level=-30.0)
    whole = find_stretches(x, RATE, settings)
    assert len(whole) >= 8
    for sizes in ([1, 7, 160, 401], [16000], list(rng.integers(1, 40000, size=20))):
        assert _in_blocks(x, [int(n) for n in sizes], settings) == whole


def test_short_recordings_and_empty_blocks(rng):
    x = _with_bursts(rng, 0.5, [(0.1, 0.4)])
    assert _in_blocks(x, [0, 100, 0]) == find_stretches(x, RATE)
    assert find_stretches(np.zeros(10, np.float32), RATE) == []


def test_keep_from_never_passes_a_later_stretch(rng):
    x = _with_bursts(rng, 20.0, [(2.0, 3.0), (9.0, 9.5), (15.0, 16.2)])
    d = SpeechDetector(RATE)
    kept, out = [], []
    for i in range(0, x.size, 1000):
        out += d.push(x[i : i + 1000])
        kept.append((len(out), d.keep_from))
    out += d.finish()
    for n_before, keep in kept:
        assert all(s.start >= keep for s in out[n_before:])


def test_bad_settings_and_use_after_finish():
    with pytest.raises(AudioError, match="onset_db"):
        DetectorSettings(onset_db=3.0, offset_db=5.0)
    with pytest.raises(AudioError, match="hangover"):
        DetectorSettings(hangover=-1.0)
    with pytest.raises(AudioError, match="floor_quantile"):
        DetectorSettings(floor_quantile=2.0)
    d = SpeechDetector(RATE)
    d.finish()
    with pytest.raises(AudioError, match="push after finish"):
        d.push(np.zeros(10))


CAUSAL = DetectorSettings(floor_ahead=0.0, hangover=0.3)


def _trace(x, settings, step=160):
    """Push ``x`` ``step`` samples at a time: (frames decided, in speech, stretches so far) after each push."""
    d = SpeechDetector(RATE, settings)
    out, trace = [], []
    for i in range(0, x.size, step):
        out = out + d.push(x[i : i + step])
        trace.append((d.decided, d.in_speech, tuple(out)))
    return trace


def test_causal_detector_decides_each_frame_as_it_arrives(rng):
    # floor_ahead 0: after any push, every frame whose samples are all in is decided
    # (the file detector waits floor_ahead, and floor_back + floor_ahead at the start).
    x = _with_bursts(rng, 6.0, [(0.5, 1.2), (3.0, 3.4)])
    d = SpeechDetector(RATE, CAUSAL)
    pushed = 0
    for n in [1, 399, 400, 1, 160, 2000, 7, 30000]:
        d.push(x[pushed : pushed + n])
        pushed += n
        assert d.decided == (0 if pushed < d.frame else 1 + (pushed - d.frame) // d.hop)
    slow = SpeechDetector(RATE, DetectorSettings())
    slow.push(x[:pushed])
    assert slow.decided < d.decided


def test_causal_decisions_do_not_change_with_the_audio_that_follows(rng):
    # Frame t is decided from samples up to t only: the decisions made while the first
    # 4 s arrive are the same whatever comes after them (silence, a loud burst, speech-like
    # bursts, digital silence), at every 10 ms step.
    head = _with_bursts(rng, 4.0, [(0.6, 1.0), (1.8, 2.6), (3.5, 4.0)])
    tails = [np.zeros(3 * RATE, np.float32), _with_bursts(rng, 3.0, [(0.0, 3.0)], level=-6.0),
             _with_bursts(rng, 3.0, [(0.2, 0.5), (1.0, 2.0)]), _noise(rng, 3.0, -60.0).astype(np.float32)]
    traces = [_trace(np.concatenate([head, tail]), CAUSAL)[: head.size // 160] for tail in tails]
    assert all(t == traces[0] for t in traces[1:])
    assert traces[0][-1][2]  # stretches were reported during the head
    assert any(in_speech for _, in_speech, _ in traces[0])


def test_causal_detector_reports_a_burst_within_hangover_and_padding(rng):
    # A 0.5 s burst ending at 2.0 s: the stretch is complete once the hangover (0.3 s) has
    # passed and the padding (0.25 s) has arrived, so at about 2.3 s, not after the file
    # detector's 1 s look-ahead.
    x = _with_bursts(rng, 5.0, [(1.5, 2.0)])
    d = SpeechDetector(RATE, CAUSAL)
    for i in range(0, x.size, 160):
        if d.push(x[i : i + 160]):
            break
    assert (i + 160) / RATE == pytest.approx(2.0 + 0.3 + 0.025, abs=0.03)
