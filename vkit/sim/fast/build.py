"""The one build every fast-path case runs on, and the arguments of one run.

How the runner uses it (build once, run every case on that build)::

    from cocotb_tools.runner import get_runner
    from vkit.sim.fast import fast_build_plan, fast_test_args

    plan = fast_build_plan("edge_core", sources, "verilog", {"ROOT_TABLE": '"/abs/edge_root_table.hex"'},
                           {"BUG_ADDR_WRAP": 1}, "video", signals, in_width=None, out_width=8)
    runner = get_runner(sim)
    runner.build(build_dir=build_dir, **plan.build_kwargs(sim))     # cache it on plan.key
    for case in cases:                                              # SimCase objects
        runner.test(build_dir=build_dir, **fast_test_args(case, sim))
        capture = Capture.load(case.capture_file)

``fast_build_plan`` writes the harness file(s) (content-addressed folder unless ``out_dir`` is given)
and returns a :class:`HarnessBuild`: ``files``, ``sources`` (compile order), ``toplevel``
(``vkit_fast_top``), ``defines``, ``build_args`` per simulator, ``key`` (a hash of the harness text
and the source files' contents, for a build cache) and ``build_kwargs(sim)`` for ``runner.build``.
``fast_test_args(case, sim)`` writes the case's stimulus beside its capture file and returns the
keyword arguments of ``runner.test``.
"""

from __future__ import annotations

import hashlib
import tempfile
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping, Sequence

from vkit.core.errors import ConfigError
from vkit.core.validate import suggest
from vkit.core.vocab import VHDL_SUFFIXES
from vkit.sim.case import CASE_ENV, SimCase
from vkit.sim.fast.harness import HarnessSpec, verilog_harness, vhdl_harness
from vkit.sim.fast.stimulus import fast_run_dir, prepare_fast_run
from vkit.sim.fast.wire import HARNESS, TOPLEVEL, capture_file_name
from vkit.sim.hdlports import find_design
from vkit.sim.simulators import TIMESCALE
from vkit.sim.signals import KEEP_ROLES
from vkit.video.formats import pixel_bits

__all__ = [
    "SIMULATORS",
    "VERILATOR_ARGS",
    "HarnessBuild",
    "define_args",
    "fast_build_plan",
    "harness_sources",
    "fast_test_args",
]

SIMULATORS = ("icarus", "verilator", "ghdl")
"""Simulators :func:`fast_build_plan` gives build arguments for."""

VERILATOR_ARGS = ("--timing", "-CFLAGS", "-std=gnu++20", "-O3", "-Wno-fatal", "-Wno-lint", "-Wno-style")
"""Verilator build flags: ``--timing`` runs the harness's own clock; g++ 12 needs C++20 for Verilator's coroutines."""


@dataclass
class HarnessBuild:
    """What :func:`fast_build_plan` wrote and everything the build needs.

    Attributes:
        files: generated HDL files.
        toplevel: the simulation toplevel (:data:`~vkit.sim.fast.wire.TOPLEVEL`, self-clocked).
        language: "verilog" or "vhdl".
        spec: the harness spec the text was made from.
        sources: every file to compile, in order (harness and design).
        defines: Verilog defines for the design (``NAME -> value``; the bug variants' switches).
        build_args: simulator -> extra build arguments.
        test_args: simulator -> extra run arguments.
        key: hex digest of the harness text, defines, build arguments and source contents: equal keys
            mean an equal build.
        notes: remarks for the log.
    """

    files: list[Path]
    toplevel: str
    language: str
    spec: HarnessSpec
    sources: list[Path] = field(default_factory=list)
    defines: dict[str, Any] = field(default_factory=dict)
    build_args: dict[str, list[str]] = field(default_factory=dict)
    test_args: dict[str, list[str]] = field(default_factory=dict)
    key: str = ""
    notes: list[str] = field(default_factory=list)

    def build_kwargs(self, simulator: str) -> dict[str, Any]:
        """Keyword arguments for ``cocotb_tools.runner`` ``build()`` (add ``build_dir``).

        Raises:
            ConfigError: the simulator cannot build this language.
        """
        if simulator not in self.build_args:
            raise ConfigError(
                f"fast path: simulator {simulator!r} cannot build the {self.language} harness; "
                f"use one of {', '.join(sorted(self.build_args))}"
            )
        kw: dict[str, Any] = {"sources": [str(p) for p in self.sources], "hdl_toplevel": self.toplevel,
                              "build_args": list(self.build_args[simulator]), "always": True}
        if self.defines:
            kw["defines"] = dict(self.defines)
        if simulator == "icarus":
            kw["timescale"] = TIMESCALE
        return kw


