"""Clock-enable patterns, the enabled schedule, pin polarity on the wire, reset fill and timing parameters
(no simulator)."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from scipy import stats

from vkit.check.settle import ControlSettle, settled_facts
from vkit.core.errors import ConfigError
from vkit.run.config import config_from_dict, expand_matrix
from vkit.video.capture import RunFacts
from vkit.video.enables import EnablePattern
from vkit.video.timing import VideoTiming, preset, schedule, tiny
from vkit.video.words import idle_levels, input_levels, leading_edges, samples_between, video_data_words, video_input_facts

SAMPLE = Path(__file__).resolve().parents[1] / "sample_rtl"


def _frames(n: int, h: int, w: int) -> np.ndarray:
    return np.random.default_rng(3).integers(0, 256, size=(n, h, w), dtype=np.uint8)


def test_every_nth_clock_takes_one_sample_per_n_clocks() -> None:
    t = tiny(32, 24)
    plain = schedule(t, 2)
    held = schedule(t, 2, enable=EnablePattern(every=2))
    assert held.n_clocks == 2 * plain.n_clocks
    assert held.enabled.sum() == plain.n_clocks
    on = held.enabled
    assert not on[0::2].any() and on[1::2].all()  # one enable in two clocks, the sample taken on the second
    # every raster sample (blanking included) keeps its levels until its enable
    for name in ("hsync", "vsync", "de", "valid"):
        np.testing.assert_array_equal(getattr(held, name)[on], getattr(plain, name))
        np.testing.assert_array_equal(getattr(held, name)[0::2], getattr(held, name)[1::2])
    assert (held.x[~on] == -1).all() and np.array_equal(held.x[on], plain.x)


def test_data_words_are_held_until_the_enable() -> None:
    t = tiny(32, 24)
    frames = _frames(1, 24, 32)
    plain = schedule(t, 1)
    held = schedule(t, 1, enable=EnablePattern(duty=0.4, max_gap=5, seed=7))
    words = video_data_words(held, frames, "gray8", seed=2)
    ref = video_data_words(plain, frames, "gray8", seed=2)
    np.testing.assert_array_equal(words[held.enabled][plain.x >= 0], ref[plain.x >= 0])
    nxt = np.flatnonzero(held.enabled)
    for clock in np.flatnonzero(~held.enabled)[:200]:
        owner = nxt[np.searchsorted(nxt, clock)]
        assert words[clock] == words[owner]


def test_random_enable_matches_the_truncated_geometric_gap() -> None:
    # Reference: scipy.stats.geom (failures before the first success are geom - 1), capped at max_gap.
    duty, max_gap = 0.3, 4
    gaps = EnablePattern(duty=duty, max_gap=max_gap, seed=11).gaps(200_000)
    assert gaps.max() == max_gap and gaps.min() == 0
    k = np.arange(max_gap)
    expected = float((k * stats.geom.pmf(k + 1, duty)).sum() + max_gap * stats.geom.sf(max_gap, duty))
    assert abs(gaps.mean() - expected) < 0.02
    assert np.array_equal(gaps, EnablePattern(duty=duty, max_gap=max_gap, seed=11).gaps(200_000))  # seeded


def test_enable_file_is_repeated(tmp_path: Path) -> None:
    f = tmp_path / "bridge.txt"
    f.write_text("0 1 1 0\n0 1\n")  # 6 clocks, enabled on clocks 1, 2 and 5
    gaps = EnablePattern(file=str(f)).gaps(7)
    assert gaps.tolist() == [1, 0, 2, 1, 0, 2, 1]
    clocks = np.cumsum(gaps + 1) - 1
    assert clocks.tolist() == [1, 2, 5, 7, 8, 11, 13]


@pytest.mark.parametrize("bad, words", [
    ({"every": 0}, "every = 0 is out of range"),
    ({"duty": 0.0}, "duty = 0.0 is not above 0"),
    ({"every": 2, "duty": 0.5}, "every and duty given"),
    ({"dutty": 0.5}, "did you mean 'duty'?"),
])
def test_bad_enable_patterns_are_one_line(bad: dict, words: str) -> None:
    with pytest.raises(ConfigError) as err:
        EnablePattern.from_dict(bad)
    assert words in str(err.value) and "\n" not in str(err.value)


def test_latency_in_samples_counts_enabled_clocks() -> None:
    enable = np.array([0, 1, 0, 1, 0, 1, 0, 1], bool)
    assert samples_between(enable, 1, 7) == 3
    assert samples_between(enable, 1, 10) == 4 + 2  # past the schedule the enable stays on
    assert samples_between(None, 3, 10) == 7


def test_pin_polarity_is_separate_from_the_timing() -> None:
    # VESA DMT 640x480 @ 60 Hz has negative syncs (from memory); an active-high pin still pulses high.
    vga = preset("vga640x480p60")
    sched = schedule(vga, 1)
    assert not vga.hsync_active_high and not vga.vsync_active_high
    high = {"in_hsync": True, "in_vsync": True, "in_de": True, "in_valid": True, "in_enable": True}
    low = {**high, "in_hsync": False, "in_vsync": False, "in_de": False}
    pins_high, pins_low = input_levels(sched, high), input_levels(sched, low)
    pulse = ~sched.hsync  # the wire is low during a negative pulse
    np.testing.assert_array_equal(pins_high["in_hsync"], pulse)
    np.testing.assert_array_equal(pins_low["in_hsync"], ~pulse)
    np.testing.assert_array_equal(pins_low["in_de"], ~sched.de)
    # VESA DMT: hsync 96 clocks per 800-clock line (from memory)
    assert leading_edges(pins_high["in_hsync"], True).size == 525
    assert int(pins_high["in_hsync"][:800].sum()) == 96
    assert idle_levels(low) == {"in_hsync": True, "in_vsync": True, "in_de": True, "in_valid": False,
                                "in_enable": True}


def _facts(vs: list[int], hs: list[int], first_out: int, timing: VideoTiming) -> RunFacts:
    facts = RunFacts(first_output_clock=first_out, output_vsync_clocks=vs, output_hsync_clocks=hs)
    facts.update({k: v for k, v in video_input_facts(schedule(timing, 2)).items() if k != "first_input_clock"})
    facts.output_vsync_count = len(vs)
    return facts


def test_reset_fill_is_left_out_with_a_warning_and_strict_counts_it() -> None:
    t = tiny(32, 24)
    sched = schedule(t, 2)
    real_hs = (leading_edges(sched.hsync, True) + t.h_total + 3).tolist()
    real_vs = (leading_edges(sched.vsync, True) + t.h_total + 3).tolist()
    facts = _facts([0, *real_vs], [0, *real_hs], t.h_total + 3, t)
    judged, warning = settled_facts(facts, None)
    assert judged.output_vsync_count == len(real_vs) == facts.input_vsync_count
    assert judged.output_hsync_per_frame == facts.input_hsync_per_frame
    assert "clocks 0..0" in warning and "strict_controls" in warning
    strict, none = settled_facts(facts, ControlSettle(strict=True))
    assert strict.output_vsync_count == len(real_vs) + 1 and none is None
    # a pulse inside the run (after the input's first vsync) is never left out: an extra pulse still fails
    extra = _facts([*real_vs[:1], real_vs[0] + 5 * t.h_total, *real_vs[1:]], real_hs, t.h_total + 3, t)
    assert settled_facts(extra, None)[0].output_vsync_count == len(real_vs) + 1
    declared, _ = settled_facts(facts, ControlSettle(clocks=10))
    assert declared.output_vsync_count == len(real_vs)


def _config(tmp_path: Path, **design: object) -> dict:
    return {
        "run": {"simulators": ["icarus"]},
        "designs": {"rowmax": {"top": "rowmax_htotal", "sources": [str(SAMPLE / "foreign" / "rowmax_htotal.v")],
                               "spec": "dilate", "ports": {
                                   "clock": "clk", "reset": "rst_n", "in_vsync": "vs_in", "in_hsync": "hs_in",
                                   "in_de": "de_in", "in_data": "px_in", "out_vsync": "vs_out",
                                   "out_hsync": "hs_out", "out_de": "de_out", "out_data": "px_out"}, **design}},
        "stimulus": {"patterns": ["box"], "timings": ["tiny32x24", "tiny64x48", "vga640x480p60"],
                     "stalls": [0, 0.1]},
    }


def test_timing_parameters_follow_each_timing_and_key_the_build(tmp_path: Path) -> None:
    from vkit.run.builds import build_request
    from vkit.sim.buildcache import build_key

    cfg = config_from_dict(_config(tmp_path, timing_parameters={"H_TOTAL": "h_total", "VB": "v_blank",
                                                                "BITS": "pixel_bits"}), tmp_path / "v.toml")
    cases = expand_matrix(cfg)
    # VESA DMT 640x480: 800 clocks per line, 45 blanking lines (from memory); tiny: 32 + 8 and 64 + 8
    got = {c.timing_label: c.build_parameters() for c in cases}
    assert got["vga640x480p60"] == {"H_TOTAL": 800, "VB": 45, "BITS": 8}
    assert got["tiny32x24"]["H_TOTAL"] == 40 and got["tiny64x48"]["H_TOTAL"] == 72
    assert len({build_key(build_request(c, "v1")) for c in cases}) == 3
    # no in_valid port: no stall cases for this design
    assert {c.stalls.active for c in cases} == {False}


@pytest.mark.parametrize("design, words", [
    ({"timing_parameters": {"H_TOTAL": "h_totl"}}, "timing_parameters.H_TOTAL = 'h_totl' is not known; did you mean 'h_total'?"),
    ({"port_polarity": {"sincs": "low"}}, "port_polarity = 'sincs' is not a control role or group; did you mean 'syncs'?"),
    ({"port_polarity": {"syncs": "negative"}}, "port_polarity.syncs = 'negative' is not known"),
    ({"enables": [{"every": 2}]}, "enables = [{'every': 2}] is given but the design maps no in_enable port"),
    ({"settle_clocks": -1}, "settle_clocks = -1 is out of range"),
])
def test_foreign_keys_are_checked_in_the_one_message_shape(tmp_path: Path, design: dict, words: str) -> None:
    with pytest.raises(ConfigError) as err:
        config_from_dict(_config(tmp_path, **design), tmp_path / "v.toml")
    assert words in str(err.value) and str(err.value).startswith("v.toml [designs.rowmax]: ")


def test_bundled_bug_regression_holds_every_foreign_bug_where_it_shows() -> None:
    from vkit.run.config import load_config

    cases = expand_matrix(load_config(SAMPLE.parent / "sim" / "bugs.toml"))
    ids = [c.id for c in cases]
    for bug in ("smooth_ce@enable_ignored_in_blanking", "smooth_ce@latency_in_clocks",
                "nsync_sharpen@den_polarity_slip", "rowmax_htotal@fixed_second_line"):
        assert any(i.startswith(bug + "/") for i in ids), bug
    # the latency bug shows only under an uneven enable; the line-length bug only off tiny32x24
    assert any(i.startswith("smooth_ce@latency_in_clocks/ghdl/") and i.endswith("-en0.5g3") for i in ids)
    assert any(i.startswith("rowmax_htotal@fixed_second_line/") and "/tiny64x48/" in i for i in ids)
