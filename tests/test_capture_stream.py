"""The binary capture read a frame at a time: the same Capture as reading it whole, in compact dtypes.

The events are the ones the Verilog harness writes (vkit/sim/templates/harness_video.v.j2): ``F`` on the
output vsync's leading edge, ``L`` when data-enable falls, ``P`` per pixel, ``E`` last. The expected
frame/line/column numbers below are worked out by hand from the numbering rules in
vkit/sim/fast/capture_file.py (an empty line or frame does not advance the count; common practice, no source).
"""

from __future__ import annotations

import struct

import numpy as np
import pytest

from conftest import pack_capture
from vkit.sim.fast import capture_file
from vkit.sim.fast.capture_file import parse_capture_binary, parse_capture_text
from vkit.sim.fast.wire import CAPTURE_MAGIC, CAPTURE_VERSION
from vkit.video.capture import UNKNOWN, Capture


def _events(frames: int, lines: int, width: int) -> list[tuple[int, str, int, int]]:
    """(clock, kind, code, value): a stray pixel before the first vsync, an empty frame, then ``frames``
    frames of ``lines`` x ``width`` pixels with an X/Z pixel in the last frame."""
    ev: list[tuple[int, str, int, int]] = [(0, "P", 0, 5), (1, "L", 0, 0), (2, "F", 0, 0), (3, "H", 0, 0), (4, "F", 0, 0)]
    clock = 10
    for f in range(frames):
        ev.append((clock, "F", 0, 0))
        for y in range(lines):
            ev.append((clock, "H", 0, 0))
            for x in range(width):
                clock += 1
                xz = f == frames - 1 and y == 1 and x == 2
                ev.append((clock, "P", int(xz), (f * 7 + y * 3 + x) % 256))
            clock += 1
            ev.append((clock, "L", 0, 0))
        clock += 5
    ev.append((clock + 1, "E", 0, 0))
    return ev


def _binary(ev: list[tuple[int, str, int, int]]) -> bytes:
    head = struct.pack("<4I", CAPTURE_MAGIC, CAPTURE_VERSION, 0, 8)
    return head + b"".join(struct.pack("<3I", c, ord(k) | code << 8, v) for c, k, code, v in ev)


def _text(ev: list[tuple[int, str, int, int]]) -> str:
    def arg(k: str, code: int, v: int) -> str:
        return ("U" if code else f"{v:02x}") if k == "P" else "-"
    return f"# vkit capture {CAPTURE_VERSION} video 8\n" + "".join(f"{c} {k} {arg(k, code, v)}\n" for c, k, code, v in ev)


@pytest.mark.parametrize("block_records", [1, 7, 1 << 20])
def test_reading_a_frame_at_a_time_gives_the_whole_file_capture(tmp_path, monkeypatch, block_records):
    ev = _events(frames=3, lines=4, width=5)
    path = tmp_path / "capture.bin"
    path.write_bytes(_binary(ev))
    monkeypatch.setattr(capture_file, "_BLOCK_RECORDS", block_records)  # block edges inside frames and records
    streamed = capture_file._parse_file(path, family="video", height=4)
    whole = parse_capture_binary(path.read_bytes(), family="video", height=4)
    text = parse_capture_text(_text(ev), family="video", height=4)
    for cap in (whole, text):
        for name in ("values", "clock", "frame", "line", "column"):
            assert np.array_equal(getattr(streamed, name), getattr(cap, name)), name
        assert streamed.facts.to_dict() == cap.facts.to_dict()
    # by hand: the stray pixel is frame 0 line 0; the empty frame between two vsyncs does not count
    assert (streamed.frame[0], streamed.line[0], streamed.column[0]) == (0, 0, 0)
    first = np.flatnonzero(streamed.frame == 1)
    assert first.size == 20 and streamed.line[first[-1]] == 3 and streamed.column[first[-1]] == 4
    assert streamed.frame_count == 4
    k = int(np.flatnonzero((streamed.frame == 3) & (streamed.line == 1) & (streamed.column == 2))[0])
    assert streamed.values[k] == UNKNOWN and streamed.facts.xz_data_count == 1
    assert streamed.facts.output_vsync_count == 5 and streamed.facts.output_hsync_per_frame == [0, 1, 0, 4, 4]