def define_args(defines: Mapping[str, Any] | None) -> list[str]:
    """Verilog defines as compiler arguments (``-DNAME`` or ``-DNAME=value``)."""
    return [f"-D{k}" if v is None or v == "" else f"-D{k}={v}" for k, v in (defines or {}).items()]


def _language_of(sources: Sequence[Path], language: str | None) -> str:
    if language is None:
        suffixes = {s.suffix.lower() for s in sources}
        language = "vhdl" if suffixes and suffixes <= set(VHDL_SUFFIXES) else "verilog"
    if language not in ("verilog", "vhdl"):
        raise ConfigError(f"harness: language {language!r} is not known; {suggest(language, ('verilog', 'vhdl'))}")
    return language


def _int_parameters(parameters: Mapping[str, Any]) -> dict[str, int]:
    """The overrides that are integers (a bool counts as 0/1, a string of digits as its number)."""
    out: dict[str, int] = {}
    for name, value in parameters.items():
        if isinstance(value, (bool, int)):
            out[name] = int(value)
        elif isinstance(value, str) and value.strip().isdigit():
            out[name] = int(value)
    return out


def _bus_widths(dut_top: str, sources: Sequence[Path], roles: Mapping[str, str], parameters: Mapping[str, Any],
                defines: Mapping[str, Any], in_width: int | None, out_width: int | None,
                pixel_format: str | None, include_dirs: Sequence[Path] = ()) -> tuple[int, int]:
    """The input and output data bus bits: as given, else read from the design's port list."""
    widths: dict[str, int | None] = {}
    if in_width is None or out_width is None:
        design = find_design(sources, dut_top, parameters=_int_parameters(parameters),
                             defines={k: str(v) for k, v in defines.items()}, include_dirs=include_dirs)
        widths = {p.name: p.width for p in design.ports}
    if in_width is None:
        in_width = widths.get(roles.get("in_data", "")) or (pixel_bits(pixel_format) if pixel_format else None)
    if in_width is None:
        raise ConfigError(
            f"harness: cannot work out the width of input port {roles.get('in_data')!r} of {dut_top!r} from the "
            "sources; give in_width (bits of the input data bus)"
        )
    if out_width is None:
        out_width = widths.get(roles.get("out_data", ""))
    if out_width is None:
        raise ConfigError(
            f"harness: cannot work out the width of output port {roles.get('out_data')!r} of {dut_top!r} from "
            "the sources; give out_width (bits of the output data bus)"
        )
    return int(in_width), int(out_width)


def _simulator_args(language: str, defines: Mapping[str, Any]) -> tuple[dict[str, list[str]], dict[str, list[str]]]:
    """Build and run arguments per simulator that can build a harness of ``language``."""
    if language == "vhdl":
        if defines:
            raise ConfigError(f"fast path: defines {sorted(defines)} apply to Verilog; VHDL designs take generics (parameters)")
        return {"ghdl": ["--std=08"]}, {"ghdl": ["--std=08"]}
    return {"icarus": [], "verilator": list(VERILATOR_ARGS)}, {"icarus": [], "verilator": []}


def _build_key(text: str, defines: Mapping[str, Any], build_args: Mapping[str, list[str]], sources: Sequence[Path]) -> str:
    h = hashlib.sha256(text.encode())
    h.update(repr(sorted((k, str(v)) for k, v in defines.items())).encode())
    h.update(repr(sorted(build_args.items())).encode())
    for src in sources:
        h.update(str(src.resolve()).encode() + b"\0" + src.read_bytes())
    return h.hexdigest()


def _write_once(path: Path, text: str) -> None:
    """Write ``text`` to ``path`` unless it already holds it (atomically: parallel builds share the folder)."""
    if not path.is_file() or path.read_text() != text:
        tmp = path.with_suffix(path.suffix + f".{id(text)}.tmp")
        tmp.write_text(text)
        tmp.replace(path)


