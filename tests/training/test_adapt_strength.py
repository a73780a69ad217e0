"""The adaptation strength: passes in which the recordings take over, chosen on held-out ones."""

import numpy as np
import pytest

import tone_corpus
from tone_corpus import make_corpus
from wordspot.corpus import read_manifest, split_by_recording
from wordspot.errors import TrainingError
from wordspot.language.lexicon import read_lexicon
from wordspot.training.adapt import (AdaptationConfig, adapt, adapting, held_out_fit, split_by_speaker,
                                    strength_note)
from wordspot.training.data import prepare_items
from wordspot.training.trainer import TrainingConfig, train

SMALL = TrainingConfig(mixtures=(1, 2), first_passes=3, passes_per_split=2, speed_factors=(1.0,), noise_copies=0)
# the tone corpora have three speakers; most tests choose on held-out takes of the same ones;
# no speed or noisy copies, as in the from-scratch model they are compared with
QUICK = dict(scorer=None, background_share=0.0, mean_transform=False, min_held_out_frames=200,
             speakers_to_hold_out=100, follow_speeds=(), follow_noise_copies=0)


@pytest.fixture(scope="module")
def shifted(tmp_path_factory):
    """A model of one tone corpus; many and few recordings of tones 12% higher; held-out ones."""
    rng = np.random.default_rng(20261203)
    folder = tmp_path_factory.mktemp("strength")
    manifest, lex_path = make_corpus(folder / "a", rng, n_utterances=30)
    lex = read_lexicon(lex_path)
    model, _ = train(read_manifest(manifest), lex, config=SMALL)
    with tone_corpus.tones_scaled(1.12):
        many, _ = make_corpus(folder / "b", rng, n_utterances=60)
        held, _ = make_corpus(folder / "c", rng, n_utterances=16)
    return model, lex, read_manifest(many), read_manifest(held)


def _fit(model, lex, utts):
    items, _ = prepare_items(utts, lex, model.units, model.features)
    return held_out_fit(items, model.units, model.mixtures)


def test_much_data_approaches_the_from_scratch_fit(shifted):
    start, lex, many, held = shifted
    scratch, _ = train(many, lex, config=SMALL)
    fixed, _ = adapt(many, lex, start, config=AdaptationConfig(strength=0, **QUICK))
    chosen, summary = adapt(many, lex, start, config=AdaptationConfig(**QUICK), held_out=held)
    f_scratch, f_fixed, f_chosen = (_fit(m, lex, held) for m in (scratch, fixed, chosen))
    assert summary.adaptation["chosen_on"] == "held-out" and summary.adaptation["strength"] > 0
    # Held-out log-likelihood a frame: the data taking over brings the adapted model closer to
    # the model trained on the data alone than the fixed-strength MAP (EM on the same data,
    # from memory); the margin, 1 per frame, is a tenth of the fixed MAP's gap here.
    assert f_chosen > f_fixed
    assert abs(f_scratch - f_chosen) < abs(f_scratch - f_fixed)
    assert f_chosen > f_scratch - 1.0
    # the held-out fit rose with every pass kept
    fits = summary.adaptation["held_out_fit"]
    k = summary.adaptation["strength"]
    assert all(a < b for a, b in zip(fits[:k], fits[1:k + 1]))


def test_the_strength_grows_with_the_data(shifted):
    start, lex, many, held = shifted
    strengths = []
    for n in (2, 60):
        model, _ = adapt(many[:n], lex, start, config=AdaptationConfig(**QUICK), held_out=held)
        strengths.append(model.info["strength"]["follow_passes"])
    assert strengths[0] < strengths[1]


def test_without_held_out_recordings_a_share_is_split_off_and_the_choice_is_seeded(shifted):
    start, lex, many, _ = shifted
    cfg = AdaptationConfig(**QUICK, seed=4)
    a, sa = adapt(many, lex, start, config=cfg)
    b, sb = adapt(many, lex, start, config=cfg)
    assert a.info["strength"]["chosen_on"] == "held-out"
    _, held = split_by_recording(many, cfg.held_out_share, cfg.seed)
    assert a.info["strength"]["held_out_recordings"] == len(held) > 0
    np.testing.assert_array_equal(a.mixtures.means, b.mixtures.means)  # deterministic for a seed
    np.testing.assert_array_equal(a.mixtures.variances, b.mixtures.variances)
    assert a.info["strength"] == b.info["strength"]
    assert "passes in which your recordings take over" in sa.adapt_note and "held-out" in sa.adapt_note