def test_capture_arrays_are_compact_and_survive_save_and_load(tmp_path):
    path = tmp_path / "capture.bin"
    path.write_bytes(_binary(_events(frames=2, lines=3, width=4)))
    cap = capture_file._parse_file(path, family="video", height=3)
    # 8-bit data in 2 bytes, clocks and positions under 2**31 in 4 bytes (all were 8)
    assert {getattr(cap, n).dtype for n in ("clock", "frame", "line", "column")} == {np.dtype(np.int32)}
    assert cap.values.dtype == np.int16
    back = Capture.load(cap.save(tmp_path / "c.npz"))
    assert back.values.dtype == np.int16 and np.array_equal(back.column, cap.column)
    views = back.frames(3, 4)
    assert [v.index for v in views] == [0, 1, 2] and views[2].pixels.dtype == np.int64
    assert views[2].present.all() and views[1].pixels[2, 3] == (0 * 7 + 2 * 3 + 3) % 256


def test_a_passing_run_keeps_counts_only_and_a_failing_one_keeps_every_frame():
    # the reference is scoring with every array kept: counts-only scoring must give the same verdict
    from vkit.check.scoreboard import score
    from vkit.model.pipeline import preset, run_model

    spec = preset("edge")
    rng = np.random.default_rng(3)
    results = [run_model(spec, rng.integers(0, 256, (12, 16, 3)).astype(np.uint8)) for _ in range(4)]
    good = pack_capture([r.output for r in results])
    full = score(results, good)
    slim = score(results, good, keep_passing=False)
    assert slim.passed and slim.to_dict() == full.to_dict()
    assert [fr.arrays_kept for fr in slim.frames] == [False] * 4 and slim.frames[2].summary() == full.frames[2].summary()
    outputs = [r.output.copy() for r in results]
    outputs[3][5, 7] ^= 1  # one wrong pixel in the last frame: the run fails, every frame keeps its arrays
    bad = score(results, pack_capture(outputs), keep_passing=False)
    assert not bad.passed and bad.mismatches == 1 and all(fr.arrays_kept for fr in bad.frames)
    assert bad.to_dict() == score(results, pack_capture(outputs)).to_dict()


@pytest.mark.parametrize("bits", [8, 24, 32, 40, 58])
def test_garbage_drawn_in_even_parts_equals_one_draw(bits):
    # the reference is NumPy's own single draw from the same PCG64 seed (how vkit.video.words draws garbage)
    from vkit.video.words import garbage_splits_evenly

    whole = np.random.default_rng(11).integers(0, 1 << bits, size=6 * 1000, dtype=np.int64)
    rng = np.random.default_rng(11)
    parts = np.concatenate([rng.integers(0, 1 << bits, size=1000, dtype=np.int64) for _ in range(6)])
    assert garbage_splits_evenly(bits, 1000) and np.array_equal(parts, whole)
    assert garbage_splits_evenly(bits, 999) == (bits > 32)