def fast_build_plan(
    dut_top: str,
    sources: Sequence[str | Path],
    language: str | None,
    parameters: Mapping[str, Any] | None,
    defines: Mapping[str, Any] | None,
    family: str,
    signals: Mapping[str, str],
    in_width: int | None = None,
    out_width: int | None = None,
    *,
    out_dir: str | Path | None = None,
    reset_active_high: bool = True,
    pixel_format: str | None = None,
    out_active_high: Mapping[str, bool] | None = None,
    include_dirs: Sequence[str | Path] = (),
    lanes: int | None = None,
) -> HarnessBuild:
    """Write the fast-path harness for a design and describe the one build every case runs on.

    The result depends only on the arguments (never on a stimulus), so the runner builds once per
    design variant and simulator, keyed on ``HarnessBuild.key``.

    Args:
        dut_top: the design's top module/entity.
        sources: the design's HDL files in compile order (absolute paths are safest).
        language: "verilog" or "vhdl"; None = from the sources' suffixes.
        parameters: design parameter/generic overrides (``{"ROOT_TABLE": '"/abs/t.hex"', "HEIGHT": 24}``),
            applied in the harness's instance of the design.
        defines: Verilog defines for the build (``{"BUG_ADDR_WRAP": 1}``), or None.
        family: "video" or "stream".
        signals: role -> the design's port name (clock, reset, in_*, out_*).
        in_width / out_width: data bus bits; None = read from the sources (with ``parameters``),
            else the input from ``pixel_format``.
        out_dir: folder for the harness file(s); None = a folder named after the content hash
            under the system temp folder.
        reset_active_high: polarity of the design's reset.
        pixel_format: "gray8" or "rgb888", only used when ``in_width`` cannot be read.
        out_active_high: polarity of the ``out_de``, ``out_valid``, ``out_enable`` pins (left out: active high).
        include_dirs: folders the design's `include lines search (to read its port widths).
        lanes: pixels a beat, the width of the per-lane valid masks (``in_keep`` / ``out_keep``); None: the
            caller cannot carry a mask (a mapped one is then refused).

    Raises:
        ConfigError: a width cannot be worked out, a bad family/language/name, or a per-lane valid mask the
            harness cannot carry (:func:`_check_keeps`).
    """
    srcs = [Path(s) for s in sources]
    language = _language_of(srcs, language)
    params = dict(parameters or {})
    defs = dict(defines or {})
    roles = dict(getattr(signals, "roles", signals) or {})
    _check_keeps(dut_top, roles, lanes)
    for src in srcs:
        if not src.is_file():
            raise ConfigError(f"fast path: design source {str(src)!r} does not exist; give the design's HDL files")
    iw, ow = _bus_widths(dut_top, srcs, roles, params, defs, in_width, out_width, pixel_format,
                         [Path(p) for p in include_dirs])
    spec = HarnessSpec(family=family, dut_top=dut_top, roles=roles, in_width=iw, out_width=ow,
                       reset_active_high=bool(reset_active_high), parameters=params,
                       out_active_high=dict(out_active_high or {}), lanes=int(lanes or 1))
    text = vhdl_harness(spec) if language == "vhdl" else verilog_harness(spec)
    build_args, test_args = _simulator_args(language, defs)
    key = _build_key(text, defs, build_args, srcs)
    out = Path(out_dir) if out_dir is not None else Path(tempfile.gettempdir()) / "vkit_harness" / key[:16]
    out.mkdir(parents=True, exist_ok=True)
    path = out / (f"{HARNESS}.vhd" if language == "vhdl" else f"{HARNESS}.v")
    _write_once(path, text)
    ordered = [*srcs, path] if language == "vhdl" else [path, *srcs]
    return HarnessBuild(files=[path], toplevel=TOPLEVEL, language=language, spec=spec, sources=ordered,
                        defines=defs, build_args=build_args, test_args=test_args, key=key)


