"""Bounded memory on big frames: the capture kept on disk and read a frame at a time, the input facts of a
run worked out from one frame's schedule, coverage measured on a bounded part of a frame.

References: the same capture read whole into memory (vkit's in-memory reader, held equal to the text
reader in tests/test_capture_stream.py); the whole run's schedule for the facts; the video timings are the
VESA DMT 640x480@60 and CTA-861 720p60/1080p60 presets (values from memory, checked in tests/test_timing.py).
"""

from __future__ import annotations

import struct

import numpy as np
import pytest

from conftest import pack_capture
from vkit.check.scoreboard import score
from vkit.sim.fast import capture_file
from vkit.sim.fast.wire import CAPTURE_MAGIC, CAPTURE_VERSION
from vkit.video.capture import Capture, UNKNOWN
from vkit.video.stored import StoredCapture, open_capture
from vkit.video.timing import PRESETS, VideoTiming, schedule
from vkit.video.words import tiled_input_facts, video_input_facts

_FIELDS = ("values", "clock", "frame", "line", "column")


def _binary(frames: list[np.ndarray]) -> bytes:
    """A binary capture as the Verilog harness writes it: F on each vsync, P per pixel, L per line, E last."""
    head = struct.pack("<4I", CAPTURE_MAGIC, CAPTURE_VERSION, 0, 8)
    rec, clock = [], 3
    for img in frames:
        rec.append((clock, ord("F"), 0))
        for row in img:
            for v in row:
                clock += 1
                rec.append((clock, ord("P") | (1 << 8 if v == UNKNOWN else 0), 0 if v == UNKNOWN else int(v)))
            clock += 4
            rec.append((clock, ord("L"), 0))
        clock += 9
    rec.append((clock, ord("E"), 0))
    return head + b"".join(struct.pack("<3I", *r) for r in rec)


def _read_both(tmp_path, monkeypatch, frames: list[np.ndarray]) -> tuple[Capture, StoredCapture]:
    tmp_path.mkdir(parents=True, exist_ok=True)
    path = tmp_path / "capture.bin"
    path.write_bytes(_binary(frames))
    monkeypatch.setattr(capture_file, "_BLOCK_RECORDS", 7)  # block edges inside lines and frames
    whole = capture_file._parse_file(path, family="video", height=frames[0].shape[0])
    stored = capture_file._parse_file(path, family="video", height=frames[0].shape[0], spill=tmp_path / "spill")
    assert isinstance(stored, StoredCapture) and not isinstance(whole, StoredCapture)
    return whole, stored


def _frames(count: int, shape: tuple[int, int] = (6, 9), seed: int = 1) -> list[np.ndarray]:
    rng = np.random.default_rng(seed)
    return [rng.integers(0, 256, shape).astype(np.int64) for _ in range(count)]


def test_a_capture_kept_on_disk_reads_as_the_one_in_memory(tmp_path, monkeypatch):
    frames = _frames(3)
    frames[2][4, 5] = UNKNOWN
    whole, stored = _read_both(tmp_path, monkeypatch, frames)
    assert len(stored) == len(whole) == 3 * 6 * 9 and stored.frame_count == whole.frame_count == 3
    for name in _FIELDS:  # whole arrays, read back from disk
        assert np.array_equal(getattr(stored, name), getattr(whole, name)), name
    assert stored.facts.to_dict() == whole.facts.to_dict()
    for i in range(3):
        a, b = stored.frame_view(i, 6, 9), whole.frame_view(i, 6, 9)
        assert np.array_equal(a.pixels, b.pixels) and np.array_equal(a.clocks, b.clocks)
        assert a.line_lengths == b.line_lengths == [9] * 6
    assert stored.frame_view(2, 6, 9).pixels[4, 5] == UNKNOWN
    assert [stored.samples_from_frame(k) for k in range(5)] == [whole.samples_from_frame(k) for k in range(5)]


def test_saving_streams_into_an_npz_that_load_and_open_both_read(tmp_path, monkeypatch):
    whole, stored = _read_both(tmp_path, monkeypatch, _frames(2))
    stored.facts.notes.append("saved")
    saved = stored.save(tmp_path / "capture.npz")
    assert not (tmp_path / "spill").exists()  # the spill files went into the .npz
    loaded, opened = Capture.load(saved), open_capture(saved)
    assert isinstance(opened, StoredCapture)
    for cap in (loaded, opened, stored):  # the saved capture is read from the .npz from now on
        for name in _FIELDS:
            assert np.array_equal(getattr(cap, name), getattr(whole, name)), name
        assert cap.facts.notes[-1] == "saved"
    assert open_capture(whole.save(tmp_path / "zipped.npz", compress=True)) is None  # compressed: load it whole


