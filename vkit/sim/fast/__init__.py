"""The fast path: the design runs inside a generated HDL harness that plays stimulus from a file and
writes a capture file, so no Python runs per clock.

Bottom up: :mod:`~vkit.sim.fast.wire` (word layouts, capture records, file names), :mod:`~vkit.sim.fast.stimulus`
(stimulus and expected files of a case), :mod:`~vkit.sim.fast.capture_file` (the one capture file reader),
:mod:`~vkit.sim.fast.harness` (the harness HDL), :mod:`~vkit.sim.fast.build` (the build plan and run
arguments under cocotb), :mod:`~vkit.sim.fast.testbench` (a self-checking plain-HDL testbench) and
:mod:`~vkit.sim.fast.native` (the harness as a plain executable). The cocotb test is :mod:`vkit.sim.tb.fast`."""

from __future__ import annotations

from vkit.core.lazy import lazy_facade

__getattr__, __dir__, __all__ = lazy_facade(__name__, {
    "vkit.sim.fast.build": (
        "define_args fast_build_plan fast_test_args harness_sources HarnessBuild "
        "SIMULATORS VERILATOR_ARGS"
    ),
    "vkit.sim.fast.capture_file": (
        "input_meta is_binary_capture parse_capture_binary "
        "parse_capture_text read_capture"
    ),
    "vkit.sim.fast.harness": "HarnessSpec verilog_harness vhdl_harness",
    "vkit.sim.fast.native": (
        "harness_drives native_build native_build_plan native_run_args NATIVE_SIMULATORS "
        "NativeBuild run_native"
    ),
    "vkit.sim.fast.stimulus": (
        "drain_clocks expected_lane_fields expected_words fast_run_dir prepare_fast_run write_words_hex "
        "read_fast_run stimulus_words_needed StimulusFiles stream_stimulus "
        "video_schedule_and_words write_expected write_hex write_stimulus "
        "write_words"
    ),
    "vkit.sim.fast.vlruntime": "compiler_cache make_with_shared_runtime RUNTIME_OBJECTS",
    "vkit.sim.fast.testbench": (
        "TESTBENCH testbench_commands verilog_testbench vhdl_testbench "
        "write_testbench"
    ),
    "vkit.sim.fast.wire": (
        "CAPTURE_BIN_NAME capture_data_words capture_file_name CAPTURE_MAGIC "
        "capture_record_bytes CAPTURE_ROLES CAPTURE_TEXT_NAME CAPTURE_VERSION "
        "FAMILY_CODES GAP_BITS HARNESS MAX_IN_WIDTH pack_fields READY_WORDS "
        "STREAM_TAIL_CLOCKS stream_word_bits stream_word_fields TOPLEVEL video_bit "
        "video_word_bits video_word_fields word_bytes"
    ),
})
