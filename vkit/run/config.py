"""The regression config (TOML): which designs, simulators and stimuli to run, and the case matrix it spans.

A config names designs (``[designs.NAME]`` or imported from a designs manifest with ``[[import]]``),
the run settings (``[run]``) and the stimulus axes (``[stimulus]``). :func:`expand_matrix` turns it
into a sorted list of :class:`Case`, one per design x simulator x stimulus x seed x timing x flow.
The same tables can live under ``[tool.vkit]`` of a ``pyproject.toml``.

Example::

    [run]
    out_dir = "vkit-out"
    simulators = ["verilator"]

    [[import]]
    manifest = "../sample_rtl/designs.toml"
    use = ["edge_core"]

    [stimulus]
    patterns = ["impulse", { name = "conveyor", seeds = [1, 2] }]
    timings = ["tiny32x24"]
    stalls = [0, { probability = 0.1, max_length = 3 }]
"""

from __future__ import annotations

import fnmatch
import glob
import itertools
import importlib.resources
import json
import os
import re
import sys
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any, Callable, Iterator, Mapping, Sequence

from vkit.check.settle import ControlSettle
from vkit.core.errors import ConfigError
from vkit.core.validate import (
    check_keys,
    fail,
    suggest,
    type_name,
    want_bool,
    want_choice,
    want_int,
    want_number,
    want_str,
    want_str_list,
    want_table,
)
from vkit.core.vocab import COMPONENT_ORDERS, DRIVE_DEFAULT, DRIVE_MODES, VERILOG_SUFFIXES, VHDL_SUFFIXES, WAVE_MODES
from vkit.model import pipeline
from vkit.sim.signals import FAMILY_ROLES, KEEP_ROLES, POLARITY_GROUPS
from vkit.video.enables import EnablePattern
from vkit.video.formats import PIXEL_FORMAT_BITS
from vkit.video.words import BLANKING_MODES
from vkit.sim.simulators import LANGUAGES, SIMULATORS
from vkit.video.images import DEFAULT_MAX_PIXELS, load_image
from vkit.video.limits import check_case_size, check_frame_size
from vkit.video.patterns import PATTERNS
from vkit.video.bus import LANE_COUNTS, LANE_ORDERS, BusLayout, tiny_in_pixels
from vkit.video.timing import PRESETS as TIMING_PRESETS
from vkit.video.timing import VideoTiming, tiny

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover - exercised on 3.10 only
    import tomli as tomllib

__all__ = [
    "Config",
    "RunSettings",
    "StimulusConfig",
    "DesignConfig",
    "PatternEntry",
    "Flow",
    "Case",
    "load_config",
    "config_from_dict",
    "expand_matrix",
    "dropped_designs",
    "select_cases",
    "shard_cases",
    "shard_from_environment",
    "SHARD_AUTO",
    "SHARD_VARIABLES",
    "parse_shard",
    "read_toml",
    "PICTURE_MODES",
]

_RUN_KEYS = ("out_dir", "simulators", "jobs", "seed", "timeout_s", "max_listed", "cache_dir", "coverage_floor",
             "waves", "pictures", "path", "exit_code")
EXIT_CODE_MODES: tuple[str, ...] = ("verdicts", "expectations")
"""``[run] exit_code``: from the verdicts alone (a seeded bug that fails makes the run fail), or from the
expectations (a case marked ``expect = "fail"`` that fails counts as met; one that passes fails the run)."""
PICTURE_MODES: tuple[str, ...] = ("failing", "all")
"""``[run] pictures``: PNGs for failing frames only, or for every frame."""
_STIMULUS_KEYS = (
    "images", "patterns", "size", "frames", "timings", "stalls", "backpressure", "gaps", "blanking",
    "blanking_value", "seeds", "convert", "designs", "max_image_pixels", "enables",
)
_FOREIGN_KEYS = ("port_polarity", "enables", "settle_clocks", "strict_controls", "latency_samples",
                 "timing_parameters")
"""Design keys for the conventions of other people's RTL: pin polarity, clock enables, reset fill, parameters
that follow the timing."""
_DESIGN_KEYS = (
    "top", "sources", "language", "family", "pixel_format", "parameters", "file_parameters",
    "frame_parameters", "defines", "spec", "spec_file", "ports", "reset_active_high", "reset_cycles",
    "clock_period_ns", "latency_clocks", "latency_timing", "pipeline_clocks", "tolerance_lsb",
    "simulators", "expect", "description", "include_dirs", "build_args", "align", "timeout_clocks",
    "component_order", "pixels_per_clock", "lane_order",
    "supported_simulators", "instance", *_FOREIGN_KEYS,
)
_MANIFEST_DESIGN_KEYS = (
    "top", "sources", "language", "family", "spec", "pixel_format", "parameters", "file_parameters",
    "frame_parameters", "ports", "pipeline_clocks", "latency_clocks", "latency_timing", "simulators",
    "bugs", "defines", "description", "reset_active_high", "component_order", "pixels_per_clock", "lane_order",
    *_FOREIGN_KEYS,
)
TIMING_PARAMETER_FIELDS: tuple[str, ...] = (
    "h_active", "h_front_porch", "h_sync", "h_back_porch", "h_blank", "h_total",
    "v_active", "v_front_porch", "v_sync", "v_back_porch", "v_blank", "v_total",
    "width", "height", "pixel_bits",
)
"""What a ``timing_parameters`` entry may follow: a timing field (clocks per line, lines per frame), the frame
size, or the bits of one input pixel of the design's pixel format."""
_BUG_KEYS = ("define", "parameter", "description", "expect", "needs")
_IMPORT_KEYS = ("manifest", "use", "bugs", "set")
_TOP_KEYS = ("run", "designs", "stimulus", "import")
_LANGUAGES = ("verilog", "vhdl")
_LANGUAGE_BY_SUFFIX = {**{s: "verilog" for s in VERILOG_SUFFIXES}, **{s: "vhdl" for s in VHDL_SUFFIXES}}
_DEFAULT_MAX_LENGTH = 4
_PACKAGE_PREFIX = "package:"
IMAGE_PIXELS_SETTING = "[stimulus] max_image_pixels"
"""The config key of the decompression-bomb guard, as an image error names it."""
# The bundled regression configs were installed as vkit.sim before the simulator layer took that name.
_PACKAGE_RENAMED = {"vkit.sim": "vkit.regressions"}


# ---------------------------------------------------------------------------------------------- data


@dataclass(frozen=True)
class Flow:
    """One setting of the stall / source-gap / back-pressure axis.

    Attributes:
        probability: chance per pixel (stalls, gaps) or per clock (back-pressure), 0.0..1.0; 0 = none.
        max_length: longest run in clocks, >= 1.
    """

    probability: float = 0.0
    max_length: int = _DEFAULT_MAX_LENGTH

    @property
    def active(self) -> bool:
        """True when this setting inserts anything."""
        return self.probability > 0

    def label(self, word: str) -> str:
        """Short id text, e.g. ``stall0.1`` or ``stall0.1m8`` (``m`` = a max_length other than 4)."""
        if not self.active:
            return f"no{word}"
        text = f"{word}{self.probability:g}"
        return text if self.max_length == _DEFAULT_MAX_LENGTH else f"{text}m{self.max_length}"

    def as_pattern(self, seed: int) -> dict[str, Any] | None:
        """The ``{probability, max_length, seed}`` dict a SimCase takes, or None when inactive."""
        if not self.active:
            return None
        return {"probability": float(self.probability), "max_length": int(self.max_length), "seed": int(seed)}


@dataclass(frozen=True)
class PatternEntry:
    """One generated stimulus: a pattern name, its options and, optionally, its own axes.

    ``seeds``, ``timings``, ``stalls``, ``gaps``, ``backpressure`` and ``designs`` given here replace the
    ``[stimulus]`` lists of the same name for this pattern only (None = use those lists).
    """

    name: str
    options: tuple[tuple[str, Any], ...] = ()
    seeds: tuple[int, ...] | None = None
    label: str = ""
    timings: tuple[tuple[str, Any], ...] | None = None
    stalls: tuple[Flow, ...] | None = None
    gaps: tuple[Flow, ...] | None = None
    backpressure: tuple[Flow, ...] | None = None
    designs: tuple[str, ...] | None = None

    @property
    def id_label(self) -> str:
        """Name used in case ids."""
        return self.label or self.name