@pytest.mark.parametrize(("pixel_format", "blanking"), [("rgb888", "random"), ("gray8", "constant")])
def test_stimulus_written_a_frame_at_a_time_equals_the_whole_run_words(tmp_path, monkeypatch, pixel_format, blanking):
    # the reference is the whole-run writer (one schedule, one draw), which the per-clock source drives as well
    from vkit.sim.case import SimCase
    from vkit.sim.fast import stimulus

    rng = np.random.default_rng(5)
    shape = (3, 24, 32, 3) if pixel_format == "rgb888" else (3, 24, 32)
    frames = tmp_path / "frames.npy"
    np.save(frames, rng.integers(0, 256, shape).astype(np.uint8))
    timing = {"h_active": 32, "h_front_porch": 4, "h_sync": 4, "h_back_porch": 6, "v_active": 24,
              "v_front_porch": 2, "v_sync": 2, "v_back_porch": 2}
    roles = ("clock", "in_vsync", "in_hsync", "in_de", "in_data", "out_de", "out_data")
    case = SimCase("video", {r: r for r in roles}, str(frames),
                   str(tmp_path / "cap.npz"), 32, 24, pixel_format=pixel_format, timing=timing, seed=9,
                   blanking=blanking)
    assert stimulus._frame_by_frame(case)
    by_frame = stimulus.write_stimulus(case, tmp_path / "a")
    monkeypatch.setattr(stimulus, "_frame_by_frame", lambda c: False)
    whole = stimulus.write_stimulus(case, tmp_path / "b")
    assert by_frame.stim.read_bytes() == whole.stim.read_bytes() and by_frame.input_meta == whole.input_meta
    assert by_frame.words == whole.words == 3 * 46 * 30


def test_following_a_file_as_it_is_written_gives_the_finished_file_capture(tmp_path, monkeypatch):
    # the reference is the same file read once it is complete
    import threading
    import time

    data = _binary(_events(frames=3, lines=4, width=5))
    path = tmp_path / "capture.bin"
    monkeypatch.setattr(capture_file, "_BLOCK_RECORDS", 4)
    done = threading.Event()

    def write() -> None:  # the header late, then pieces cut mid-record, as a simulator flushes them
        time.sleep(0.05)
        with open(path, "wb") as fh:
            for start in range(0, len(data), 50):
                fh.write(data[start:start + 50])
                fh.flush()
                time.sleep(0.002)
        done.set()

    writer = threading.Thread(target=write)
    writer.start()
    followed = capture_file._parse_file(path, running=lambda: not done.is_set(), capacity=8, family="video", height=4)
    writer.join()
    whole = capture_file._parse_file(path, family="video", height=4)
    for name in ("values", "clock", "frame", "line", "column"):
        assert np.array_equal(getattr(followed, name), getattr(whole, name)), name
    assert followed.facts.to_dict() == whole.facts.to_dict() and len(followed) == 3 * 4 * 5 + 1


def test_streamed_stimulus_writes_the_file_words_and_describes_them_alike(tmp_path):
    # the reference is the stimulus file the harness reads when nothing is streamed
    import io

    from vkit.sim.case import SimCase
    from vkit.sim.fast.stimulus import streamed_stimulus, write_stimulus

    frames = tmp_path / "frames.npy"
    np.save(frames, np.random.default_rng(2).integers(0, 256, (2, 24, 32, 3)).astype(np.uint8))
    timing = {"h_active": 32, "h_front_porch": 4, "h_sync": 4, "h_back_porch": 6, "v_active": 24,
              "v_front_porch": 2, "v_sync": 2, "v_back_porch": 2}
    roles = ("clock", "in_vsync", "in_hsync", "in_de", "in_data", "out_de", "out_data")
    case = SimCase("video", {r: r for r in roles}, str(frames), str(tmp_path / "cap.npz"), 32, 24,
                   pixel_format="rgb888", timing=timing, seed=3)
    described, write = streamed_stimulus(case, tmp_path / "stim.pipe")
    sink = io.BytesIO()
    write(sink)
    written = write_stimulus(case, tmp_path / "file")
    assert sink.getvalue() == written.stim.read_bytes()
    assert described.plusargs("c.bin")[1:] == written.plusargs("c.bin")[1:]  # all but the stimulus path
    stalled = SimCase("video", {r: r for r in roles}, str(frames), str(tmp_path / "cap.npz"), 32, 24,
                      pixel_format="rgb888", timing=timing, seed=3, stalls={"probability": 0.1, "max_length": 2})
    assert streamed_stimulus(stalled, tmp_path / "stim.pipe") is None  # stalls: the file is written first