def test_with_several_speakers_whole_speakers_are_held_out(shifted):
    start, lex, many, held = shifted
    cfg = AdaptationConfig(**{**QUICK, "speakers_to_hold_out": 3})
    model, summary = adapt(many, lex, start, config=cfg, held_out=held)  # the handed takes are not used
    voices = split_by_speaker(many, cfg.held_out_speaker_share, cfg.seed)
    assert len({u.speaker for u in voices}) == 1 and model.info["strength"]["held_out_speakers"] == 1
    assert model.info["strength"]["held_out_recordings"] == len(voices)
    assert "speaker held out, as voices it has not heard" in summary.adapt_note


def test_few_held_out_frames_leave_the_strength_at_zero(shifted):
    start, lex, many, held = shifted
    model, summary = adapt(many, lex, start, config=AdaptationConfig(**{**QUICK, "min_held_out_frames": 10 ** 6}),
                           held_out=held)
    assert model.info["strength"]["follow_passes"] == 0
    assert summary.adapt_note.startswith("adapted the starting model lightly")
    fixed, _ = adapt(many, lex, start, config=AdaptationConfig(**QUICK, strength=0))
    np.testing.assert_array_equal(model.mixtures.means, fixed.mixtures.means)


def test_the_training_function_reuses_the_strength_chosen_on_held_out_recordings(shifted):
    start, lex, many, held = shifted
    fit = adapting(start, lex, config=AdaptationConfig(**QUICK))
    first, _ = fit(many, held_out=held)
    again, summary = fit(many + held)
    k = first.info["strength"]["follow_passes"]
    assert again.info["strength"]["follow_passes"] == k
    assert again.info["strength"]["chosen_on"] == "held-out" and f"{k} further pass" in summary.adapt_note


def test_the_training_function_prepares_each_recording_once(shifted, monkeypatch):
    from wordspot.training import adapt as adapt_module

    start, lex, many, _ = shifted
    sizes = []
    real = adapt_module.prepare_items

    def counting(utterances, *args, **kwargs):
        sizes.append(len(utterances))
        return real(utterances, *args, **kwargs)

    monkeypatch.setattr(adapt_module, "prepare_items", counting)
    fit = adapting(start, lex, config=AdaptationConfig(**{**QUICK, "follow_speeds": (0.9, 1.1)}))
    fit(many[:40], held_out=many[40:50])
    fit(many[:50])
    # features and speed copies of each of the 50 recordings once, over both trainings
    assert sum(sizes) == 50 + 50


def test_the_training_function_makes_each_recordings_noisy_copies_once(shifted, monkeypatch):
    from wordspot.training import adapt as adapt_module

    start, lex, many, _ = shifted
    made = []
    real = adapt_module.noisy_items

    def counting(items, *args, **kwargs):
        made.extend(it.path for it in items)
        return real(items, *args, **kwargs)

    monkeypatch.setattr(adapt_module, "noisy_items", counting)
    cfg = AdaptationConfig(**{**QUICK, "follow_noise_copies": 2}, strength=1)
    fit = adapting(start, lex, config=cfg)
    fit(many[:40], held_out=many[40:50])
    cached, _ = fit(many[:50])
    # every one of the 50 recordings is noised once over both trainings (the held-out ten
    # with the first), and the second training equals one that makes its copies afresh
    assert sorted(made) == sorted(u.path for u in many[:50])
    fresh, _ = adapt(many[:50], lex, start, config=cfg)
    np.testing.assert_array_equal(cached.mixtures.means, fresh.mixtures.means)
    np.testing.assert_array_equal(cached.mixtures.variances, fresh.mixtures.variances)


def test_whole_speakers_handed_in_as_held_out_choose_the_strength(shifted):
    start, lex, many, _ = shifted
    cfg = AdaptationConfig(**{**QUICK, "speakers_to_hold_out": 2})
    speakers = sorted({u.speaker for u in many})
    rest = [u for u in many if u.speaker != speakers[0]]
    held = [u for u in many if u.speaker == speakers[0]]
    model, summary = adapt(rest, lex, start, config=cfg, held_out=held)
    st = model.info["strength"]
    assert st["chosen_on"] == "held-out" and st["held_out_recordings"] == len(held)
    assert st["held_out_speakers"] == 1 and "1 speaker held out" in summary.adapt_note
    # the same as choosing on them by hand: adapt_items with those held-out items
    fits = st["held_out_fit"]
    assert len(fits) >= 2 and (st["follow_passes"] == len(fits) - 1 or fits[st["follow_passes"] + 1]
                               <= max(fits[:st["follow_passes"] + 1]))


