"""The fast path: the design runs inside a generated HDL harness that plays stimulus from a file and
writes a capture file, so no Python runs per clock.

Bottom up: :mod:`~vkit.sim.fast.wire` (word layouts, capture records, file names), :mod:`~vkit.sim.fast.stimulus`
(stimulus and expected files of a case), :mod:`~vkit.sim.fast.capture_file` (the one capture file reader),
:mod:`~vkit.sim.fast.harness` (the harness HDL), :mod:`~vkit.sim.fast.build` (the build plan and run
arguments under cocotb), :mod:`~vkit.sim.fast.testbench` (a self-checking plain-HDL testbench) and
:mod:`~vkit.sim.fast.native` (the harness as a plain executable). The cocotb test is :mod:`vkit.sim.tb.fast`.
"""

from __future__ import annotations

from vkit.core.lazy import lazy_facade

# Lazy, as every facade: importing one name must not pull in the whole fast path.
_HOME = {
    "CAPTURE_BIN_NAME": "vkit.sim.fast.wire",
    "CAPTURE_MAGIC": "vkit.sim.fast.wire",
    "CAPTURE_ROLES": "vkit.sim.fast.wire",
    "CAPTURE_TEXT_NAME": "vkit.sim.fast.wire",
    "CAPTURE_VERSION": "vkit.sim.fast.wire",
    "FAMILY_CODES": "vkit.sim.fast.wire",
    "GAP_BITS": "vkit.sim.fast.wire",
    "HARNESS": "vkit.sim.fast.wire",
    "HarnessBuild": "vkit.sim.fast.build",
    "HarnessSpec": "vkit.sim.fast.harness",
    "MAX_IN_WIDTH": "vkit.sim.fast.wire",
    "NATIVE_SIMULATORS": "vkit.sim.fast.native",
    "NativeBuild": "vkit.sim.fast.native",
    "READY_WORDS": "vkit.sim.fast.wire",
    "SIMULATORS": "vkit.sim.fast.build",
    "STREAM_TAIL_CLOCKS": "vkit.sim.fast.wire",
    "StimulusFiles": "vkit.sim.fast.stimulus",
    "TESTBENCH": "vkit.sim.fast.testbench",
    "TOPLEVEL": "vkit.sim.fast.wire",
    "VERILATOR_ARGS": "vkit.sim.fast.build",
    "capture_data_words": "vkit.sim.fast.wire",
    "capture_file_name": "vkit.sim.fast.wire",
    "capture_record_bytes": "vkit.sim.fast.wire",
    "define_args": "vkit.sim.fast.build",
    "drain_clocks": "vkit.sim.fast.stimulus",
    "expected_words": "vkit.sim.fast.stimulus",
    "fast_build_plan": "vkit.sim.fast.build",
    "fast_run_dir": "vkit.sim.fast.stimulus",
    "fast_test_args": "vkit.sim.fast.build",
    "harness_sources": "vkit.sim.fast.build",
    "input_meta": "vkit.sim.fast.capture_file",
    "is_binary_capture": "vkit.sim.fast.capture_file",
    "native_build": "vkit.sim.fast.native",
    "native_build_plan": "vkit.sim.fast.native",
    "native_run_args": "vkit.sim.fast.native",
    "pack_fields": "vkit.sim.fast.wire",
    "parse_capture_binary": "vkit.sim.fast.capture_file",
    "parse_capture_text": "vkit.sim.fast.capture_file",
    "prepare_fast_run": "vkit.sim.fast.stimulus",
    "read_capture": "vkit.sim.fast.capture_file",
    "read_fast_run": "vkit.sim.fast.stimulus",
    "run_native": "vkit.sim.fast.native",
    "stimulus_words_needed": "vkit.sim.fast.stimulus",
    "stream_stimulus": "vkit.sim.fast.stimulus",
    "stream_word_bits": "vkit.sim.fast.wire",
    "stream_word_fields": "vkit.sim.fast.wire",
    "testbench_commands": "vkit.sim.fast.testbench",
    "verilog_harness": "vkit.sim.fast.harness",
    "verilog_testbench": "vkit.sim.fast.testbench",
    "vhdl_harness": "vkit.sim.fast.harness",
    "vhdl_testbench": "vkit.sim.fast.testbench",
    "video_bit": "vkit.sim.fast.wire",
    "video_schedule_and_words": "vkit.sim.fast.stimulus",
    "video_word_bits": "vkit.sim.fast.wire",
    "video_word_fields": "vkit.sim.fast.wire",
    "word_bytes": "vkit.sim.fast.wire",
    "write_expected": "vkit.sim.fast.stimulus",
    "write_hex": "vkit.sim.fast.stimulus",
    "write_stimulus": "vkit.sim.fast.stimulus",
    "write_testbench": "vkit.sim.fast.testbench",
    "write_words": "vkit.sim.fast.stimulus",
}
__all__ = sorted(_HOME)
__getattr__, __dir__ = lazy_facade(__name__, _HOME)