@dataclass
class RunSettings:
    """``[run]``: where reports go and how the run is carried out.

    Attributes:
        out_dir: report folder (relative paths are relative to the config file).
        simulators: simulators to run every design on that does not name its own.
        jobs: parallel worker processes, >= 1.
        seed: base seed added to every case seed (0 keeps the listed seeds as they are).
        timeout_s: wall-clock limit of one simulation, seconds.
        max_listed: mismatching pixels listed per case in the report.
        cache_dir: build cache folder, or None for ``$VKIT_CACHE_DIR`` / ``~/.cache/vkit/builds``.
        coverage_floor: a stage whose seen range is below this share of its theoretical range gets a
            coverage warning in the case result, 0.0..1.0.
        waves: ``"failing"`` (rerun failing cases with a wave dump around the first mismatch),
            ``"all"`` or ``"off"``.
        exit_code: ``"verdicts"`` or ``"expectations"`` (:data:`EXIT_CODE_MODES`).
        pictures: ``"failing"`` (PNGs for failing frames only) or ``"all"`` (every frame, passing too).
        drive: the drive mode, config key ``path``: ``"auto"`` (the default: per case the fastest of the
            three below that can run it), ``"clock"`` (cocotb drives every clock), ``"fast"`` (a generated
            HDL harness plays and captures whole runs; same verdicts, far fewer Python wake-ups) or
            ``"native"`` (that harness as a plain executable without cocotb; Icarus and Verilator).
    """

    out_dir: Path
    simulators: list[str] = field(default_factory=lambda: ["verilator"])
    jobs: int = 1
    seed: int = 0
    timeout_s: float = 600.0
    max_listed: int = 20
    cache_dir: Path | None = None
    coverage_floor: float = 0.5
    waves: str = "failing"
    pictures: str = "failing"
    drive: str = DRIVE_DEFAULT
    exit_code: str = "verdicts"

    @property
    def path(self) -> str:
        """The drive mode under the config key's name (older code reads ``run.path``)."""
        return self.drive


@dataclass
class StimulusConfig:
    """``[stimulus]``: the axes every design is crossed with.

    Attributes:
        images: image files (PNG/PPM/PGM), globs already expanded.
        patterns: generated patterns.
        size: ``(width, height)`` of patterns under the ``"tiny"`` timing, pixels.
        frames: frames per case, >= 1.
        timings: ``(label, timing dict or None)``; None is ``tiny`` at the stimulus size.
        stalls: video stall settings (video family).
        backpressure: sink ready-low settings (stream family).
        gaps: source valid-gap settings (stream family).
        blanking: ``"random"`` or ``"constant"`` data outside active video.
        blanking_value: data word in blanking when ``blanking`` is ``"constant"``.
        seeds: seeds every stimulus without its own seeds runs with.
        designs: which designs the stimuli run on: design-name globs, ``!GLOB`` leaves matching designs
            out (``["*"]``, the default, is every design; ``["!*@*"]`` leaves out the seeded-bug variants).
        convert: allow the lossy image conversions of :func:`vkit.video.images.load_image` (16-bit to 8-bit,
            alpha dropped, colour to luma, gray to RGB); False (default) makes each an error.
        max_image_pixels: decompression-bomb guard: an image file claiming more pixels (width x height)
            is refused before it is decoded (default :data:`vkit.video.images.DEFAULT_MAX_PIXELS`).
        enables: input clock-enable patterns (tables of :class:`vkit.video.enables.EnablePattern`, file paths
            resolved), an axis for the designs that map ``in_enable`` (the others ignore it); the seed of a
            random pattern is the case seed unless the table gives one. Default: every clock.
    """

    images: list[Path] = field(default_factory=list)
    patterns: list[PatternEntry] = field(default_factory=list)
    size: tuple[int, int] = (32, 24)
    frames: int = 1
    timings: list[tuple[str, dict[str, Any] | None]] = field(default_factory=lambda: [("tiny", None)])
    stalls: list[Flow] = field(default_factory=lambda: [Flow()])
    backpressure: list[Flow] = field(default_factory=lambda: [Flow()])
    gaps: list[Flow] = field(default_factory=lambda: [Flow()])
    blanking: str = "random"
    blanking_value: int = 0
    seeds: list[int] = field(default_factory=lambda: [1])
    convert: bool = False
    designs: list[str] = field(default_factory=lambda: ["*"])
    max_image_pixels: int = DEFAULT_MAX_PIXELS
    enables: list[dict[str, Any]] = field(default_factory=lambda: [{"every": 1}])


@dataclass
class DesignConfig:
    """One design under test: how to build it and what it should compute.

    Attributes:
        name: the design's name in case ids (``NAME`` or ``NAME@bug`` for a seeded-bug variant).
        top: top-level module / entity.
        sources: absolute source paths in compile order.
        language: ``"verilog"`` or ``"vhdl"``.
        family: ``"video"`` or ``"stream"``.
        pixel_format: input format: ``gray<bits>`` or ``rgb<bits><bits><bits>``, 1..16 bits a sample
            (``gray8``, ``gray10``, ``rgb888``, ``rgb121212``).
        component_order: order of R, G, B in a pixel's field of the data word, most significant first.
        pixels_per_clock: pixels the data buses carry a clock (1, 2, 4, 8); timings stay in pixels.
        lane_order: ``"first_low"`` (first pixel of a clock in the least significant lane) or ``"first_high"``.
        parameters: Verilog parameters / VHDL generics.
        file_parameters: string parameters naming a file (absolute path; quoted for Verilog at build).
        frame_parameters: ``"height"``/``"width"`` -> parameter that must follow the frame size.
        defines: Verilog defines.
        spec_preset / spec_file / spec_table: where the pipeline spec comes from (exactly one).
        ports: role -> port name.
        reset_active_high, reset_cycles: reset polarity and length (clocks).
        clock_period_ns: clock period, ns.
        latency_clocks: latency the design declares, clocks, measured on ``latency_timing``.
        latency_timing: timing preset ``latency_clocks`` holds for (None: every timing).
        pipeline_clocks: pipeline depth, used to derive the declared latency on other timings.
        tolerance_lsb: accepted ``|actual - expected|``, LSB.
        simulators: simulators named by the config for this design (override of ``[run]``), or None.
        supported: simulators a manifest says the design runs on (a filter), or the design's own
            ``supported_simulators`` (a limit: asking for another is a ConfigError), or None.
        supported_declared: True when ``supported`` is the design's own ``supported_simulators``.
        expect: ``"pass"`` or ``"fail"`` (reported only; the verdict is always the design's own).
        expect_kind: failure class a seeded bug should be diagnosed as, or None.
        description, needs, bug: what the variant is, what stimulus shows it, the bug's name.
        include_dirs, build_args: extra build inputs.
        align: scoreboard alignment, ``"exact"`` or ``"auto"``.
        timeout_clocks: simulation timeout in clocks, or None for the default.
        instance: hierarchical path of the design's instance inside a larger top (``u_isp.u_edge``), read by
            the passive scoreboard (below the cocotb toplevel live, a scope of the dump offline); None: the
            design is the top.
        port_polarity: role -> True when the design's pin is active high (config key ``port_polarity``,
            ``"high"``/``"low"`` per role or group word; the reset's lands in ``reset_active_high``). Syncs left
            out follow the timing's sync polarity; every other pin left out is active high.
        enables: the input clock-enable patterns this design runs with (replaces ``[stimulus] enables``), or None.
        settle_clocks: output controls are judged from this clock on (None: from the first output pixel).
        strict_controls: judge output controls from the first clock after reset (reset fill counts).
        latency_samples: latency the design declares in input samples (enabled clocks), or None.
        timing_parameters: parameter -> the timing field it follows (:data:`TIMING_PARAMETER_FIELDS`).
    """

    name: str
    top: str
    sources: list[Path]
    language: str
    family: str
    pixel_format: str
    ports: dict[str, str]
    parameters: dict[str, Any] = field(default_factory=dict)
    file_parameters: dict[str, Path] = field(default_factory=dict)
    frame_parameters: dict[str, str] = field(default_factory=dict)
    defines: dict[str, Any] = field(default_factory=dict)
    spec_preset: str | None = None
    spec_file: Path | None = None
    spec_table: dict[str, Any] | None = None
    reset_active_high: bool = True
    reset_cycles: int = 4
    clock_period_ns: float = 10.0
    latency_clocks: int | None = None
    latency_timing: str | None = None
    pipeline_clocks: int | None = None
    tolerance_lsb: int = 0
    simulators: list[str] | None = None
    supported: list[str] | None = None
    supported_declared: bool = False
    expect: str = "pass"
    expect_kind: str | None = None
    description: str = ""
    needs: str | None = None
    bug: str | None = None
    include_dirs: list[Path] = field(default_factory=list)
    build_args: list[str] = field(default_factory=list)
    align: str = "exact"
    timeout_clocks: int | None = None
    instance: str | None = None
    component_order: str = "RGB"
    pixels_per_clock: int = 1
    lane_order: str = "first_low"
    port_polarity: dict[str, bool] = field(default_factory=dict)
    enables: list[dict[str, Any]] | None = None
    settle_clocks: int | None = None
    strict_controls: bool = False
    latency_samples: int | None = None
    timing_parameters: dict[str, str] = field(default_factory=dict)

    def declared_latency_clocks(self, timing: str | None, width: int, h_total: int | None) -> int | None:
        """The latency this design declares, clocks, for frames of ``width`` pixels on the timing named ``timing``
        (a stream's is ``tiny{width}x{height}``) of ``h_total`` clocks a line (video; None when not known); None
        when it declares none there. On ``latency_timing`` it is ``latency_clocks``; elsewhere it is derived from
        ``pipeline_clocks`` as the sample designs document: ``h_total + 1 + pipeline_clocks`` (video) or
        ``width + 2 + pipeline_clocks`` (stream). The caller decides whether the run is steady."""
        if self.latency_clocks is not None and self.latency_timing in (None, timing):
            return self.latency_clocks
        if self.pipeline_clocks is None:
            return None
        if self.family == "video":
            return None if h_total is None else int(h_total) + 1 + self.pipeline_clocks
        return int(width) + 2 + self.pipeline_clocks

    def declared_latency_samples(self, timing: str | None) -> int | None:
        """The latency this design declares in input samples (``latency_samples``) on the timing named ``timing``:
        on its ``latency_timing``, or every timing when that is not given; else None."""
        if self.latency_samples is None:
            return None
        return self.latency_samples if self.latency_timing in (None, timing) else None

    def bus_layout(self) -> BusLayout:
        """How the design's data words hold pixels (:class:`vkit.video.bus.BusLayout`)."""
        return BusLayout(self.pixel_format, self.component_order, self.pixels_per_clock, self.lane_order)

    def pipeline_spec(self) -> pipeline.PipelineSpec:
        """The :class:`vkit.model.pipeline.PipelineSpec` this design implements.

        Raises:
            ConfigError: the spec cannot be read, or it takes another pixel format than the design's.
        """
        if self.spec_preset is not None:
            spec = pipeline.preset(self.spec_preset)
        elif self.spec_file is not None:
            spec = pipeline.PipelineSpec.from_toml(self.spec_file)
        else:
            spec = pipeline.PipelineSpec.from_dict(self.spec_table or {})
        if spec.input != self.pixel_format:
            raise ConfigError(f"design {self.name}: spec {spec.name!r} takes {spec.input} but the design's "
                              f"pixel_format is {self.pixel_format}; make them agree")
        return spec

    def build_parameters(self, width: int, height: int, timing: Mapping[str, Any] | None = None) -> dict[str, Any]:
        """Parameters for a build at this frame size and timing, file parameters as the language wants them.

        ``timing`` is the case's timing dict (None: ``tiny(width, height)``); ``timing_parameters`` take
        their values from it.
        """
        params = dict(self.parameters)
        for key, path in self.file_parameters.items():
            params[key] = f'"{path}"' if self.language == "verilog" else str(path)
        for what, pname in self.frame_parameters.items():
            params[pname] = height if what == "height" else width
        if self.timing_parameters:
            t = VideoTiming.from_dict(timing) if timing is not None else tiny(width, height)
            for pname, what in self.timing_parameters.items():
                params[pname] = _timing_value(t, what, self.pixel_format)
        return params