def test_the_training_function_names_whole_speakers_for_the_calibration(shifted):
    start, lex, many, _ = shifted
    fit = adapting(start, lex, config=AdaptationConfig(**{**QUICK, "speakers_to_hold_out": 3,
                                                          "unheard_calibration": True}))
    rest, held = fit.speakers_apart(many)
    assert {u.speaker for u in rest} & {u.speaker for u in held} == set()
    assert len(rest) + len(held) == len(many) and len({u.speaker for u in held}) == 1
    assert held == split_by_speaker(many, 0.25, 0)  # the speakers the strength is chosen on without it
    off = adapting(start, lex, config=AdaptationConfig(**{**QUICK, "speakers_to_hold_out": 3}))
    assert off.speakers_apart(many) is None  # off by default
    assert fit.speakers_apart(many[:1]) is None  # one speaker: takes of the same voice


def test_strength_note_in_plain_words():
    info = {"follow_passes": 6, "speech_minutes": 17.0, "chosen_on": "held-out", "held_out_recordings": 40,
            "most_passes": 6}
    assert strength_note(info) == ("adapted the starting model strongly: 17.0 minutes of your recordings, 6 further "
                                   "passes in which your recordings take over (chosen on 40 held-out recordings)")


def test_speed_copies_take_part_in_the_following_passes_only(shifted):
    start, lex, many, held = shifted
    cfg = AdaptationConfig(**{**QUICK, "follow_speeds": (0.9, 1.1)}, strength=2)
    model, summary = adapt(many[:10], lex, start, config=cfg)
    plain, plain_summary = adapt(many[:10], lex, start, config=AdaptationConfig(**QUICK, strength=2))
    assert model.info["follow_copies"]["speeds"] == [0.9, 1.1]
    # the MAP pass sees the recordings alone, the following ones also their copies: their
    # statistics differ only from the first following pass on
    assert summary.passes[0] == plain_summary.passes[0]
    assert summary.passes[1] != plain_summary.passes[1]


def test_noisy_copies_take_part_in_the_following_passes_only(shifted):
    start, lex, many, _ = shifted
    noisy, summary = adapt(many[:10], lex, start, config=AdaptationConfig(**{**QUICK, "follow_noise_copies": 1},
                                                                         strength=2))
    plain, plain_summary = adapt(many[:10], lex, start, config=AdaptationConfig(**QUICK, strength=2))
    assert noisy.info["follow_copies"]["noise_copies"] == 1
    assert noisy.info["follow_copies"]["noise_snr_db"] == [10.0, 25.0]  # the default range
    assert summary.passes[0] == plain_summary.passes[0]
    assert summary.passes[1] != plain_summary.passes[1]


def test_the_noisy_copies_make_noisy_recordings_fit_better(shifted):
    from wordspot.audio.augment import NoiseSettings
    from wordspot.training.noise import noisy_items

    start, lex, many, held = shifted
    # the same held-out recordings with babble or steady noise at 15 dB, made with another seed
    clean, _ = prepare_items(held, lex, start.units, start.features)
    noisy_held = noisy_items(clean, [u.speaker for u in held], NoiseSettings(copies=1, snr_db=(15.0, 15.0)),
                             start.features, seed=99)
    fits = {}
    for copies in (0, 1):
        model, _ = adapt(many, lex, start, config=AdaptationConfig(**{**QUICK, "follow_noise_copies": copies},
                                                                   strength=3))
        fits[copies] = held_out_fit(noisy_held, start.units, model.mixtures)
    # Passes that learn from clean recordings alone fit noisy speech worse than passes that
    # also hear a noisy copy of each (multi-condition training, common practice, no source)
    assert fits[1] > fits[0]


def test_strength_zero_makes_no_copies_and_is_the_map_of_before(shifted, monkeypatch):
    from wordspot.training import adapt as adapt_module

    start, lex, many, _ = shifted
    calls = []
    real = adapt_module.noisy_items
    monkeypatch.setattr(adapt_module, "noisy_items", lambda *a, **k: calls.append(1) or real(*a, **k))
    cfg = {**QUICK, "follow_speeds": (0.9, 1.1)}
    a, _ = adapt(many[:20], lex, start, config=AdaptationConfig(**{**cfg, "follow_noise_copies": 1}, strength=0))
    b, _ = adapt(many[:20], lex, start, config=AdaptationConfig(**{**cfg, "follow_noise_copies": 0}, strength=0))
    assert calls == []
    for x, y in ((a.mixtures.means, b.mixtures.means), (a.mixtures.variances, b.mixtures.variances),
                 (a.mixtures.weights, b.mixtures.weights)):
        np.testing.assert_array_equal(x, y)