def test_scoring_a_capture_on_disk_gives_the_same_verdict(tmp_path, monkeypatch):
    # the reference is scoring the same capture held in memory (every array kept)
    from vkit.model.pipeline import preset, run_model

    spec = preset("edge")
    rng = np.random.default_rng(7)
    results = [run_model(spec, rng.integers(0, 256, (6, 9, 3)).astype(np.uint8)) for _ in range(3)]
    outputs = [np.asarray(r.output, np.int64) for r in results]
    for bad in (False, True):
        if bad:
            outputs[1][2, 3] ^= 4
        whole, stored = _read_both(tmp_path / str(bad), monkeypatch, outputs)
        for cap in (whole, stored):
            cap.facts.first_input_clock = 0
        slim = score(results, stored, keep_passing=False)
        assert slim.to_dict() == score(results, whole).to_dict()
        assert slim.passed is not bad and slim.mismatches == int(bad)


def test_a_capture_built_by_a_monitor_scores_the_same_after_a_save_and_open(tmp_path):
    from vkit.model.pipeline import preset, run_model

    spec = preset("edge")
    rng = np.random.default_rng(2)
    results = [run_model(spec, rng.integers(0, 256, (5, 7, 3)).astype(np.uint8)) for _ in range(2)]
    cap = pack_capture([r.output for r in results])
    opened = open_capture(cap.save(tmp_path / "c.npz", compress=False))
    assert isinstance(opened, StoredCapture) and score(results, opened).to_dict() == score(results, cap).to_dict()


_TIMINGS = [PRESETS["vga640x480p60"], PRESETS["hd1280x720p60"], PRESETS["fhd1920x1080p60"],
            VideoTiming(32, 3, 4, 5, 24, 2, 2, 3, False, True, "odd polarities")]


@pytest.mark.parametrize("timing", _TIMINGS, ids=lambda t: t.name)
@pytest.mark.parametrize("frames", [1, 2, 3])
def test_input_facts_from_one_frame_equal_the_whole_run_schedule(timing, frames):
    # the reference is the whole run's schedule (video_input_facts on every clock of the run)
    whole = video_input_facts(schedule(timing, frames))
    tiled = tiled_input_facts(schedule(timing, 1), frames)
    assert tiled == whole
    # one hsync pulse a line (VESA DMT / CTA-861: every line has one): a full vsync period holds v_total of them
    assert tiled["input_vsync_count"] == frames and all(n == timing.v_total for n in tiled["input_hsync_per_frame"][1:])


@pytest.mark.parametrize("level", [[1, 0, 0, 1], [1, 1, 0, 0], [0, 1, 1, 0], [0, 0, 0, 1], [1, 1, 1, 1], [0, 0, 0, 0]])
@pytest.mark.parametrize("active", [True, False])
def test_edges_of_a_repeated_level_equal_the_edges_of_the_whole_run(level, active):
    # a level active on the last and the first clock of a frame is one pulse, not two (the reference is
    # leading_edges on the whole run's level; the timings above never wrap a pulse, these made-up levels do)
    from vkit.video.words import _tiled_edges, leading_edges

    one = np.array(level, bool)
    assert np.array_equal(_tiled_edges(one, active, 3), leading_edges(np.tile(one, 3), active))


def test_coverage_of_a_frame_past_the_budget_is_measured_on_its_first_rows(monkeypatch):
    from vkit.model.pipeline import preset
    from vkit.run import coverage

    spec = preset("edge")
    frames = np.random.default_rng(4).integers(0, 256, (2, 24, 32, 3)).astype(np.uint8)
    monkeypatch.setattr(coverage, "COVERAGE_MAX_FRAME_PIXELS", 32 * 10)
    figures, _ = coverage.stimulus_coverage(spec, frames, 0.5)
    assert figures["rows_used"] == 10
    # the reference: the same figures measured on those rows cut by hand
    monkeypatch.setattr(coverage, "COVERAGE_MAX_FRAME_PIXELS", 10**9)
    by_hand, _ = coverage.stimulus_coverage(spec, np.ascontiguousarray(frames[:, :10]), 0.5)
    assert by_hand["rows_used"] is None and {**figures, "rows_used": None} == by_hand


@pytest.mark.parametrize("name", ["luma.perm_BGR", "gx.tap02", "window.row0_late"])
def test_a_big_failing_run_is_diagnosed_on_a_part_and_names_the_same_mutant(monkeypatch, name):
    # the reference is the spec mutant the "design" output was made with (and the unbounded diagnosis)
    from vkit.model.exact import run_plan
    from vkit.model.mutants import spec_mutants
    from vkit.model.pipeline import preset, run_model
    from vkit.run import case as run_case

    spec = preset("edge")
    mutant = next(m for m in spec_mutants(spec) if m.name == name)
    frames = np.random.default_rng(8).integers(0, 256, (3, 24, 32, 3)).astype(np.uint8)
    results = [run_model(spec, f) for f in frames]
    verdict = score(results, pack_capture([run_plan(mutant.plan, f, keep_stages=False).output for f in frames]))
    assert verdict.status == "fail"
    whole = run_case.mutant_diagnosis(verdict, spec, frames)
    monkeypatch.setattr(run_case, "DIAGNOSIS_MAX_PIXELS", 32 * 12)  # less than one frame: its first 12 rows
    assert run_case._diagnosis_part(list(verdict.frames), (24, 32))[1] == 12
    part = run_case.mutant_diagnosis(verdict, spec, frames)
    assert whole is not None and part is not None and whole.best is not None and part.best is not None
    assert part.best.name == whole.best.name == name and part.best.exact