@dataclass
class Config:
    """A loaded config: its file, the run settings, the designs in order, and the stimulus axes."""

    path: Path
    run: RunSettings
    designs: dict[str, DesignConfig]
    stimulus: StimulusConfig

    @property
    def base_dir(self) -> Path:
        """Folder relative paths of the config are resolved against."""
        return self.path.parent


@dataclass(frozen=True)
class Case:
    """One simulation of the matrix: every axis value it was given.

    Attributes:
        id: stable readable id, ``design/simulator/stimulus-sSEED/timing/flow``.
        design: the design (carried whole so a worker process needs nothing else).
        simulator: simulator name.
        stimulus: ``"pattern"`` or ``"image"``.
        stimulus_name: pattern name or image path.
        stimulus_label: the stimulus part of the id.
        pattern_options: pattern keyword options.
        seed: case seed; frame ``k`` of a seeded pattern uses ``seed + k``; stalls and blanking use it.
        frames: frames in the case.
        width, height: active frame size, pixels / lines.
        timing: video timing dict (video family), or None.
        timing_label: the timing part of the id.
        stalls, gaps, backpressure: the flow settings (inactive ones have probability 0).
        enable: the input clock-enable pattern (a table of :class:`vkit.video.enables.EnablePattern`, seed
            filled in), or None for a design without ``in_enable``.
        blanking, blanking_value: blanking data.
        index: position in the sorted full matrix (0-based), the basis of sharding.
        convert: image conversions allowed (``[stimulus] convert``).
        max_image_pixels: the decompression-bomb guard of the image (``[stimulus] max_image_pixels``).
    """

    id: str
    design: DesignConfig
    simulator: str
    stimulus: str
    stimulus_name: str
    stimulus_label: str
    pattern_options: tuple[tuple[str, Any], ...]
    seed: int
    frames: int
    width: int
    height: int
    timing: dict[str, Any] | None
    timing_label: str
    stalls: Flow = Flow()
    gaps: Flow = Flow()
    backpressure: Flow = Flow()
    blanking: str = "random"
    blanking_value: int = 0
    index: int = 0
    convert: bool = False
    max_image_pixels: int = DEFAULT_MAX_PIXELS
    enable: dict[str, Any] | None = None

    def build_parameters(self) -> dict[str, Any]:
        """The design's parameters for a build of this case (frame size and timing applied)."""
        return self.design.build_parameters(self.width, self.height, self.timing)

    @property
    def steady(self) -> bool:
        """True when no stall, gap or back-pressure is inserted."""
        return not (self.stalls.active or self.gaps.active or self.backpressure.active)

    def declared_latency_clocks(self) -> int | None:
        """The latency the design declares for this case's timing, or None when it declares none here.

        Only steady cases (no stalls, gaps or back-pressure) without a clock enable left low on some clocks
        have a declared latency in clocks (:meth:`DesignConfig.declared_latency_clocks`).
        """
        if not self.steady or (self.enable is not None and self.enable != {"every": 1}):
            return None  # behind a clock enable the design declares its latency in samples
        here = self.timing_label if self.design.family == "video" else f"tiny{self.width}x{self.height}"
        h_total = VideoTiming.from_dict(self.timing).h_total if self.timing is not None else None
        return self.design.declared_latency_clocks(here, self.width, h_total)

    def declared_latency_samples(self) -> int | None:
        """The latency the design declares in input samples (``latency_samples``), on steady cases of its
        ``latency_timing`` (every timing when that is not given)."""
        return self.design.declared_latency_samples(self.timing_label) if self.steady else None

    def score_settings(self) -> dict[str, Any]:
        """The keyword arguments of :func:`vkit.check.scoreboard.score` this case's design asks for: tolerance,
        declared latencies, alignment and from when output controls are judged (reset fill)."""
        d = self.design
        return {"tolerance_lsb": d.tolerance_lsb, "declared_latency_clocks": self.declared_latency_clocks(),
                "declared_latency_samples": self.declared_latency_samples(), "align": d.align,
                "settle": ControlSettle(d.settle_clocks, d.strict_controls)}

    def seeds(self) -> dict[str, int]:
        """Seeds that reproduce this case (name -> value)."""
        out = {"case": self.seed}
        if self.stimulus == "pattern":
            out["first_frame_pattern"] = self.seed
        return out


# ---------------------------------------------------------------------------------------------- helpers


def _timing_value(t: VideoTiming, what: str, pixel_format: str) -> int:
    """The value of a ``timing_parameters`` entry: a timing field, the frame size or the pixel bits."""
    if what == "pixel_bits":
        return PIXEL_FORMAT_BITS[pixel_format]
    if what in ("width", "height"):
        return int(t.h_active if what == "width" else t.v_active)
    return int(getattr(t, what))


_Reader = Callable[[str, str, Any], Any]
"""``read(where, key, value)``: the checked value of one config key (raises ConfigError)."""


def _int_from(lo: int) -> _Reader:
    return lambda where, key, value: want_int(where, key, value, lo)


def _choice(choices: Sequence[str]) -> _Reader:
    return lambda where, key, value: want_choice(where, key, value, choices)


def _lanes(where: str, key: str, value: Any) -> int:
    """Pixels a clock: one of :data:`vkit.video.bus.LANE_COUNTS`."""
    lanes = want_int(where, key, value, 1)
    if lanes not in LANE_COUNTS:
        raise fail(where, key, value, "not a lane count", f"use one of {', '.join(map(str, LANE_COUNTS))}")
    return lanes