@pytest.mark.parametrize("field,value", [("follow_speeds", (1.0,)), ("follow_noise_copies", -1),
                                         ("follow_noise_snr", (25.0, 10.0)), ("follow_noise_snr", (5.0,)), ("follow_passes", -1), ("follow_weight", 0.0), ("strength", -2),
                                         ("held_out_share", 1.0)])
def test_strength_settings_are_checked(field, value):
    with pytest.raises(TrainingError, match=field):
        AdaptationConfig(**{field: value})


def test_the_choosing_model_can_be_the_calibrations(shifted, monkeypatch):
    # With calibrate_choosing_model the calibration's first training returns the model the
    # strength was chosen with (adapted on the speakers not held out) instead of adapting
    # all its recordings again: two adaptations there instead of one, the strength the same.
    from wordspot.training import adapt as adapt_module

    start, lex, many, held = shifted
    runs = []
    real = adapt_module.adapt_items

    def counting(items, *args, **kwargs):
        runs.append(len([it for it in items if not it.background]))
        return real(items, *args, **kwargs)

    monkeypatch.setattr(adapt_module, "adapt_items", counting)
    base = {**QUICK, "speakers_to_hold_out": 3}
    plain, _ = adapt(many, lex, start, config=AdaptationConfig(**base), held_out=held)
    assert runs == [len(many) - len(split_by_speaker(many, 0.25, 0)), len(many)]
    runs.clear()
    kept, summary = adapt(many, lex, start, config=AdaptationConfig(**base, calibrate_choosing_model=True),
                          held_out=held)
    voices = split_by_speaker(many, 0.25, 0)
    assert runs == [len(many) - len(voices)]  # the choosing adaptation only
    assert kept.info["utterances"] == len(many) - len(voices)
    assert kept.info["strength"]["follow_passes"] == plain.info["strength"]["follow_passes"]
    assert kept.info["strength"]["held_out_speakers"] == 1 and "held out" in summary.adapt_note
    assert not np.array_equal(kept.mixtures.means, plain.mixtures.means)
    runs.clear()
    again, _ = adapt(many, lex, start, config=AdaptationConfig(**base, calibrate_choosing_model=True))
    assert runs == [len(many) - len(voices), len(many)]  # no calibration: the model on everything as before
    np.testing.assert_array_equal(again.mixtures.means, plain.mixtures.means)


def test_with_no_training_again_the_held_out_copies_are_not_made_and_the_rest_are_the_same(shifted, monkeypatch):
    from wordspot.training import adapt as adapt_module

    start, lex, many, _ = shifted
    made, copies_seen = [], []
    real_noisy, real_items = adapt_module.noisy_items, adapt_module.adapt_items

    def counting(items, *args, only=None, **kwargs):
        got = real_noisy(items, *args, only=only, **kwargs)
        made.extend(it.path for it in got)
        return got

    def seeing(items, *args, copies=None, **kwargs):
        copies_seen.append([(it.path, it.frames.copy()) for it in copies or []])
        return real_items(items, *args, copies=copies, **kwargs)

    monkeypatch.setattr(adapt_module, "noisy_items", counting)
    monkeypatch.setattr(adapt_module, "adapt_items", seeing)
    cfg = AdaptationConfig(**{**QUICK, "follow_noise_copies": 2, "follow_speeds": (0.9,)}, strength=1)
    both, _ = adapting(start, lex, config=cfg)(many[:40], held_out=many[40:50])
    assert sorted(set(made)) == sorted(u.path for u in many[:50])  # the held-out ten's too, for the next training
    with_held = copies_seen.pop()
    made.clear()
    alone, _ = adapting(start, lex, config=cfg)(many[:40], held_out=many[40:50], again=False)
    assert sorted(set(made)) == sorted(u.path for u in many[:40]) and len(made) == 80  # two copies each, no more
    without = copies_seen.pop()
    # the copies of the forty are those made together with the held-out ten (same babble pool, same recipes)
    assert [p for p, _ in without] == [p for p, _ in with_held] and len(without) == 40 * 3
    for (_, a), (_, b) in zip(without, with_held):
        np.testing.assert_array_equal(a, b)
    np.testing.assert_array_equal(alone.mixtures.means, both.mixtures.means)
