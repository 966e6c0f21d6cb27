"""Capture run facts: the typed RunFacts, its dict form in the .npz, captures saved by an older vkit, Capture.meta."""

from __future__ import annotations

import inspect
import json
import warnings
from dataclasses import fields
from pathlib import Path

import numpy as np
import pytest

from vkit.check.align import latency_clocks
from vkit.video.capture import Capture, CaptureBuilder, RunFacts

OLD_CAPTURE = Path(__file__).parent / "data" / "capture_meta_dict.npz"
"""A 3x2 capture saved by vkit before RunFacts: its run facts are a plain dict under ``meta``, with one key
(``dut_revision``) that is no RunFacts field."""


def _old_meta() -> dict:
    with np.load(OLD_CAPTURE, allow_pickle=False) as z:
        return json.loads(str(z["meta"]))


def test_every_fact_has_a_docstring_and_a_json_round_trip() -> None:
    facts = RunFacts(
        family="stream", simulator="verilator", path="native", clock_period_ns=6.5, frames_sent=2,
        first_input_clock=3, first_output_clock=9, latency_clocks=6, clocks_run=500, timed_out=True,
        timeout_clocks=480, start_time_ps=1000, xz_data_count=2, xz_control=[[7, "out_valid"]],
        de_in_blanking=[11], input_vsync_count=2, output_vsync_count=1, input_hsync_per_frame=[24, 24],
        output_hsync_per_frame=[24], stall_pixels=[[0, 1, 2]], backpressure_pixels=[[1, 0, 5]],
        error="DutError: x", notes=["a note"], extra={"site": "lab 2"},
    )
    assert RunFacts.from_dict(json.loads(json.dumps(facts.to_dict()))) == facts
    assert facts.to_dict()["site"] == "lab 2" and "extra" not in facts.to_dict()
    # each field is followed by its one-line docstring in the class body
    lines = inspect.getsource(RunFacts).splitlines()
    for f in fields(RunFacts):
        at = next(i for i, line in enumerate(lines) if line.startswith(f"    {f.name}: "))
        assert lines[at + 1].strip().startswith('"""'), f.name


def test_unset_facts_are_left_out_of_the_dict_and_unknown_keys_kept() -> None:
    d = RunFacts(frames_sent=1).to_dict()
    assert d["frames_sent"] == 1 and "first_output_clock" not in d and "error" not in d
    facts = RunFacts()
    facts.update({"first_input_clock": 4, "from_a_newer_vkit": [1, 2]})
    assert facts.first_input_clock == 4 and facts.extra == {"from_a_newer_vkit": [1, 2]}


def test_capture_saved_with_a_meta_dict_still_loads(tmp_path: Path) -> None:
    old = _old_meta()
    cap = Capture.load(OLD_CAPTURE)
    f = cap.facts
    assert (f.family, f.simulator, f.clock_period_ns, f.frames_sent) == ("video", "icarus", 10.0, 1)
    assert (f.first_input_clock, f.first_output_clock, f.latency_clocks, f.clocks_run) == (5, 9, 4, 40)
    assert f.timed_out is False and f.timeout_clocks == 4000 and f.start_time_ps == 123000
    assert f.output_hsync_per_frame == f.input_hsync_per_frame == [3] and f.stall_pixels == [[0, 1, 0]]
    assert f.extra == {"dut_revision": "r7"}
    assert latency_clocks(cap) == 4
    view = cap.frames(2, 3)[0]
    assert view.pixels.tolist() == [[0, 1, 2], [10, 11, 12]]
    # Saved again, every old key comes back with its value; the only new keys are facts at their defaults.
    again = Capture.load(cap.save(tmp_path / "again.npz"))
    assert again.facts == f
    new = again.facts.to_dict()
    assert {k: new[k] for k in old} == old
    assert {k: new[k] for k in set(new) - set(old)} == {"backpressure_pixels": []}


def test_meta_is_a_deprecated_read_only_copy() -> None:
    b = CaptureBuilder(RunFacts(frames_sent=2, notes=["n"]))
    cap = b.build()
    with pytest.warns(DeprecationWarning, match="Capture.facts"):
        meta = cap.meta
    assert meta == cap.facts.to_dict() and meta["frames_sent"] == 2
    meta["frames_sent"] = 9
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DeprecationWarning)
        assert cap.meta["frames_sent"] == 2
    with pytest.raises(AttributeError):
        cap.meta = {}  # type: ignore[misc]


def test_finished_lines_survive_a_kill_and_a_cut_record_is_dropped(tmp_path) -> None:
    """What a per-clock monitor leaves when its simulator is killed: every line it finished, nothing more."""
    from vkit.video.capture import CaptureBuilder, lines_file_for, read_lines_file

    spill = lines_file_for(tmp_path / "capture.npz")
    builder = CaptureBuilder()
    builder.spill_to(spill)
    for y in range(3):
        builder.new_line()
        for x in range(4):
            builder.add(10 * y + x, clock=100 * y + x)
    # the third line is still open when the "kill" comes: only two lines are on disk
    left = read_lines_file(spill)
    assert left.line.tolist() == [0] * 4 + [1] * 4 and left.values.tolist() == [0, 1, 2, 3, 10, 11, 12, 13]
    with open(spill, "ab") as out:
        out.write(b"\x01\x02\x03")  # a record cut short by the kill
    assert len(read_lines_file(spill)) == 8