def _positive(where: str, key: str, value: Any) -> float:
    number = want_number(where, key, value)
    if number <= 0:
        raise fail(where, key, value, "not above 0", "give a number > 0")
    return number


def _share(where: str, key: str, value: Any) -> float:
    return want_number(where, key, value, 0, 1)


def _set_fields(where: str, data: Mapping[str, Any], target: Any, readers: Mapping[str, _Reader]) -> None:
    """``target.KEY = read(where, KEY, data[KEY])`` for every key of ``readers`` that ``data`` holds."""
    for key, read in readers.items():
        if key in data:
            setattr(target, key, read(where, key, data[key]))


def _resolve(base: Path, text: str) -> Path:
    """A path from a config: ``package:vkit.sample_rtl/file`` or relative to ``base``."""
    if text.startswith(_PACKAGE_PREFIX):
        pkg, _, rest = text[len(_PACKAGE_PREFIX):].partition("/")
        pkg = _PACKAGE_RENAMED.get(pkg, pkg)
        try:
            root = Path(str(importlib.resources.files(pkg)))
        except ModuleNotFoundError:
            raise ConfigError(f"path {text!r}: package {pkg!r} is not installed; fix the package name") from None
        found = (root / rest).resolve()
        if not found.is_relative_to(root.resolve()):
            raise ConfigError(f"path {text!r} leaves package {pkg!r} (it resolves to {found}); "
                              f"name a file inside the package, or give a plain path")
        return found
    p = Path(os.path.expanduser(text))
    return (p if p.is_absolute() else base / p).resolve()


def _glob_files(base: Path, text: str, want: Callable[[Path], bool]) -> tuple[list[Path], str]:
    """Files a config entry names (a path or a glob, resolved against ``base``) and the pattern looked for."""
    pattern = str(_resolve(base, text))
    hits = sorted(glob.glob(pattern)) if glob.has_magic(pattern) else ([pattern] if want(Path(pattern)) else [])
    return [Path(h) for h in hits], pattern


def _no_file(where: str, key: str, text: str, path: str | Path, fix: str, example: str = "*.v") -> ConfigError:
    """The error for a path value naming no file: a directory is said to be one, anything else is not found."""
    if Path(path).is_dir():
        return fail(where, key, text, f"a directory ({path}), not a file",
                    f"name the files in it, e.g. {str(text).rstrip('/') + '/' + example!r}")
    return fail(where, key, text, f"not found (looked for {path})", fix)


def _existing_file(where: str, key: str, text: Any, base: Path) -> Path:
    """A file path value that must name an existing file."""
    path = _resolve(base, want_str(where, key, text))
    if not path.is_file():
        raise _no_file(where, key, text, path, "fix the path")
    return path


def read_toml(path: str | Path) -> dict[str, Any]:
    """Read a TOML file; a syntax error becomes one ConfigError line ``file:line:col: problem``."""
    p = Path(path)
    try:
        raw = p.read_bytes()
    except FileNotFoundError:
        raise ConfigError(f"{p}: file not found; check the path") from None
    except OSError as exc:
        raise ConfigError(f"{p}: cannot read ({exc.strerror}); check the path and permissions") from None
    try:
        return tomllib.loads(raw.decode("utf-8"))
    except UnicodeDecodeError as exc:
        raise ConfigError(f"{p}: not UTF-8 text (byte {exc.start}); save the file as UTF-8") from None
    except tomllib.TOMLDecodeError as exc:
        msg = str(exc)
        m = re.search(r"\(at line (\d+), column (\d+)\)", msg)
        if m:
            problem = msg[: m.start()].strip()
            raise ConfigError(f"{p}:{m.group(1)}:{m.group(2)}: {problem} (TOML syntax); fix that line") from None
        raise ConfigError(f"{p}: {msg} (TOML syntax); fix the file") from None


# ---------------------------------------------------------------------------------------------- [run]


_RUN_FIELDS: dict[str, _Reader] = {
    "exit_code": _choice(EXIT_CODE_MODES),
    "jobs": _int_from(1),
    "seed": _int_from(0),
    "timeout_s": _positive,
    "max_listed": _int_from(0),
    "coverage_floor": _share,
    "waves": _choice(WAVE_MODES),
    "pictures": _choice(PICTURE_MODES),
}


def _parse_run(where: str, data: Mapping[str, Any], base: Path) -> RunSettings:
    check_keys(where, data, _RUN_KEYS)
    out = RunSettings(out_dir=(base / "vkit-out").resolve())
    _set_fields(where, data, out, _RUN_FIELDS)
    if "path" in data:  # the config key keeps its name; in Python it is the drive mode
        out.drive = want_choice(where, "path", data["path"], DRIVE_MODES)
    for key in ("out_dir", "cache_dir"):
        if key in data:
            setattr(out, key, _resolve(base, want_str(where, key, data[key])))
    if "simulators" in data:
        out.simulators = _simulator_list(where, "simulators", data["simulators"])
    return out


def _simulator_list(where: str, key: str, value: Any) -> list[str]:
    """A non-empty list of simulators vkit drives (a lone name counts as a list of one)."""
    names = want_str_list(where, key, value)
    for name in names:
        if name not in SIMULATORS:
            raise fail(where, key, name, "not a simulator vkit drives", suggest(name, SIMULATORS))
    if not names:
        raise fail(where, key, value, "empty", f"name at least one of {', '.join(SIMULATORS)}")
    return names


# ---------------------------------------------------------------------------------------------- [stimulus]


def _parse_flow(where: str, key: str, value: Any) -> Flow:
    if isinstance(value, Mapping):
        check_keys(f"{where} {key} entry", value, ("probability", "max_length"))
        p = want_number(where, f"{key}.probability", value.get("probability", 0.0), 0, 1)
        m = want_int(where, f"{key}.max_length", value.get("max_length", _DEFAULT_MAX_LENGTH), 1)
        return Flow(p, m)
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise fail(where, key, value, type_name(value),
                   "give a probability (0.1) or { probability = 0.1, max_length = 4 }")
    return Flow(want_number(where, key, value, 0, 1), _DEFAULT_MAX_LENGTH)


def _parse_flows(where: str, key: str, value: Any) -> list[Flow]:
    items = value if isinstance(value, list) else [value]
    flows = [_parse_flow(where, key, v) for v in items]
    if not flows:
        raise fail(where, key, value, "empty", "give at least one entry (0 = none)")
    return list(dict.fromkeys(flows))


def _parse_timings(where: str, value: Any) -> list[tuple[str, dict[str, Any] | None]]:
    out: list[tuple[str, dict[str, Any] | None]] = []
    for item in value if isinstance(value, list) else [value]:
        if item == "tiny":
            out.append(("tiny", None))
        elif isinstance(item, str):
            if item not in TIMING_PRESETS:
                raise fail(where, "timings", item, "not a timing preset", suggest(item, ["tiny", *TIMING_PRESETS]))
            out.append((item, TIMING_PRESETS[item].to_dict()))
        elif isinstance(item, Mapping):
            t = VideoTiming.from_dict(item)
            label = t.name if t.name and t.name != "custom" else f"custom{t.h_active}x{t.v_active}t{t.h_total}x{t.v_total}"
            out.append((label, t.to_dict()))
        else:
            raise fail(where, "timings", item, type_name(item), "give a preset name or a table")
    if not out:
        raise fail(where, "timings", value, "empty", 'give at least one, e.g. ["tiny"]')
    return out


_PATTERN_OWN_KEYS = ("name", "seeds", "label", "timings", "stalls", "gaps", "backpressure", "designs")
_FLOW_KEYS = ("stalls", "gaps", "backpressure")


def _pattern_entry(where: str, item: Any) -> PatternEntry:
    """One ``patterns`` entry: a name, or a table with a name, options and its own axes."""
    if isinstance(item, str):
        entry = PatternEntry(item)
    elif isinstance(item, Mapping):
        if "name" not in item:
            raise ConfigError(f"{where}: a patterns table needs a name, e.g. {{ name = \"conveyor\", seeds = [1, 2] }}")
        seeds = item.get("seeds")
        entry = PatternEntry(
            name=want_str(where, "patterns.name", item["name"]),
            options=tuple(sorted((k, v) for k, v in item.items() if k not in _PATTERN_OWN_KEYS)),
            seeds=None if seeds is None else tuple(_seeds(where, "patterns.seeds", seeds)),
            label=want_str(where, "patterns.label", item.get("label", "")),
            timings=tuple(_parse_timings(where, item["timings"])) if "timings" in item else None,
            **{k: tuple(_parse_flows(where, f"patterns.{k}", item[k])) for k in _FLOW_KEYS if k in item},
            designs=tuple(want_str_list(where, "patterns.designs", item["designs"])) if "designs" in item else None,
        )
    else:
        raise fail(where, "patterns", item, type_name(item), "give a name or a table")
    if entry.name not in PATTERNS:
        raise fail(where, "patterns", entry.name, "not a known pattern", suggest(entry.name, PATTERNS))
    return entry