def _check_keeps(dut_top: str, roles: Mapping[str, str], lanes: int | None) -> None:
    """Refuse a mapped per-lane valid mask where the harness cannot carry it: one mask without the other, or
    a caller that gives no lane count (the mask's width)."""
    keeps = [r for r in KEEP_ROLES if r in roles]
    if not keeps:
        return
    if lanes is None or set(keeps) != set(KEEP_ROLES):
        why = ("both in_keep and out_keep must be mapped" if set(keeps) != set(KEEP_ROLES) else
               "the harness needs the lane count (pixels_per_clock), the width of the masks")
        raise ConfigError(f"fast path: design {dut_top} maps the per-lane valid mask(s) {', '.join(keeps)}; {why}; "
                          "run it with drive = 'clock' (drive = 'auto' picks it)")


def harness_sources(
    case: SimCase,
    out_dir: str | Path,
    dut_top: str,
    *,
    sources: Sequence[str | Path] = (),
    language: str | None = None,
    in_width: int | None = None,
    out_width: int | None = None,
    parameters: Mapping[str, Any] | None = None,
    defines: Mapping[str, Any] | None = None,
) -> HarnessBuild:
    """:func:`fast_build_plan` with the family, signals, reset polarity and pixel format taken from ``case``.

    Only the case's design-side fields are used, so every case of the same design gives the same build.
    The other arguments are those of :func:`fast_build_plan`.
    """
    return fast_build_plan(
        dut_top, sources, language, parameters, defines, case.family, case.signals, in_width, out_width,
        out_dir=out_dir, reset_active_high=case.reset_active_high, pixel_format=case.pixel_format,
        out_active_high={r: case.active_high(r) for r in ("out_de", "out_valid", "out_enable")},
        lanes=case.pixels_per_clock,
    )


def fast_test_args(case: SimCase, simulator: str, *, in_width: int | None = None) -> dict[str, Any]:
    """Write ``case``'s stimulus (once) beside its capture file and return ``runner.test`` keyword arguments.

    Args:
        case: the case; its ``capture_file`` decides where files go.
        simulator: "icarus", "verilator" (Verilog harness) or "ghdl" (VHDL harness).
        in_width: input data bus bits when it differs from the pixel format's bits.

    Returns:
        ``dict(hdl_toplevel, hdl_toplevel_lang, test_module, plusargs, parameters, test_args, extra_env,
        test_dir)``; pass it to ``runner.test(build_dir=..., **args)``. ``test_dir`` is the case's run
        folder (None for GHDL, which must run in the build folder; every path passed is absolute).
    """
    if simulator not in SIMULATORS:
        raise ConfigError(f"fast path: simulator {simulator!r} is not supported; {suggest(simulator, SIMULATORS)}")
    language = "vhdl" if simulator == "ghdl" else "verilog"
    stim = prepare_fast_run(case, in_width, language=language)
    run_dir = fast_run_dir(case)
    capture = run_dir / capture_file_name(language)
    case_json = case.to_json(run_dir / "case.json")
    plusargs: list[str] = []
    parameters: dict[str, Any] = {}
    if language == "vhdl":
        parameters = stim.generics(capture)
        parameters.update(HALF_PS=max(1, int(round(case.clock_period_ns * 500))), RESET_CYCLES=case.reset_cycles)
        # the harness reads the whole stimulus into one array in a function: GHDL (mcode) refuses such a
        # local over 128 KB unless told not to check (checked with GHDL 2.0: "declaration of a too large object")
        plusargs = ["--max-stack-alloc=0"]
    else:
        plusargs = stim.plusargs(capture) + [f"+vkit_half_ns={case.clock_period_ns / 2:.6f}",
                                             f"+vkit_reset_cycles={case.reset_cycles}"]
    return {
        "hdl_toplevel": TOPLEVEL,
        # A runner object that did not run the build itself needs the language (cocotb_tools.runner).
        "hdl_toplevel_lang": language,
        "test_module": "vkit.sim.tb.fast",
        "plusargs": plusargs,
        "parameters": parameters,
        "test_args": ["--std=08"] if simulator == "ghdl" else [],
        "extra_env": {CASE_ENV: str(case_json)},
        # GHDL (mcode) finds its work library only in the build folder, so it runs there (test_dir None).
        "test_dir": None if simulator == "ghdl" else str(run_dir),
    }
