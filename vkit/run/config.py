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

import difflib
import glob
import importlib.resources
import os
import re
import sys
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any, Mapping

from vkit.core.errors import ConfigError

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
    "select_cases",
    "shard_cases",
    "parse_shard",
    "read_toml",
]

_RUN_KEYS = ("out_dir", "simulators", "jobs", "seed", "timeout_s", "max_listed", "cache_dir", "coverage_floor",
             "waves", "pictures", "path")
_WAVE_MODES = ("failing", "all", "off")
_PICTURE_MODES = ("failing", "all")
_PATHS = ("clock", "fast", "native")
_STIMULUS_KEYS = (
    "images", "patterns", "size", "frames", "timings", "stalls", "backpressure", "gaps", "blanking",
    "blanking_value", "seeds", "convert",
)
_DESIGN_KEYS = (
    "top", "sources", "language", "family", "pixel_format", "parameters", "file_parameters",
    "frame_parameters", "defines", "spec", "spec_file", "ports", "reset_active_high", "reset_cycles",
    "clock_period_ns", "latency_clocks", "latency_timing", "pipeline_clocks", "tolerance_lsb",
    "simulators", "expect", "description", "include_dirs", "build_args", "align", "timeout_clocks",
)
_MANIFEST_DESIGN_KEYS = (
    "top", "sources", "language", "family", "spec", "pixel_format", "parameters", "file_parameters",
    "frame_parameters", "ports", "pipeline_clocks", "latency_clocks", "latency_timing", "simulators",
    "bugs", "defines", "description",
)
_BUG_KEYS = ("define", "description", "expect", "needs")
_IMPORT_KEYS = ("manifest", "use", "bugs", "set")
_TOP_KEYS = ("run", "designs", "stimulus", "import")
_LANG_BY_EXT = {".v": "verilog", ".sv": "verilog", ".vh": "verilog", ".vhd": "vhdl", ".vhdl": "vhdl"}
_FAMILIES = ("video", "stream")
_PIXEL_FORMATS = ("gray8", "rgb888")
_DEFAULT_MAX_LENGTH = 4
_PACKAGE_PREFIX = "package:"
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

    ``seeds``, ``timings``, ``stalls``, ``gaps`` and ``backpressure`` given here replace the
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
        pictures: ``"failing"`` (PNGs for failing frames only) or ``"all"`` (every frame, passing too).
        path: ``"clock"`` (cocotb drives every clock), ``"fast"`` (a generated HDL harness plays and
            captures whole runs; same verdicts, far fewer Python wake-ups) or ``"native"`` (that harness
            as a plain executable without cocotb; Icarus and Verilator).
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
    path: str = "clock"


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
        convert: allow the lossy image conversions of :func:`vkit.video.images.load_image` (16-bit to 8-bit,
            alpha dropped, colour to luma, gray to RGB); False (default) makes each an error.
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