def _seeds(where: str, key: str, value: Any) -> list[int]:
    seeds = [want_int(where, key, s, 0) for s in (value if isinstance(value, list) else [value])]
    if not seeds:
        raise fail(where, key, value, "empty", "give at least one seed, e.g. [1]")
    return seeds


def _size(where: str, key: str, value: Any) -> tuple[int, int]:
    ok = isinstance(value, list) and len(value) == 2
    if not ok or not all(isinstance(x, int) and not isinstance(x, bool) and x >= 2 for x in value):
        raise fail(where, key, value, "not a frame size", "give [width, height] in pixels, each >= 2, e.g. [32, 24]")
    check_frame_size(where, key, value[0], value[1])
    return value[0], value[1]


_STIMULUS_FIELDS: dict[str, _Reader] = {
    "size": _size,
    "frames": _int_from(1),
    "timings": lambda where, key, value: _parse_timings(where, value),
    "stalls": _parse_flows,
    "backpressure": _parse_flows,
    "gaps": _parse_flows,
    "blanking": _choice(BLANKING_MODES),
    "blanking_value": _int_from(0),
    "convert": want_bool,
    "seeds": _seeds,
    "designs": want_str_list,
    "max_image_pixels": _int_from(1),
}


def _parse_stimulus(where: str, data: Mapping[str, Any], base: Path) -> StimulusConfig:
    check_keys(where, data, _STIMULUS_KEYS)
    st = StimulusConfig()
    for text in want_str_list(where, "images", data.get("images", [])):
        hits, pattern = _glob_files(base, text, Path.is_file)
        if not hits:
            raise _no_file(where, "images", text, pattern, "fix the path or glob", "*.png")
        st.images.extend(hits)
    patterns = data.get("patterns", [])
    st.patterns = [_pattern_entry(where, item) for item in (patterns if isinstance(patterns, list) else [patterns])]
    if not st.images and not st.patterns:
        raise ConfigError(f"{where}: no stimulus; give images = [...] or patterns = [...]")
    _set_fields(where, data, st, _STIMULUS_FIELDS)
    if "enables" in data:
        st.enables = _parse_enables(where, "enables", data["enables"], base)
    return st


def _parse_enables(where: str, key: str, value: Any, base: Path) -> list[dict[str, Any]]:
    """Clock-enable patterns: a table or a list of tables (``{ every = 2 }``, ``{ duty = 0.5, max_gap = 3 }``,
    ``{ file = "enable.txt" }``); a lone integer N means every Nth clock."""
    items = value if isinstance(value, list) else [value]
    if not items:
        raise fail(where, key, value, "empty", "give at least one pattern, e.g. [{ every = 2 }]")
    out: list[dict[str, Any]] = []
    for item in items:
        if isinstance(item, int) and not isinstance(item, bool):
            item = {"every": item}
        table = dict(want_table(where, key, item))
        if "file" in table:
            table["file"] = str(_existing_file(where, f"{key}.file", table["file"], base))
        try:
            pattern = EnablePattern.from_dict(table, f"{where} {key}")
        except ConfigError as exc:
            raise ConfigError(f"{exc}".replace("enable pattern:", f"{where} {key}:")) from None
        entry = pattern.to_dict()
        if "duty" in entry and "seed" not in table:
            entry.pop("seed")  # the case seed fills it in
        out.append(entry)
    return out


# ---------------------------------------------------------------------------------------------- [designs.NAME]


def _sources(where: str, value: Any, base: Path) -> list[Path]:
    sources: list[Path] = []
    for text in want_str_list(where, "sources", value):
        hits, pattern = _glob_files(base, text, Path.is_file)
        if not hits:
            raise _no_file(where, "sources", text, pattern, f"fix the path relative to {base}")
        sources.extend(hits)
    return sources


def _language(where: str, data: Mapping[str, Any], sources: list[Path]) -> str:
    """The design's language: as given, else from the source file endings."""
    if "language" in data:
        return want_choice(where, "language", data["language"], _LANGUAGES)
    langs = {_LANGUAGE_BY_SUFFIX.get(s.suffix.lower()) for s in sources}
    if None in langs or len(langs) != 1:
        raise ConfigError(
            f"{where}: cannot tell the language from the source extensions "
            f"({', '.join(sorted({s.suffix for s in sources}))}); add language = \"verilog\" or \"vhdl\""
        )
    return str(langs.pop())


def _ports(where: str, value: Any) -> dict[str, str]:
    ports = want_table(where, "ports", value)
    return {role: want_str(where, f"ports.{role}", port) for role, port in ports.items()}


def _set_spec(where: str, data: Mapping[str, Any], base: Path, d: DesignConfig) -> None:
    """Exactly one of ``spec`` (a preset name or a table) and ``spec_file``."""
    if "spec" in data and "spec_file" in data:
        raise ConfigError(f"{where}: both spec and spec_file given; keep one")
    if "spec_file" in data:
        d.spec_file = _existing_file(where, "spec_file", data["spec_file"], base)
    elif "spec" not in data:
        raise ConfigError(f"{where}: no pipeline spec; add spec = \"edge\" (a preset), spec_file = \"...\" "
                          f"or a [designs.{d.name}.spec] table")
    elif isinstance(data["spec"], str):
        d.spec_preset = data["spec"]
    elif isinstance(data["spec"], Mapping):
        d.spec_table = dict(data["spec"])
    else:
        raise fail(where, "spec", data["spec"], type_name(data["spec"]),
                   f"give a preset name or a [designs.{d.name}.spec] table")


def _file_parameters(where: str, value: Any, base: Path) -> dict[str, Path]:
    table = want_table(where, "file_parameters", value)
    return {name: _existing_file(where, f"file_parameters.{name}", text, base) for name, text in table.items()}


def _frame_parameters(where: str, value: Any) -> dict[str, str]:
    table = want_table(where, "frame_parameters", value)
    for what in table:
        if what not in ("height", "width"):
            raise ConfigError(f"{where}: frame_parameters key {what!r}; use \"height\" or \"width\"")
    return {what: want_str(where, f"frame_parameters.{what}", name) for what, name in table.items()}


def _dict(where: str, key: str, value: Any) -> dict[str, Any]:
    return dict(want_table(where, key, value))


_DESIGN_FIELDS: dict[str, _Reader] = {
    "parameters": _dict,
    "defines": _dict,
    "reset_active_high": want_bool,
    "reset_cycles": _int_from(1),
    "clock_period_ns": _positive,
    "latency_clocks": _int_from(0),
    "pipeline_clocks": _int_from(0),
    "timeout_clocks": _int_from(1),
    "latency_timing": want_str,
    "tolerance_lsb": _int_from(0),
    "expect": _choice(("pass", "fail")),
    "description": want_str,
    "build_args": want_str_list,
    "align": _choice(("exact", "auto")),
    "instance": want_str,
    "component_order": lambda where, key, value: want_choice(where, key, str(value).upper(), COMPONENT_ORDERS),
    "pixels_per_clock": lambda where, key, value: _lanes(where, key, value),
    "lane_order": _choice(LANE_ORDERS),
}
"""Design keys that are one checked value each (read the same in a design table and an import's ``set``)."""


def _parse_design(where: str, name: str, data: Mapping[str, Any], base: Path, *, manifest: bool = False) -> DesignConfig:
    check_keys(where, {k: v for k, v in data.items() if not (manifest and k == "bugs")},
               _MANIFEST_DESIGN_KEYS if manifest else _DESIGN_KEYS)
    for key in ("top", "sources", "ports"):
        if key not in data:
            raise ConfigError(f"{where}: missing key {key!r}; every design needs top, sources and ports")
    sources = _sources(where, data["sources"], base)
    d = DesignConfig(
        name=name, top=want_str(where, "top", data["top"]), sources=sources,
        language=_language(where, data, sources),
        family=want_choice(where, "family", data.get("family", "video"), tuple(FAMILY_ROLES)),
        pixel_format=want_choice(where, "pixel_format", data.get("pixel_format", "gray8"), tuple(PIXEL_FORMAT_BITS)),
        ports=_ports(where, data["ports"]),
    )
    _set_spec(where, data, base, d)
    _set_fields(where, data, d, _DESIGN_FIELDS)
    if "file_parameters" in data:
        d.file_parameters = _file_parameters(where, data["file_parameters"], base)
    if "frame_parameters" in data:
        d.frame_parameters = _frame_parameters(where, data["frame_parameters"])
    if "include_dirs" in data:
        d.include_dirs = [_resolve(base, t) for t in want_str_list(where, "include_dirs", data["include_dirs"])]
    if "simulators" in data:
        sims = _simulator_list(where, "simulators", data["simulators"])
        d.supported, d.simulators = (sims, None) if manifest else (None, sims)
    if "supported_simulators" in data:  # e.g. a top with SystemVerilog interface ports: not Icarus
        d.supported = _simulator_list(where, "supported_simulators", data["supported_simulators"])
        d.supported_declared = True
    if d.language == "vhdl" and d.defines:
        raise ConfigError(f"{where}: defines are Verilog only and this design is VHDL; use parameters (generics)")
    _set_foreign(where, data, base, d)
    try:
        d.bus_layout()
    except ConfigError as exc:
        raise ConfigError(f"{where}: {exc}") from None
    return d


_LEVEL_WORDS = {"high": True, "low": False}


def _port_polarity(where: str, value: Any) -> dict[str, bool]:
    """``port_polarity``: role or group word -> "high"/"low", as role -> active high (groups expanded)."""
    table = want_table(where, "port_polarity", value)
    roles = {r for group in POLARITY_GROUPS.values() for r in group}
    out: dict[str, bool] = {}
    for name, level in table.items():
        if name not in POLARITY_GROUPS and name not in roles:
            raise fail(where, "port_polarity", name, "not a control role or group",
                       suggest(name, [*POLARITY_GROUPS, *sorted(roles)]))
        high = _LEVEL_WORDS[want_choice(where, f"port_polarity.{name}", level, tuple(_LEVEL_WORDS))]
        for role in POLARITY_GROUPS.get(name, (name,)):
            out[role] = high
    return out


def _timing_parameters(where: str, value: Any) -> dict[str, str]:
    table = want_table(where, "timing_parameters", value)
    return {name: want_choice(where, f"timing_parameters.{name}", what, TIMING_PARAMETER_FIELDS)
            for name, what in table.items()}


def _set_foreign(where: str, data: Mapping[str, Any], base: Path, d: DesignConfig) -> None:
    """The keys of :data:`_FOREIGN_KEYS`: pin polarity, clock enables, reset fill, timing parameters."""
    if "port_polarity" in data:
        polarity = _port_polarity(where, data["port_polarity"])
        if "reset" in polarity:
            high = polarity.pop("reset")
            if "reset_active_high" in data and bool(data["reset_active_high"]) != high:
                raise fail(where, "port_polarity.reset", "high" if high else "low",
                           "against reset_active_high", "keep one of the two")
            d.reset_active_high = high
        d.port_polarity = polarity
    if "enables" in data:
        d.enables = _parse_enables(where, "enables", data["enables"], base)
    if "settle_clocks" in data:
        d.settle_clocks = want_int(where, "settle_clocks", data["settle_clocks"], 0)
    if "strict_controls" in data:
        d.strict_controls = want_bool(where, "strict_controls", data["strict_controls"])
    if "latency_samples" in data:
        d.latency_samples = want_int(where, "latency_samples", data["latency_samples"], 0)
    if "timing_parameters" in data:
        d.timing_parameters = _timing_parameters(where, data["timing_parameters"])
    if d.enables is not None and "in_enable" not in d.ports:
        raise fail(where, "enables", d.enables, "given but the design maps no in_enable port",
                   "map ports.in_enable to the design's clock-enable input, or drop enables")


# ---------------------------------------------------------------------------------------------- [[import]]


def _bug_variants(where: str, good: DesignConfig, bugs: Mapping[str, Any]) -> list[DesignConfig]:
    out = []
    for bug, body in bugs.items():
        w = f"{where}.bugs.{bug}"
        check_keys(w, want_table(w, "bug", body), _BUG_KEYS)
        if ("define" in body) == ("parameter" in body):
            raise ConfigError(f"{w}: give one of 'define' (the Verilog define that enables the bug) or 'parameter' "
                              "(the parameter or VHDL generic set to 1 to enable it)")
        switch = {"defines": {**good.defines, want_str(w, "define", body["define"]): 1}} if "define" in body else \
            {"parameters": {**good.parameters, want_str(w, "parameter", body["parameter"]): 1}}
        out.append(replace(
            good,
            name=f"{good.name}@{bug}",
            **switch,
            expect="fail",
            expect_kind=body.get("expect"),
            description=str(body.get("description", "")),
            needs=body.get("needs"),
            bug=bug,
        ))
    return out


def _manifest_designs(where: str, data: Mapping[str, Any], base: Path) -> tuple[Path, Mapping[str, Any], list[str]]:
    """The manifest an import names, its ``[designs.NAME]`` tables and the names it uses."""
    if "manifest" not in data:
        raise ConfigError(f"{where}: missing key 'manifest'; give the designs manifest path, "
                          "e.g. \"../sample_rtl/designs.toml\"")
    path = _existing_file(where, "manifest", data["manifest"], base)
    designs = read_toml(path).get("designs")
    if not isinstance(designs, Mapping) or not designs:
        raise ConfigError(f"{path}: no [designs.NAME] tables; is this a designs manifest?")
    use = want_str_list(where, "use", data["use"]) if "use" in data else list(designs)
    for u in use:
        if u not in designs:
            raise fail(where, "use", u, f"not a design of {path.name}", suggest(u, designs))
    return path, designs, use


def _parse_import(where: str, data: Mapping[str, Any], base: Path) -> list[DesignConfig]:
    check_keys(where, data, _IMPORT_KEYS)
    path, designs, use = _manifest_designs(where, data, base)
    bugs = _import_bugs(where, data.get("bugs", False), {u: designs[u].get("bugs", {}) for u in use})
    overrides = want_table(where, "set", data.get("set", {}))
    check_keys(f"{where}.set", overrides, _DESIGN_KEYS)
    out: list[DesignConfig] = []
    for u in use:
        mw = f"{path.name} [designs.{u}]"
        good = _parse_design(mw, u, designs[u], path.parent, manifest=True)
        for key, value in overrides.items():
            good = _apply_override(f"{where}.set", good, key, value)
        if bugs is True or bugs is False:
            out.append(good)
        if bugs:
            chosen = {k: v for k, v in designs[u].get("bugs", {}).items() if isinstance(bugs, bool) or k in bugs}
            out.extend(_bug_variants(mw, good, chosen))
    return out


def _import_bugs(where: str, value: Any, bugs_of: Mapping[str, Mapping[str, Any]]) -> bool | frozenset[str]:
    """``bugs``: true (good designs and every bug), false (good only), "only" (every bug, no good design)
    or a list of bug names (those bugs only). Returns a bool, or the set of bug names to take."""
    if value is True or value is False:
        return value
    if value == "only":
        return frozenset(name for bugs in bugs_of.values() for name in bugs)
    known = sorted({name for bugs in bugs_of.values() for name in bugs})
    if not isinstance(value, list):
        raise fail(where, "bugs", value, "not known", 'give true, false, "only" or a list of bug names')
    for name in want_str_list(where, "bugs", value):
        if name not in known:
            raise fail(where, "bugs", name, "not a seeded bug of the designs used", suggest(name, known))
    return frozenset(value)


_SETTABLE = ("simulators", "parameters", "defines", "tolerance_lsb", "clock_period_ns", "reset_cycles",
             "align", "timeout_clocks", "spec")


def _apply_override(where: str, d: DesignConfig, key: str, value: Any) -> DesignConfig:
    """An imported design with one key of the import's ``set`` table applied."""
    if key not in _SETTABLE:
        raise ConfigError(f"{where}: {key!r} cannot be set on imported designs; set one of {', '.join(_SETTABLE)}")
    if key == "simulators":
        return replace(d, simulators=_simulator_list(where, key, value))
    if key == "spec":
        return replace(d, spec_preset=want_str(where, key, value), spec_table=None, spec_file=None)
    if key in ("parameters", "defines"):
        return replace(d, **{key: {**getattr(d, key), **_dict(where, key, value)}})
    return replace(d, **{key: _DESIGN_FIELDS[key](where, key, value)})


# ---------------------------------------------------------------------------------------------- loading


def _add_design(where: str, designs: dict[str, DesignConfig], d: DesignConfig) -> None:
    if d.name in designs:
        raise ConfigError(f"{where}: design {d.name!r} is defined twice; rename one or drop it from 'use'")
    designs[d.name] = d