@dataclass
class DesignConfig:
    """One design under test: how to build it and what it should compute.

    Attributes:
        name: the design's name in case ids (``NAME`` or ``NAME@bug`` for a seeded-bug variant).
        top: top-level module / entity.
        sources: absolute source paths in compile order.
        language: ``"verilog"`` or ``"vhdl"``.
        family: ``"video"`` or ``"stream"``.
        pixel_format: input format, ``"gray8"`` or ``"rgb888"``.
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
        supported: simulators a manifest says the design runs on (a filter), or None.
        expect: ``"pass"`` or ``"fail"`` (reported only; the verdict is always the design's own).
        expect_kind: failure class a seeded bug should be diagnosed as, or None.
        description, needs, bug: what the variant is, what stimulus shows it, the bug's name.
        include_dirs, build_args: extra build inputs.
        align: scoreboard alignment, ``"exact"`` or ``"auto"``.
        timeout_clocks: simulation timeout in clocks, or None for the default.
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
    expect: str = "pass"
    expect_kind: str | None = None
    description: str = ""
    needs: str | None = None
    bug: str | None = None
    include_dirs: list[Path] = field(default_factory=list)
    build_args: list[str] = field(default_factory=list)
    align: str = "exact"
    timeout_clocks: int | None = None

    def pipeline_spec(self) -> Any:
        """The :class:`vkit.model.pipeline.PipelineSpec` this design implements."""
        from vkit.model import pipeline

        if self.spec_preset is not None:
            return pipeline.preset(self.spec_preset)
        if self.spec_file is not None:
            return pipeline.PipelineSpec.from_toml(self.spec_file)
        return pipeline.PipelineSpec.from_dict(self.spec_table or {})

    def build_parameters(self, width: int, height: int) -> dict[str, Any]:
        """Parameters for a build at this frame size, file parameters as the language wants them."""
        params = dict(self.parameters)
        for key, path in self.file_parameters.items():
            params[key] = f'"{path}"' if self.language == "verilog" else str(path)
        for what, pname in self.frame_parameters.items():
            params[pname] = height if what == "height" else width
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
        blanking, blanking_value: blanking data.
        index: position in the sorted full matrix (0-based), the basis of sharding.
        convert: image conversions allowed (``[stimulus] convert``).
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

    @property
    def steady(self) -> bool:
        """True when no stall, gap or back-pressure is inserted."""
        return not (self.stalls.active or self.gaps.active or self.backpressure.active)

    def declared_latency_clocks(self) -> int | None:
        """The latency the design declares for this case's timing, or None when it declares none here.

        Only steady cases (no stalls, gaps or back-pressure) have a declared latency. On the manifest's
        ``latency_timing`` it is ``latency_clocks``; elsewhere it is derived from ``pipeline_clocks``
        as the sample designs document: ``h_total + 1 + pipeline_clocks`` (video) or
        ``width + 2 + pipeline_clocks`` (stream).
        """
        d = self.design
        if not self.steady:
            return None
        here = self.timing_label if self.design.family == "video" else f"tiny{self.width}x{self.height}"
        if d.latency_clocks is not None and (d.latency_timing is None or d.latency_timing == here):
            return d.latency_clocks
        if d.pipeline_clocks is None:
            return None
        if d.family == "video" and self.timing is not None:
            from vkit.video.timing import VideoTiming

            return VideoTiming.from_dict(self.timing).h_total + 1 + d.pipeline_clocks
        if d.family == "stream":
            return self.width + 2 + d.pipeline_clocks
        return None

    def seeds(self) -> dict[str, int]:
        """Seeds that reproduce this case (name -> value)."""
        out = {"case": self.seed}
        if self.stimulus == "pattern":
            out["first_frame_pattern"] = self.seed
        return out


# ---------------------------------------------------------------------------------------------- helpers


def _suggest(word: str, choices: tuple[str, ...] | list[str]) -> str:
    close = difflib.get_close_matches(word, list(choices), n=1, cutoff=0.5)
    if close:
        return f"did you mean {close[0]!r}?"
    return f"valid keys are {', '.join(choices)}"


def _check_keys(where: str, table: Mapping[str, Any], allowed: tuple[str, ...]) -> None:
    for key in table:
        if key not in allowed:
            raise ConfigError(f"{where}: unknown key {key!r}; {_suggest(key, allowed)}")


def _type_name(value: Any) -> str:
    return {str: "a string", int: "an integer", float: "a number", bool: "true/false", list: "a list",
            dict: "a table"}.get(type(value), type(value).__name__)


def _want(where: str, key: str, value: Any, kind: type | tuple[type, ...], fix: str) -> Any:
    kinds = kind if isinstance(kind, tuple) else (kind,)
    ok = isinstance(value, kinds) and not (isinstance(value, bool) and bool not in kinds)
    if not ok:
        raise ConfigError(f"{where}: {key} = {value!r} is {_type_name(value)}; {fix}")
    return value


def _int(where: str, key: str, value: Any, lo: int | None = None) -> int:
    _want(where, key, value, int, f"give an integer{'' if lo is None else f' >= {lo}'}")
    if lo is not None and value < lo:
        raise ConfigError(f"{where}: {key} = {value}; give an integer >= {lo}")
    return int(value)


def _str_list(where: str, key: str, value: Any) -> list[str]:
    if isinstance(value, str):
        return [value]
    _want(where, key, value, list, "give a list of strings")
    for v in value:
        _want(where, key, v, str, "give a list of strings")
    return list(value)


def _resolve(base: Path, text: str) -> Path:
    """A path from a config: ``package:vkit.sample_rtl/file`` or relative to ``base``."""
    if text.startswith(_PACKAGE_PREFIX):
        pkg, _, rest = text[len(_PACKAGE_PREFIX):].partition("/")
        pkg = _PACKAGE_RENAMED.get(pkg, pkg)
        try:
            root = Path(str(importlib.resources.files(pkg)))
        except ModuleNotFoundError:
            raise ConfigError(f"path {text!r}: package {pkg!r} is not installed; fix the package name") from None
        return (root / rest).resolve()
    p = Path(os.path.expanduser(text))
    return (p if p.is_absolute() else base / p).resolve()


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


# ---------------------------------------------------------------------------------------------- sections


def _parse_run(where: str, data: Mapping[str, Any], base: Path) -> RunSettings:
    _check_keys(where, data, _RUN_KEYS)
    out = RunSettings(out_dir=(base / "vkit-out").resolve())
    if "out_dir" in data:
        out.out_dir = _resolve(base, _want(where, "out_dir", data["out_dir"], str, "give a folder path"))
    if "simulators" in data:
        out.simulators = _simulator_list(where, data["simulators"])
    if "jobs" in data:
        out.jobs = _int(where, "jobs", data["jobs"], 1)
    if "seed" in data:
        out.seed = _int(where, "seed", data["seed"], 0)
    if "timeout_s" in data:
        v = _want(where, "timeout_s", data["timeout_s"], (int, float), "give seconds as a number > 0")
        if v <= 0:
            raise ConfigError(f"{where}: timeout_s = {v}; give seconds as a number > 0")
        out.timeout_s = float(v)
    if "max_listed" in data:
        out.max_listed = _int(where, "max_listed", data["max_listed"], 0)
    if "cache_dir" in data:
        out.cache_dir = _resolve(base, _want(where, "cache_dir", data["cache_dir"], str, "give a folder path"))
    if "coverage_floor" in data:
        v = _want(where, "coverage_floor", data["coverage_floor"], (int, float), "give a share 0.0..1.0")
        if not 0 <= v <= 1:
            raise ConfigError(f"{where}: coverage_floor = {v}; give a share 0.0..1.0")
        out.coverage_floor = float(v)
    if "waves" in data:
        v = _want(where, "waves", data["waves"], str, f"give one of {', '.join(_WAVE_MODES)}")
        if v not in _WAVE_MODES:
            raise ConfigError(f"{where}: waves = {v!r}; {_suggest(v, _WAVE_MODES)}")
        out.waves = v
    if "pictures" in data:
        v = _want(where, "pictures", data["pictures"], str, f"give one of {', '.join(_PICTURE_MODES)}")
        if v not in _PICTURE_MODES:
            raise ConfigError(f"{where}: pictures = {v!r}; {_suggest(v, _PICTURE_MODES)}")
        out.pictures = v
    if "path" in data:
        v = _want(where, "path", data["path"], str, f"give one of {', '.join(_PATHS)}")
        if v not in _PATHS:
            raise ConfigError(f"{where}: path = {v!r}; {_suggest(v, _PATHS)}")
        out.path = v
    return out


def _simulator_list(where: str, value: Any) -> list[str]:
    from vkit.sim.simulators import SIMULATORS

    names = _str_list(where, "simulators", value)
    for n in names:
        if n not in SIMULATORS:
            close = difflib.get_close_matches(n, list(SIMULATORS), n=1, cutoff=0.5)
            hint = f"did you mean {close[0]!r}? " if close else ""
            raise ConfigError(f"{where}: unknown simulator {n!r}; {hint}vkit drives {', '.join(SIMULATORS)}")
    if not names:
        raise ConfigError(f"{where}: simulators is empty; name at least one of {', '.join(SIMULATORS)}")
    return names


def _parse_flow(where: str, key: str, value: Any) -> Flow:
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        if not 0 <= value <= 1:
            raise ConfigError(f"{where}: {key} entry {value}; a bare number is a probability 0.0..1.0")
        return Flow(float(value), _DEFAULT_MAX_LENGTH)
    if isinstance(value, dict):
        _check_keys(f"{where} {key} entry", value, ("probability", "max_length"))
        p = value.get("probability", 0.0)
        _want(where, f"{key}.probability", p, (int, float), "give a probability 0.0..1.0")
        if not 0 <= p <= 1:
            raise ConfigError(f"{where}: {key}.probability = {p}; give a probability 0.0..1.0")
        m = _int(where, f"{key}.max_length", value.get("max_length", _DEFAULT_MAX_LENGTH), 1)
        return Flow(float(p), m)
    raise ConfigError(
        f"{where}: {key} entry {value!r} is {_type_name(value)}; give a probability (0.1) or "
        "{ probability = 0.1, max_length = 4 }"
    )


def _parse_flows(where: str, key: str, value: Any) -> list[Flow]:
    items = value if isinstance(value, list) else [value]
    flows = [_parse_flow(where, key, v) for v in items]
    if not flows:
        raise ConfigError(f"{where}: {key} is empty; give at least one entry (0 = none)")
    uniq: list[Flow] = []
    for f in flows:
        if f not in uniq:
            uniq.append(f)
    return uniq


def _parse_stimulus(where: str, data: Mapping[str, Any], base: Path) -> StimulusConfig:
    from vkit.video.patterns import PATTERNS

    _check_keys(where, data, _STIMULUS_KEYS)
    st = StimulusConfig()
    for text in _str_list(where, "images", data.get("images", [])):
        pattern = str(_resolve(base, text))
        hits = sorted(glob.glob(pattern)) if glob.has_magic(pattern) else ([pattern] if Path(pattern).exists() else [])
        if not hits:
            raise ConfigError(f"{where}: images entry {text!r} matches no file (looked for {pattern}); fix the path or glob")
        st.images.extend(Path(h) for h in hits)
    for item in data.get("patterns", []) if isinstance(data.get("patterns", []), list) else [data["patterns"]]:
        if isinstance(item, str):
            entry = PatternEntry(item)
        elif isinstance(item, dict):
            if "name" not in item:
                raise ConfigError(f"{where}: a patterns table needs a name, e.g. {{ name = \"conveyor\", seeds = [1, 2] }}")
            name = _want(where, "patterns.name", item["name"], str, "give a pattern name")
            seeds = item.get("seeds")
            if seeds is not None:
                _want(where, "patterns.seeds", seeds, list, "give a list of integers")
                seeds = tuple(_int(where, "patterns.seeds", s, 0) for s in seeds)
            label = _want(where, "patterns.label", item.get("label", ""), str, "give a short name")
            own = ("name", "seeds", "label", "timings", "stalls", "gaps", "backpressure")
            options = tuple(sorted((k, v) for k, v in item.items() if k not in own))
            flows = {k: tuple(_parse_flows(where, f"patterns.{k}", item[k])) for k in ("stalls", "gaps", "backpressure") if k in item}
            timings = tuple(_parse_timings(where, item["timings"])) if "timings" in item else None
            entry = PatternEntry(name, options, seeds, label, timings, **flows)
        else:
            raise ConfigError(f"{where}: patterns entry {item!r} is {_type_name(item)}; give a name or a table")
        if entry.name not in PATTERNS:
            close = difflib.get_close_matches(entry.name, list(PATTERNS), n=1)
            hint = f"did you mean {close[0]!r}?" if close else f"known patterns are {', '.join(PATTERNS)}"
            raise ConfigError(f"{where}: unknown pattern {entry.name!r}; {hint}")
        st.patterns.append(entry)
    if not st.images and not st.patterns:
        raise ConfigError(f"{where}: no stimulus; give images = [...] or patterns = [...]")
    if "size" in data:
        v = data["size"]
        if not (isinstance(v, list) and len(v) == 2 and all(isinstance(x, int) and not isinstance(x, bool) and x >= 2 for x in v)):
            raise ConfigError(f"{where}: size = {v!r}; give [width, height] in pixels, each >= 2, e.g. [32, 24]")
        st.size = (v[0], v[1])
    if "frames" in data:
        st.frames = _int(where, "frames", data["frames"], 1)
    if "timings" in data:
        st.timings = _parse_timings(where, data["timings"])
    for key in ("stalls", "backpressure", "gaps"):
        if key in data:
            setattr(st, key, _parse_flows(where, key, data[key]))
    if "blanking" in data:
        v = _want(where, "blanking", data["blanking"], str, "give \"random\" or \"constant\"")
        if v not in ("random", "constant"):
            raise ConfigError(f"{where}: blanking = {v!r}; give \"random\" or \"constant\"")
        st.blanking = v
    if "blanking_value" in data:
        st.blanking_value = _int(where, "blanking_value", data["blanking_value"], 0)
    if "convert" in data:
        st.convert = _want(where, "convert", data["convert"], bool, "give true or false")
    if "seeds" in data:
        seeds = data["seeds"] if isinstance(data["seeds"], list) else [data["seeds"]]
        st.seeds = [_int(where, "seeds", s, 0) for s in seeds]
        if not st.seeds:
            raise ConfigError(f"{where}: seeds is empty; give at least one seed, e.g. [1]")
    return st


def _parse_timings(where: str, value: Any) -> list[tuple[str, dict[str, Any] | None]]:
    from vkit.video.timing import PRESETS, VideoTiming

    items = value if isinstance(value, list) else [value]
    out: list[tuple[str, dict[str, Any] | None]] = []
    for item in items:
        if isinstance(item, str):
            if item == "tiny":
                out.append(("tiny", None))
                continue
            if item not in PRESETS:
                close = difflib.get_close_matches(item, list(PRESETS), n=1)
                hint = f"did you mean {close[0]!r}?" if close else f"known presets are tiny, {', '.join(PRESETS)}"
                raise ConfigError(f"{where}: unknown timing {item!r}; {hint}")
            out.append((item, PRESETS[item].to_dict()))
        elif isinstance(item, dict):
            t = VideoTiming.from_dict(item)
            label = t.name if t.name and t.name != "custom" else f"custom{t.h_active}x{t.v_active}t{t.h_total}x{t.v_total}"
            out.append((label, t.to_dict()))
        else:
            raise ConfigError(f"{where}: timings entry {item!r} is {_type_name(item)}; give a preset name or a table")
    if not out:
        raise ConfigError(f"{where}: timings is empty; give at least one, e.g. [\"tiny\"]")
    return out


def _parse_design(where: str, name: str, data: Mapping[str, Any], base: Path, *, manifest: bool = False) -> DesignConfig:
    allowed = _MANIFEST_DESIGN_KEYS if manifest else _DESIGN_KEYS
    _check_keys(where, {k: v for k, v in data.items() if not (manifest and k == "bugs")}, allowed)
    for key in ("top", "sources", "ports"):
        if key not in data:
            raise ConfigError(f"{where}: missing key {key!r}; every design needs top, sources and ports")
    top = _want(where, "top", data["top"], str, "give the top-level module name")
    sources: list[Path] = []
    for text in _str_list(where, "sources", data["sources"]):
        pattern = str(_resolve(base, text))
        hits = sorted(glob.glob(pattern)) if glob.has_magic(pattern) else ([pattern] if Path(pattern).is_file() else [])
        if not hits:
            raise ConfigError(f"{where}: source {text!r} not found (looked for {pattern}); fix the path relative to {base}")
        sources.extend(Path(h) for h in hits)
    if "language" in data:
        language = _want(where, "language", data["language"], str, "give \"verilog\" or \"vhdl\"")
        if language not in ("verilog", "vhdl"):
            raise ConfigError(f"{where}: language = {language!r}; give \"verilog\" or \"vhdl\"")
    else:
        langs = {_LANG_BY_EXT.get(s.suffix.lower()) for s in sources}
        if None in langs or len(langs) != 1:
            raise ConfigError(
                f"{where}: cannot tell the language from the source extensions "
                f"({', '.join(sorted({s.suffix for s in sources}))}); add language = \"verilog\" or \"vhdl\""
            )
        language = langs.pop()
    family = _want(where, "family", data.get("family", "video"), str, "give \"video\" or \"stream\"")
    if family not in _FAMILIES:
        raise ConfigError(f"{where}: family = {family!r}; give \"video\" or \"stream\"")
    pixel_format = _want(where, "pixel_format", data.get("pixel_format", "gray8"), str, "give \"gray8\" or \"rgb888\"")
    if pixel_format not in _PIXEL_FORMATS:
        raise ConfigError(f"{where}: pixel_format = {pixel_format!r}; give \"gray8\" or \"rgb888\"")
    ports = _want(where, "ports", data["ports"], dict, "give a table role -> port name")
    for role, port in ports.items():
        _want(where, f"ports.{role}", port, str, "give the port name as a string")
    d = DesignConfig(name=name, top=top, sources=sources, language=language, family=family,
                     pixel_format=pixel_format, ports=dict(ports))
    for key in ("parameters", "defines"):
        if key in data:
            setattr(d, key, dict(_want(where, key, data[key], dict, "give a table NAME = value")))
    if "file_parameters" in data:
        for pname, text in _want(where, "file_parameters", data["file_parameters"], dict, "give a table NAME = \"file\"").items():
            path = _resolve(base, _want(where, f"file_parameters.{pname}", text, str, "give a file path"))
            if not path.is_file():
                raise ConfigError(f"{where}: file_parameters.{pname} = {text!r} not found (looked for {path}); fix the path")
            d.file_parameters[pname] = path
    if "frame_parameters" in data:
        fp = _want(where, "frame_parameters", data["frame_parameters"], dict, "give a table height/width -> parameter")
        for what, pname in fp.items():
            if what not in ("height", "width"):
                raise ConfigError(f"{where}: frame_parameters key {what!r}; use \"height\" or \"width\"")
            d.frame_parameters[what] = _want(where, f"frame_parameters.{what}", pname, str, "give the parameter name")
    specs = [k for k in ("spec", "spec_file") if k in data]
    if len(specs) > 1:
        raise ConfigError(f"{where}: both spec and spec_file given; keep one")
    if "spec" in data:
        v = data["spec"]
        if isinstance(v, str):
            d.spec_preset = v
        elif isinstance(v, dict):
            d.spec_table = dict(v)
        else:
            raise ConfigError(f"{where}: spec = {v!r}; give a preset name or a [designs.{name}.spec] table")
    elif "spec_file" in data:
        p = _resolve(base, _want(where, "spec_file", data["spec_file"], str, "give a TOML file path"))
        if not p.is_file():
            raise ConfigError(f"{where}: spec_file {data['spec_file']!r} not found (looked for {p}); fix the path")
        d.spec_file = p
    else:
        raise ConfigError(f"{where}: no pipeline spec; add spec = \"edge\" (a preset), spec_file = \"...\" or a [designs.{name}.spec] table")
    if "reset_active_high" in data:
        d.reset_active_high = _want(where, "reset_active_high", data["reset_active_high"], bool, "give true or false")
    if "reset_cycles" in data:
        d.reset_cycles = _int(where, "reset_cycles", data["reset_cycles"], 1)
    if "clock_period_ns" in data:
        v = _want(where, "clock_period_ns", data["clock_period_ns"], (int, float), "give a period in ns > 0")
        if v <= 0:
            raise ConfigError(f"{where}: clock_period_ns = {v}; give a period in ns > 0")
        d.clock_period_ns = float(v)
    for key in ("latency_clocks", "pipeline_clocks", "timeout_clocks"):
        if key in data:
            setattr(d, key, _int(where, key, data[key], 0 if key != "timeout_clocks" else 1))
    if "latency_timing" in data:
        d.latency_timing = _want(where, "latency_timing", data["latency_timing"], str, "give a timing preset name")
    if "tolerance_lsb" in data:
        d.tolerance_lsb = _int(where, "tolerance_lsb", data["tolerance_lsb"], 0)
    if "simulators" in data:
        sims = _simulator_list(where, data["simulators"])
        if manifest:
            d.supported = sims
        else:
            d.simulators = sims
    if "expect" in data:
        v = _want(where, "expect", data["expect"], str, "give \"pass\" or \"fail\"")
        if v not in ("pass", "fail"):
            raise ConfigError(f"{where}: expect = {v!r}; give \"pass\" or \"fail\"")
        d.expect = v
    if "description" in data:
        d.description = _want(where, "description", data["description"], str, "give a sentence")
    if "include_dirs" in data:
        d.include_dirs = [_resolve(base, t) for t in _str_list(where, "include_dirs", data["include_dirs"])]
    if "build_args" in data:
        d.build_args = _str_list(where, "build_args", data["build_args"])
    if "align" in data:
        v = _want(where, "align", data["align"], str, "give \"exact\" or \"auto\"")
        if v not in ("exact", "auto"):
            raise ConfigError(f"{where}: align = {v!r}; give \"exact\" or \"auto\"")
        d.align = v
    if d.language == "vhdl" and d.defines:
        raise ConfigError(f"{where}: defines are Verilog only and this design is VHDL; use parameters (generics)")
    return d


def _bug_variants(where: str, good: DesignConfig, bugs: Mapping[str, Any]) -> list[DesignConfig]:
    out = []
    for bug, body in bugs.items():
        w = f"{where}.bugs.{bug}"
        _want(w, "bug", body, dict, "give a table with define, description, expect")
        _check_keys(w, body, _BUG_KEYS)
        if "define" not in body:
            raise ConfigError(f"{w}: missing key 'define'; name the Verilog define that enables the bug")
        define = _want(w, "define", body["define"], str, "give the define name")
        out.append(replace(
            good,
            name=f"{good.name}@{bug}",
            defines={**good.defines, define: 1},
            expect="fail",
            expect_kind=body.get("expect"),
            description=str(body.get("description", "")),
            needs=body.get("needs"),
            bug=bug,
        ))
    return out


def _parse_import(where: str, data: Mapping[str, Any], base: Path) -> list[DesignConfig]:
    _check_keys(where, data, _IMPORT_KEYS)
    if "manifest" not in data:
        raise ConfigError(f"{where}: missing key 'manifest'; give the designs manifest path, e.g. \"../sample_rtl/designs.toml\"")
    path = _resolve(base, _want(where, "manifest", data["manifest"], str, "give a file path"))
    if not path.is_file():
        raise ConfigError(f"{where}: manifest {data['manifest']!r} not found (looked for {path}); fix the path")
    body = read_toml(path)
    designs = body.get("designs")
    if not isinstance(designs, dict) or not designs:
        raise ConfigError(f"{path}: no [designs.NAME] tables; is this a designs manifest?")
    use = _str_list(where, "use", data["use"]) if "use" in data else list(designs)
    for u in use:
        if u not in designs:
            raise ConfigError(f"{where}: design {u!r} is not in {path.name}; {_suggest(u, list(designs))}")
    bugs = data.get("bugs", False)
    if bugs not in (True, False, "only"):
        raise ConfigError(f"{where}: bugs = {bugs!r}; give true, false or \"only\"")
    overrides = _want(where, "set", data.get("set", {}), dict, "give a table of design keys")
    _check_keys(f"{where}.set", overrides, _DESIGN_KEYS)
    out: list[DesignConfig] = []
    for u in use:
        mw = f"{path.name} [designs.{u}]"
        good = _parse_design(mw, u, designs[u], path.parent, manifest=True)
        for key, value in overrides.items():
            good = _apply_override(f"{where}.set", good, key, value, base)
        variants = _bug_variants(mw, good, designs[u].get("bugs", {})) if bugs else []
        if bugs != "only":
            out.append(good)
        out.extend(variants)
    return out


_SETTABLE = ("simulators", "parameters", "defines", "tolerance_lsb", "clock_period_ns", "reset_cycles",
              "align", "timeout_clocks", "spec")


def _apply_override(where: str, d: DesignConfig, key: str, value: Any, base: Path) -> DesignConfig:
    if key not in _SETTABLE:
        raise ConfigError(f"{where}: {key!r} cannot be set on imported designs; set one of {', '.join(_SETTABLE)}")
    if key == "simulators":
        return replace(d, simulators=_simulator_list(where, value))
    if key in ("parameters", "defines"):
        return replace(d, **{key: {**getattr(d, key), **_want(where, key, value, dict, "give a table")}})
    if key == "spec":
        return replace(d, spec_preset=_want(where, "spec", value, str, "give a preset name"), spec_table=None, spec_file=None)
    if key == "align":
        if value not in ("exact", "auto"):
            raise ConfigError(f"{where}: align = {value!r}; give \"exact\" or \"auto\"")
        return replace(d, align=value)
    if key == "clock_period_ns":
        v = _want(where, key, value, (int, float), "give a period in ns > 0")
        if v <= 0:
            raise ConfigError(f"{where}: clock_period_ns = {v}; give a period in ns > 0")
        return replace(d, clock_period_ns=float(v))
    return replace(d, **{key: _int(where, key, value, 0 if key == "tolerance_lsb" else 1)})


# ---------------------------------------------------------------------------------------------- loading


def config_from_dict(data: Mapping[str, Any], path: str | Path) -> Config:
    """Build a :class:`Config` from parsed TOML; ``path`` anchors relative paths and names errors."""
    p = Path(path).resolve()
    base = p.parent
    name = p.name
    _check_keys(name, data, _TOP_KEYS)
    run = _parse_run(f"{name} [run]", _want(name, "run", data.get("run", {}), dict, "make [run] a table"), base)
    designs: dict[str, DesignConfig] = {}
    imports = data.get("import", [])
    if isinstance(imports, dict):
        imports = [imports]
    _want(name, "import", imports, list, "write [[import]] tables")
    for i, imp in enumerate(imports):
        for d in _parse_import(f"{name} [[import]] #{i + 1}", _want(name, "import", imp, dict, "write [[import]] tables"), base):
            if d.name in designs:
                raise ConfigError(f"{name}: design {d.name!r} is defined twice; rename one or drop it from 'use'")
            designs[d.name] = d
    own = _want(name, "designs", data.get("designs", {}), dict, "write [designs.NAME] tables")
    for dname, body in own.items():
        if "@" in dname or "/" in dname:
            raise ConfigError(f"{name} [designs.{dname}]: names may not contain '@' or '/'; rename the design")
        if dname in designs:
            raise ConfigError(f"{name}: design {dname!r} is defined twice; rename one or drop it from 'use'")
        where = f"{name} [designs.{dname}]"
        designs[dname] = _parse_design(where, dname, _want(where, "design", body, dict, "make it a table"), base)
    if not designs:
        raise ConfigError(f"{name}: no designs; add [designs.NAME] tables or an [[import]] of a manifest")
    if "stimulus" not in data:
        raise ConfigError(f"{name}: no [stimulus] table; add one with patterns = [...] or images = [...]")
    stimulus = _parse_stimulus(f"{name} [stimulus]", _want(name, "stimulus", data["stimulus"], dict, "make it a table"), base)
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


def _image_size(path: Path) -> tuple[int, int]:
    """``(width, height)`` through vkit.video.images (decompression-bomb guard, one-line errors)."""
    from vkit.video.images import load_image

    arr = load_image(path, mode="auto", convert=True)
    return int(arr.shape[1]), int(arr.shape[0])


def _design_simulators(d: DesignConfig, requested: list[str]) -> list[str]:
    from vkit.sim.simulators import LANGUAGES

    if d.simulators is not None:
        return list(d.simulators)
    return [s for s in requested if d.language in LANGUAGES[s] and (d.supported is None or s in d.supported)]


def expand_matrix(config: Config, simulators: list[str] | None = None) -> list[Case]:
    """Every case of the config, sorted by id; ``Case.index`` is the position in that order.

    Args:
        config: a loaded config.
        simulators: replaces ``[run] simulators`` (designs that name their own keep them; a design
            only runs on simulators of its language and, when imported, on those its manifest lists).

    Raises:
        ConfigError: the matrix is empty, or an image is smaller than a timing's active area.
    """
    requested = _simulator_list("--sim", simulators) if simulators else config.run.simulators
    st = config.stimulus
    cases: dict[str, Case] = {}
    skipped: list[str] = []
    stimuli: list[tuple[str, str, str, tuple[tuple[str, Any], ...], tuple[int, ...], tuple[int, int] | None, PatternEntry | None]] = []
    for img in st.images:
        stimuli.append(("image", str(img), img.stem, (), tuple(st.seeds), _image_size(img), None))
    for pe in st.patterns:
        stimuli.append(("pattern", pe.name, pe.id_label, pe.options, pe.seeds or tuple(st.seeds), None, pe))
    for d in config.designs.values():
        sims = _design_simulators(d, requested)
        if not sims:
            skipped.append(d.name)
            continue
        for sim in sims:
            for kind, sname, slabel, options, seeds, own_size, pe in stimuli:
                stalls = pe.stalls if pe is not None and pe.stalls is not None else st.stalls
                gaps = pe.gaps if pe is not None and pe.gaps is not None else st.gaps
                bps = pe.backpressure if pe is not None and pe.backpressure is not None else st.backpressure
                flows = ([(f, Flow(), Flow()) for f in stalls] if d.family == "video"
                         else [(Flow(), g, b) for g in gaps for b in bps])
                timings = pe.timings if pe is not None and pe.timings is not None else st.timings
                for seed in seeds:
                    for tlabel, tdict in timings:
                        width, height = own_size if own_size is not None else st.size
                        timing = tdict
                        if tdict is None:
                            from vkit.video.timing import tiny

                            timing = tiny(width, height).to_dict()
                            tlabel = f"tiny{width}x{height}"
                        else:
                            width, height = int(tdict["h_active"]), int(tdict["v_active"])
                            if own_size is not None and (own_size[0] < width or own_size[1] < height):
                                raise ConfigError(
                                    f"image {sname} is {own_size[0]}x{own_size[1]}, smaller than timing {tlabel} "
                                    f"({width}x{height}); use a larger image or a smaller timing"
                                )
                        if d.family == "stream":
                            timing, tlabel = None, f"{width}x{height}"
                        for stall, gap, bp in flows:
                            flabel = stall.label("stall") if d.family == "video" else f"{gap.label('gap')}-{bp.label('bp')}"
                            cid = f"{d.name}/{sim}/{slabel}-s{seed}/{tlabel}/{flabel}"
                            if cid in cases:
                                continue
                            cases[cid] = Case(
                                id=cid, design=d, simulator=sim, stimulus=kind, stimulus_name=sname,
                                stimulus_label=slabel, pattern_options=options, seed=seed + config.run.seed,
                                frames=st.frames, width=width, height=height, timing=timing, timing_label=tlabel,
                                stalls=stall, gaps=gap, backpressure=bp, blanking=st.blanking,
                                blanking_value=st.blanking_value, convert=st.convert,
                            )
    if not cases:
        names = ", ".join(skipped) or "none"
        raise ConfigError(
            f"{config.path.name}: the matrix is empty (no design runs on {', '.join(requested)}; designs: {names}); "
            "pick simulators the designs support"
        )
    ordered = sorted(cases.values(), key=lambda c: c.id)
    return [replace(c, index=i) for i, c in enumerate(ordered)]


def select_cases(cases: list[Case], only: str | list[str] | None) -> list[Case]:
    """Cases whose id matches ``only``: a glob (``*``, ``?``, ``[``) or else a substring; several = any."""
    import fnmatch

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


def shard_cases(cases: list[Case], shard: tuple[int, int] | str | None) -> list[Case]:
    """The cases of shard ``K/N``: case ``i`` of the sorted list goes to shard ``i % N + 1``."""
    if shard is None:
        return list(cases)
    k, n = parse_shard(shard) if isinstance(shard, str) else shard
    if not 1 <= k <= n:
        raise ConfigError(f"shard {k}/{n}: give K/N with 1 <= K <= N")
    return [c for c in sorted(cases, key=lambda c: c.id) if (c.index % n) + 1 == k]