def _all_designs(name: str, data: Mapping[str, Any], base: Path) -> dict[str, DesignConfig]:
    """The imported designs, then the config's own ``[designs.NAME]``, in order."""
    designs: dict[str, DesignConfig] = {}
    imports = data.get("import", [])
    if isinstance(imports, Mapping):
        imports = [imports]
    if not isinstance(imports, list):
        raise fail(name, "import", imports, type_name(imports), "write [[import]] tables")
    for i, imp in enumerate(imports):
        for d in _parse_import(f"{name} [[import]] #{i + 1}", want_table(name, "import", imp), base):
            _add_design(name, designs, d)
    for dname, body in want_table(name, "designs", data.get("designs", {})).items():
        if "@" in dname or "/" in dname:
            raise ConfigError(f"{name} [designs.{dname}]: names may not contain '@' or '/'; rename the design")
        where = f"{name} [designs.{dname}]"
        _add_design(name, designs, _parse_design(where, dname, want_table(where, "design", body), base))
    if not designs:
        raise ConfigError(f"{name}: no designs; add [designs.NAME] tables or an [[import]] of a manifest")
    return designs


def config_from_dict(data: Mapping[str, Any], path: str | Path) -> Config:
    """Build a :class:`Config` from parsed TOML; ``path`` anchors relative paths and names errors."""
    p = Path(path).resolve()
    base, name = p.parent, p.name
    check_keys(name, data, _TOP_KEYS)
    run = _parse_run(f"{name} [run]", want_table(name, "run", data.get("run", {})), base)
    designs = _all_designs(name, data, base)
    if "stimulus" not in data:
        raise ConfigError(f"{name}: no [stimulus] table; add one with patterns = [...] or images = [...]")
    stimulus = _parse_stimulus(f"{name} [stimulus]", want_table(name, "stimulus", data["stimulus"]), base)
    return Config(path=p, run=run, designs=designs, stimulus=stimulus)


def load_config(path: str | Path) -> Config:
    """Read and check a config file (a vkit TOML, or a ``pyproject.toml`` with ``[tool.vkit]``).

    Raises:
        ConfigError: one line naming the file, the problem and the fix.
    """
    p = Path(path)
    data = read_toml(p)
    if p.name == "pyproject.toml":
        tool = data.get("tool", {}).get("vkit")
        if not isinstance(tool, dict):
            raise ConfigError(f"{p}: no [tool.vkit] table; add [tool.vkit.run], [tool.vkit.stimulus], ... or pass a vkit TOML")
        data = tool
    return config_from_dict(data, p)


# ---------------------------------------------------------------------------------------------- matrix


@dataclass(frozen=True)
class _Stimulus:
    """One stimulus of the matrix: an image or a pattern entry, with the axes it runs on."""

    kind: str
    name: str
    label: str
    options: tuple[tuple[str, Any], ...]
    seeds: tuple[int, ...]
    size: tuple[int, int] | None
    timings: tuple[tuple[str, dict[str, Any] | None], ...]
    stalls: tuple[Flow, ...]
    gaps: tuple[Flow, ...]
    backpressure: tuple[Flow, ...]
    designs: tuple[str, ...] = ("*",)

    def runs_on(self, design: str) -> bool:
        """True when ``design`` matches one of the globs and none of the ``!`` globs."""
        keep = [g for g in self.designs if not g.startswith("!")]
        drop = [g[1:] for g in self.designs if g.startswith("!")]
        wanted = not keep or any(fnmatch.fnmatchcase(design, g) for g in keep)
        return wanted and not any(fnmatch.fnmatchcase(design, g) for g in drop)


def _image_size(path: Path, max_pixels: int) -> tuple[int, int]:
    """``(width, height)`` through vkit.video.images (decompression-bomb guard, one-line errors)."""
    arr = load_image(path, mode="auto", convert=True, max_pixels=max_pixels, setting=IMAGE_PIXELS_SETTING)
    return int(arr.shape[1]), int(arr.shape[0])


def _stimuli(st: StimulusConfig) -> list[_Stimulus]:
    """The images, then the pattern entries, each with its own axes or the ``[stimulus]`` ones."""
    axes = dict(timings=tuple(st.timings), stalls=tuple(st.stalls), gaps=tuple(st.gaps),
                backpressure=tuple(st.backpressure), designs=tuple(st.designs))
    out = [_Stimulus("image", str(img), img.stem, (), tuple(st.seeds), _image_size(img, st.max_image_pixels), **axes)
           for img in st.images]
    for pe in st.patterns:
        own = {k: getattr(pe, k) for k in axes if getattr(pe, k) is not None}
        out.append(_Stimulus("pattern", pe.name, pe.id_label, pe.options, pe.seeds or tuple(st.seeds), None,
                             **{**axes, **own}))
    return out


def _design_simulators(d: DesignConfig, requested: list[str], command_line: bool = False) -> list[str]:
    """The simulators a design runs on: its own list (an override of ``[run]``) unless the command line
    names simulators, which win; always only those of its language and, when imported, its manifest's.

    Raises:
        ConfigError: the design declares ``supported_simulators`` and a simulator outside them is asked for.
    """
    wanted = requested if command_line or d.simulators is None else d.simulators
    if d.supported_declared and d.supported is not None:
        refused = [s for s in wanted if d.language in LANGUAGES[s] and s not in d.supported]
        if refused:
            raise ConfigError(
                f"design {d.name}: {', '.join(refused)} cannot take it (its supported_simulators = "
                f"{', '.join(d.supported)}); run it with --sim {d.supported[0]} or set its simulators = "
                f"{json.dumps(d.supported)}")
    return [s for s in wanted if d.language in LANGUAGES[s] and (d.supported is None or s in d.supported)]


def _why_none(d: DesignConfig, requested: list[str]) -> str:
    """Why a design runs on none of ``requested``: its language, or its manifest's list."""
    if not any(d.language in LANGUAGES[s] for s in requested):
        return f"{d.language} runs on {', '.join(s for s in LANGUAGES if d.language in LANGUAGES[s])}"
    return f"its manifest lists {', '.join(d.supported or [])}"


def dropped_designs(config: Config, simulators: list[str] | None) -> str | None:
    """One note naming the designs ``--sim`` leaves without a case, and why; None when none is left out."""
    if not simulators:
        return None
    requested = _simulator_list("command line", "--sim", simulators)
    left = [f"{d.name} ({_why_none(d, requested)})" for d in config.designs.values()
            if not _design_simulators(d, requested, command_line=True)]
    if not left:
        return None
    return f"note: --sim {' '.join(requested)} leaves out design(s) {'; '.join(left)}"


def _frame_timings(s: _Stimulus, size: tuple[int, int], family: str,
                   lanes: int = 1) -> list[tuple[str, dict[str, Any] | None, int, int]]:
    """``(timing label, timing dict or None, width, height)`` of each timing a stimulus runs on; ``tiny``
    with ``lanes`` pixels a clock is the tiny timing of the clocks, counted in pixels."""
    out = []
    for label, timing in s.timings:
        width, height = s.size or size
        if timing is None:
            timing, label = tiny_in_pixels(width, height, lanes).to_dict(), f"tiny{width}x{height}"
        elif lanes > 1 and label.startswith("tiny"):
            # vkit's own short-porch test timings keep their clock counts on a bus of several pixels a clock
            width, height = int(timing["h_active"]), int(timing["v_active"])
            timing = tiny_in_pixels(width, height, lanes).to_dict()
        else:
            width, height = int(timing["h_active"]), int(timing["v_active"])
            if s.size is not None and (s.size[0] < width or s.size[1] < height):
                raise ConfigError(f"image {s.name} is {s.size[0]}x{s.size[1]}, smaller than timing {label} "
                                  f"({width}x{height}); use a larger image or a smaller timing")
        if family == "stream":
            timing, label = None, f"{width}x{height}"
        out.append((label, timing, width, height))
    return out


def _flow_settings(s: _Stimulus, d: DesignConfig) -> list[tuple[str, Flow, Flow, Flow]]:
    """``(flow label, stalls, gaps, back-pressure)``: stalls for video (none for a design without a pixel-valid
    input: it cannot take one), gaps x back-pressure for stream."""
    if d.family == "video":
        stalls = s.stalls if "in_valid" in d.ports else (Flow(),)
        return [(f.label("stall"), f, Flow(), Flow()) for f in stalls]
    return [(f"{g.label('gap')}-{b.label('bp')}", Flow(), g, b) for g in s.gaps for b in s.backpressure]


def _enable_settings(config: Config, d: DesignConfig, seed: int) -> list[tuple[str, dict[str, Any] | None]]:
    """``(id suffix, enable pattern)`` of each enable setting: none for a design without ``in_enable``."""
    if d.family != "video" or "in_enable" not in d.ports:
        return [("", None)]
    out = []
    for entry in d.enables if d.enables is not None else config.stimulus.enables:
        full = {**entry, "seed": seed} if "duty" in entry and "seed" not in entry else dict(entry)
        out.append((f"-{EnablePattern.from_dict(full).label()}", full))
    return out


def _design_cases(config: Config, d: DesignConfig, sim: str, s: _Stimulus) -> Iterator[Case]:
    st = config.stimulus
    for seed in s.seeds:
        for (tlabel, timing, width, height), (elabel, enable) in itertools.product(
                _frame_timings(s, st.size, d.family, d.pixels_per_clock), _enable_settings(config, d, seed + config.run.seed)):
            check_case_size(f"{config.path.name} [stimulus]", st.frames, width, height)
            if d.family == "stream":  # a partly filled last beat needs the per-lane valid masks
                d.bus_layout().check_width(width, keep=all(r in d.ports for r in KEEP_ROLES))
            for flabel, stall, gap, bp in _flow_settings(s, d):
                yield Case(
                    id=f"{d.name}/{sim}/{s.label}-s{seed}/{tlabel}/{flabel}{elabel}", design=d, simulator=sim,
                    stimulus=s.kind, stimulus_name=s.name, stimulus_label=s.label, pattern_options=s.options,
                    seed=seed + config.run.seed, frames=st.frames, width=width, height=height, timing=timing,
                    timing_label=tlabel, stalls=stall, gaps=gap, backpressure=bp, blanking=st.blanking,
                    blanking_value=st.blanking_value, convert=st.convert, max_image_pixels=st.max_image_pixels,
                    enable=enable,
                )


def expand_matrix(config: Config, simulators: list[str] | None = None) -> list[Case]:
    """Every case of the config, sorted by id; ``Case.index`` is the position in that order.

    Args:
        config: a loaded config.
        simulators: replaces ``[run] simulators`` and the designs' own ``simulators`` (the command line
            wins); a design only runs on simulators of its language and, when imported, on those its
            manifest lists (:func:`dropped_designs` names the designs left out).

    Raises:
        ConfigError: the matrix is empty, or an image is smaller than a timing's active area.
    """
    requested = _simulator_list("command line", "--sim", simulators) if simulators else config.run.simulators
    stimuli = _stimuli(config.stimulus)
    cases: dict[str, Case] = {}
    skipped: list[str] = []
    for d in config.designs.values():
        sims = _design_simulators(d, requested, command_line=bool(simulators))
        if not sims:
            skipped.append(d.name)
        for sim in sims:
            for s in (s for s in stimuli if s.runs_on(d.name)):
                for case in _design_cases(config, d, sim, s):
                    cases.setdefault(case.id, case)
    if not cases:
        raise ConfigError(
            f"{config.path.name}: the matrix is empty (no design runs on {', '.join(requested)}; "
            f"designs: {', '.join(skipped) or 'none'}); pick simulators the designs support"
        )
    ordered = sorted(cases.values(), key=lambda c: c.id)
    return [replace(c, index=i) for i, c in enumerate(ordered)]


def select_cases(cases: list[Case], only: str | list[str] | None) -> list[Case]:
    """Cases whose id matches ``only``: a glob (``*``, ``?``, ``[``) or else a substring; several = any."""
    if not only:
        return list(cases)
    pats = [only] if isinstance(only, str) else list(only)

    def hit(cid: str) -> bool:
        return any(fnmatch.fnmatchcase(cid, p) if glob.has_magic(p) else p in cid for p in pats)

    exact = [c for c in cases if c.id in pats]
    if len(exact) == len(pats):  # every pattern is a whole case id: exactly those cases (a rerun command)
        return exact
    chosen = [c for c in cases if hit(c.id)]
    if not chosen:
        raise ConfigError(f"--only {' '.join(pats)} matches none of the {len(cases)} cases; e.g. {cases[0].id!r}")
    return chosen


def parse_shard(text: str) -> tuple[int, int]:
    """``"K/N"`` -> ``(K, N)`` with 1 <= K <= N."""
    m = re.fullmatch(r"\s*(\d+)\s*/\s*(\d+)\s*", str(text))
    if not m or not 1 <= int(m.group(1)) <= int(m.group(2)):
        raise ConfigError(f"shard {text!r}: give K/N with 1 <= K <= N, e.g. --shard 1/4")
    return int(m.group(1)), int(m.group(2))


SHARD_AUTO = "auto"
"""The ``--shard`` value that reads the shard from the array-job variables of :data:`SHARD_VARIABLES`."""

SHARD_VARIABLES: tuple[tuple[str, str, str, str], ...] = (
    ("vkit", "VKIT_SHARD", "", "K/N as for --shard (set it yourself, e.g. in a CI matrix)"),
    ("Slurm job array", "SLURM_ARRAY_TASK_ID", "SLURM_ARRAY_TASK_COUNT",
     "index from SLURM_ARRAY_TASK_MIN in steps of SLURM_ARRAY_TASK_STEP (default 1)"),
    ("Grid Engine array job", "SGE_TASK_ID", "SGE_TASK_LAST",
     "index from SGE_TASK_FIRST to SGE_TASK_LAST in steps of SGE_TASK_STEPSIZE (default 1)"),
    ("GitLab CI parallel job", "CI_NODE_INDEX", "CI_NODE_TOTAL", "index 1..total"),
    ("CircleCI parallelism", "CIRCLE_NODE_INDEX", "CIRCLE_NODE_TOTAL", "index 0..total-1"),
    ("Buildkite parallel job", "BUILDKITE_PARALLEL_JOB", "BUILDKITE_PARALLEL_JOB_COUNT", "index 0..count-1"),
)
"""Where ``--shard auto`` looks, first match wins: (scheduler, index variable, count variable, meaning).
The variable names and their numbering are from memory of each scheduler's documentation."""


def _env_int(env: Mapping[str, str], name: str, default: int | None = None) -> int:
    text = env.get(name, "")
    if not text.strip():
        if default is None:
            raise ConfigError(f"shard auto: {name} is not set; the array job sets it, or give --shard K/N")
        return default
    try:
        return int(text)
    except ValueError:
        raise ConfigError(f"shard auto: {name} = {text!r} is not a whole number; give --shard K/N") from None


def _slot(index: int, first: int, step: int, count: int, where: str) -> tuple[int, int]:
    """``(K, N)`` of array element ``index`` among ``count`` elements ``first, first + step, ...``."""
    k, rest = divmod(index - first, max(1, step))
    if rest or not 0 <= k < count:
        raise ConfigError(f"shard auto: {where} does not fall on the array's steps; give --shard K/N")
    return k + 1, count


def shard_from_environment(env: Mapping[str, str] | None = None) -> tuple[tuple[int, int], str]:
    """The shard ``(K, N)`` an array job or CI matrix gives this process, and the scheduler it came from.

    Reads the first scheduler of :data:`SHARD_VARIABLES` whose index variable is set in ``env``
    (default ``os.environ``).

    Raises:
        ConfigError: none is set, or the values do not make a shard (named, with the fix).
    """
    env = os.environ if env is None else env
    for name, index_var, count_var, _ in SHARD_VARIABLES:
        if not env.get(index_var, "").strip():
            continue
        if index_var == "VKIT_SHARD":
            return parse_shard(env[index_var]), name
        i = _env_int(env, index_var)
        where = f"{index_var} = {i}"
        if index_var == "SLURM_ARRAY_TASK_ID":
            shard = _slot(i, _env_int(env, "SLURM_ARRAY_TASK_MIN", 0), _env_int(env, "SLURM_ARRAY_TASK_STEP", 1),
                          _env_int(env, count_var), where)
        elif index_var == "SGE_TASK_ID":
            first, step = _env_int(env, "SGE_TASK_FIRST", 1), _env_int(env, "SGE_TASK_STEPSIZE", 1)
            shard = _slot(i, first, step, (_env_int(env, count_var) - first) // max(1, step) + 1, where)
        else:
            shard = _slot(i, 1 if index_var == "CI_NODE_INDEX" else 0, 1, _env_int(env, count_var), where)
        return shard, name
    looked = ", ".join(index for _, index, _, _ in SHARD_VARIABLES)
    raise ConfigError(f"shard auto: no array-job index is set (looked for {looked}); run inside an array job "
                      "or CI matrix, or give --shard K/N")


def shard_cases(cases: list[Case], shard: tuple[int, int] | str | None) -> list[Case]:
    """The cases of shard ``K/N``: case ``i`` of the sorted list goes to shard ``i % N + 1``. ``"auto"``
    takes K and N from the array job's environment (:func:`shard_from_environment`)."""
    if shard is None:
        return list(cases)
    if shard == SHARD_AUTO:
        shard = shard_from_environment()[0]
    k, n = parse_shard(shard) if isinstance(shard, str) else shard
    if not 1 <= k <= n:
        raise ConfigError(f"shard {k}/{n}: give K/N with 1 <= K <= N")
    return [c for c in sorted(cases, key=lambda c: c.id) if (c.index % n) + 1 == k]
