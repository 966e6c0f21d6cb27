"""The ``vkit`` command: parse the arguments, call one function, print, and pick the exit code."""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path
from typing import Any, Callable, NamedTuple, Sequence

from vkit.core.errors import EXIT_CONFIG, EXIT_DUT, EXIT_PASS, ConfigError, VkitError
from vkit.core.vocab import DRIVE_MODES

__all__ = ["main", "build_parser", "problem_line"]


def _size(text: str) -> tuple[int, int]:
    try:
        w, h = (int(v) for v in text.lower().split("x"))
    except ValueError:
        raise argparse.ArgumentTypeError(f"size {text!r}: give WIDTHxHEIGHT, e.g. 64x48") from None
    if w < 1 or h < 1:
        raise argparse.ArgumentTypeError(f"size {text!r}: width and height must be >= 1")
    return w, h


def _positive_int(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r}: give a whole number >= 1") from None
    if value < 1:
        raise argparse.ArgumentTypeError(f"{text!r}: give a whole number >= 1")
    return value


def _spec(text: str):  # noqa: ANN202 - returns vkit.model.pipeline.PipelineSpec
    from vkit.model.pipeline import PipelineSpec, preset

    p = Path(text)
    if p.suffix == ".toml" or p.is_file():
        if not p.is_file():
            raise ConfigError(f"spec file {text!r} not found; give a preset name or an existing TOML file")
        return PipelineSpec.from_toml(p)
    return preset(text)


def _cmd_run(args: argparse.Namespace) -> int:
    from vkit.run.config import load_config
    from vkit.run.runner import run

    config = load_config(args.config)
    result = run(config, jobs=args.jobs, shard=args.shard, only=args.only, out_dir=args.out,
                 simulators=args.sim or None, waves=args.waves, drive=args.path, new_out=args.new_out)
    _print_run_end(result)
    return result.exit_code


def problem_line(case) -> str:  # noqa: ANN001 - vkit.run.runner.CaseResult
    """The one line that says what went wrong with a case that did not pass.

    ``FAIL <id>: <kind>: <message>; <arrived> of <expected> pixels arrived`` for a design failure
    (plus the first timing error when the diagnosis names something else), ``ERROR <id>: <message>``
    when the case could not be judged.
    """
    v = case.entry.get("verdict", {})
    if case.status == "error":
        message = v.get("diagnosis", {}).get("message") or case.diagnosis or "unknown error"
        return f"ERROR {case.id}: {' '.join(str(message).split())}"
    text = f"FAIL {case.id}: {case.diagnosis or case.status}"
    arrived, expected = v.get("pixels_arrived"), v.get("pixels_expected")
    if arrived is not None and expected is not None:
        text += f"; {arrived} of {expected} pixels arrived"
    timing = v.get("timing_errors") or []
    if timing and timing[0] not in text:
        text += f"; first timing error: {timing[0]}"
    return " ".join(text.split())


def _print_run_end(result) -> None:  # noqa: ANN001 - vkit.run.runner.RunResult
    if result.stopped_by is not None:
        import signal

        stopped = sum(1 for c in result.cases if c.status == "interrupted")
        print(f"vkit: stopped by {signal.Signals(result.stopped_by).name}: {len(result.cases) - stopped} case(s) "
              f"finished, {stopped} interrupted; the report holds them all", file=sys.stderr)
    summary = Path(result.report_files["summary"]).read_text()
    print()
    print(summary, end="")
    bad = [c for c in result.cases if c.status != "pass"]
    for c in bad:
        print(problem_line(c))
        if c.waves:
            print(f"  waves: {result.out_dir / c.waves}")
        if c.rerun:
            print(f"  rerun: {c.rerun}")
    if bad:
        print()
    bugs = [c for c in result.cases if c.expect == "fail"]
    if bugs:
        caught = sum(1 for c in bugs if c.status != "pass")
        named = sum(1 for c in bugs if c.expect_kind and c.diagnosis_kind == c.expect_kind)
        print(f"expected-to-fail cases: {caught}/{len(bugs)} failed, {named} diagnosed as the expected kind")
        if result.exit_from == "expectations":
            surprises = [c.id for c in bugs if c.status == "pass"]
            print("exit code from expectations: " + (f"{len(surprises)} seeded bug(s) passed unexpectedly: "
                                                      + ", ".join(surprises) if surprises else "every case came out as expected"))
    warned = sum(1 for c in result.cases if c.warnings)
    if warned:
        print(f"coverage warnings on {warned} case(s): see 'coverage.warnings' in report.json")
    print(f"wall time {result.wall_s:.1f} s")
    print(f"report:  {result.report_files['json']}")
    print(f"junit:   {result.report_files['junit']}")
    print(f"summary: {result.report_files['summary']}")
    if "index" in result.report_files:
        print(f"page:    {result.report_files['index']}")


def _cmd_demo(args: argparse.Namespace) -> int:
    from vkit.run.runner import demo_config, run

    out = Path(args.out) if args.out else Path.cwd() / "vkit-demo"
    result = run(demo_config(), jobs=args.jobs, out_dir=out, simulators=[args.sim] if args.sim else None,
                 drive=args.path)
    _print_run_end(result)
    pngs = sorted(result.out_dir.rglob("*_composite.png"))
    if pngs:
        print(f"pictures: {len(pngs)} composite PNG(s) under {result.out_dir}, e.g. {pngs[0]}")
    else:
        print(f"pictures: none (PNGs are written for failing frames only) under {result.out_dir}")
    print(f"open this page: {result.report_files['index']}")
    return result.exit_code


def _cmd_export(args: argparse.Namespace) -> int:
    from vkit.run.config import load_config
    from vkit.run.vectors import export_vectors, find_case

    case = find_case(load_config(args.config), args.case, args.sim or None)
    done = export_vectors(case, args.out)
    print(f"exported {case.id} to {done.out_dir}")
    for sim, cmds in done.commands.items():
        print(f"  {sim}: " + " && ".join(" ".join(c) for c in cmds))
    print(f"then: vkit replay {done.out_dir}")
    return EXIT_PASS


def _cmd_replay(args: argparse.Namespace) -> int:
    from vkit.run.vectors import replay

    verdict, files = replay(args.export_dir, args.capture, args.out)
    print(Path(files["summary"]).read_text(), end="")
    if verdict.diagnosis is not None:
        print(f"{verdict.diagnosis.kind}: {verdict.diagnosis.message}")
    print(f"report:  {files['json']}")
    return EXIT_PASS if verdict.passed else (EXIT_CONFIG if verdict.status == "error" else EXIT_DUT)


def _signal_overrides(items: list[str] | None) -> dict[str, str]:
    out: dict[str, str] = {}
    for item in items or []:
        role, sep, path = item.partition("=")
        if not sep or not role.strip() or not path.strip():
            raise ConfigError(f"--signal {item!r}: give ROLE=PATH, e.g. --signal in_de=tb.dut.u_edge.in_de")
        out[role.strip()] = path.strip()
    return out


def _cmd_score_dump(args: argparse.Namespace) -> int:
    from vkit.run.config import load_config
    from vkit.run.passive import score_dump

    done = score_dump(load_config(args.config), args.dump, design=args.design, scope=args.scope,
                      signals=_signal_overrides(args.signal), out_dir=args.out, timing=args.timing)
    print(Path(done.files["summary"]).read_text(), end="")
    verdict = done.verdict
    if verdict.diagnosis is not None:
        print(f"{verdict.diagnosis.kind}: {verdict.diagnosis.message}")
    print(f"scored: {done.summary}")
    print(f"open this page: {done.files['index']}")
    for line in done.problems:
        print(f"vkit: error: {line}", file=sys.stderr)
    if not verdict.passed:
        return EXIT_DUT
    return EXIT_CONFIG if done.problems else EXIT_PASS


def _cmd_merge(args: argparse.Namespace) -> int:
    from vkit.run.runner import merge

    merged, code = merge(args.out, args.reports)
    out = Path(args.out)
    print((out / "summary.txt").read_text(), end="")
    print(f"merged {len(merged['cases'])} cases from {len(args.reports)} report(s) into {out / 'report.json'}")
    print(f"page:    {out / 'index.html'}")
    return code


def _cmd_model(args: argparse.Namespace) -> int:
    from vkit.report.page import write_model_page
    from vkit.report.quality import write_model_report
    from vkit.video.images import DEFAULT_MAX_PIXELS

    spec = _spec(args.spec)
    limit = args.max_image_pixels or DEFAULT_MAX_PIXELS
    paths = write_model_report(spec, list(args.images), args.out, max_image_pixels=limit)
    for p in paths:
        print(p)
    print(write_model_page(args.out))
    return EXIT_PASS


def _cmd_widths(args: argparse.Namespace) -> int:
    from vkit.model import widths

    from vkit.video.bus import BusLayout

    spec = _spec(args.spec)
    bus = BusLayout(spec.input, args.component_order, args.pixels_per_clock, args.lane_order)
    if args.json:
        ranges = widths.stage_ranges(spec)
        out_bits = spec.output.bits
        lanes = {**bus.to_dict(), "sample_bits": bus.sample_bits, "pixel_bits": bus.pixel_bits,
                 "output_word_bits": bus.lanes * out_bits, "output_layout": bus.describe_output(out_bits)}
        print(json.dumps({"stages": _plain(ranges), "bus": lanes}, indent=2))
    else:
        print(widths.format_width_table(spec))
        print(f"input bus: {bus.word_bits}-bit word, {bus.describe()}")
        print(f"output bus: {bus.describe_output(spec.output.bits)}")
    return EXIT_PASS


def _plain(value):  # noqa: ANN001, ANN202 - any stage-range structure to JSON-ready data
    if hasattr(value, "to_dict"):
        return value.to_dict()
    if hasattr(value, "__dataclass_fields__"):
        import dataclasses

        return {k: _plain(v) for k, v in dataclasses.asdict(value).items()}
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    return value


def _cmd_lut(args: argparse.Namespace) -> int:
    from vkit.model import lut
    from vkit.model.magnitude import root_table

    rounding = "half_up" if args.rounding else "truncate"
    table = root_table(args.address_bits, args.data_bits, scale=args.scale, rounding=rounding)
    out = Path(args.output)
    note = (f"root table: entry a = {'round' if args.rounding else 'floor'}(sqrt(a * {args.scale})), "
            f"{args.address_bits} address bits, {args.data_bits} data bits")
    if args.format == "readmemh":
        lut.write_readmemh(table, out, data_bits=args.data_bits, comment=note)
    elif args.format == "readmemb":
        lut.write_readmemb(table, out, data_bits=args.data_bits, comment=note)
    else:
        package = args.package or "".join(ch if ch.isalnum() else "_" for ch in out.stem)
        lut.write_vhdl_package(table, out, package_name=package, data_bits=args.data_bits, comment=note)
    print(f"wrote {len(table)} entries of {args.data_bits} bits to {out}")
    return EXIT_PASS


def _cmd_pattern(args: argparse.Namespace) -> int:
    from vkit.video.images import save_image
    from vkit.video.patterns import make_pattern

    w, h = args.size
    img = make_pattern(args.name, h, w, seed=args.seed, rgb=True if args.rgb else None)
    path = save_image(img, args.output)
    print(f"wrote {args.name} {w}x{h} to {path}")
    return EXIT_PASS


def _cmd_init(args: argparse.Namespace) -> int:
    from vkit.run.scaffold import parse_assignments, scaffold

    result = scaffold(
        args.top, list(args.sources), args.out, args.family, spec=args.spec, pixel_format=args.pixel_format,
        simulators=args.sim, parameters=parse_assignments(args.param, "parameter"),
        defines=parse_assignments(args.define, "define"), design_name=args.name, force=args.force,
        rewrite_config=args.rewrite_config, include_dirs=args.include_dir or (),
    )
    print(result.summary())
    return EXIT_PASS


def _cmd_make_vars(args: argparse.Namespace) -> int:
    from vkit.run.makeflow import write_make_vars

    path = write_make_vars(args.config, args.design, args.sim, args.out)
    if args.out is None:
        print(path)
    return EXIT_PASS


class _Arg(NamedTuple):
    """One ``add_argument`` call as data: its flags and its keyword options."""

    flags: tuple[str, ...]
    options: dict[str, Any]


def _arg(*flags: str, **options: Any) -> _Arg:
    return _Arg(flags, options)


_JOBS = _arg("-j", "--jobs", type=int, default=None, help="parallel worker processes")
_WAVES = (
    _arg("--waves", dest="waves", action="store_const", const="all", default=None,
         help="dump waves (Icarus, FST) around the first mismatch of every case"),
    _arg("--no-waves", dest="waves", action="store_const", const="off",
         help="no wave dumps, not even for failing cases (default: [run] waves, 'failing')"),
)
_SPEC = _arg("spec", help="pipeline preset name or spec TOML file")

def _cmd_strength(args: argparse.Namespace) -> int:
    import numpy as np

    from vkit.model.strength import stimulus_strength
    from vkit.video.synthesis import SCAFFOLD_PATTERNS, stimulus_frames, synthesize

    spec = _spec(args.spec)
    w, h = args.size
    frames = stimulus_frames(spec, args.stimulus or list(SCAFFOLD_PATTERNS), w, h, frames=args.frames)
    report = stimulus_strength(spec, frames)
    added = synthesize(spec, frames, w, h) if args.synthesize else []
    data = report.to_dict()
    if added:
        data["synthesized"] = [label for label, _ in added]
        data["with_synthesized"] = stimulus_strength(spec, np.concatenate([frames, [f for _, f in added]])).to_dict()
    if args.json:
        print(json.dumps(data, indent=2))
        return EXIT_PASS
    print(report.text())
    if added:
        after = data["with_synthesized"]
        print(f"with {', '.join(data['synthesized'])} added: kills {after['killed']} of {after['mutants']} "
              f"({100 * after['kill_rate']:.1f}%)")
    return EXIT_PASS


_COMMANDS: tuple[tuple[str, str, Callable[[argparse.Namespace], int], tuple[Any, ...]], ...] = (
    ("run", "run a regression config", _cmd_run, (
        _arg("config", help="config TOML (or a pyproject.toml with [tool.vkit])"),
        _JOBS,
        _arg("--shard", default=None, help="K/N: run only shard K of N (case i goes to shard i %% N + 1); auto: K "
             "and N from the array job or CI matrix (VKIT_SHARD, SLURM_ARRAY_TASK_ID/_COUNT, SGE_TASK_ID/_LAST, "
             "CI_NODE_INDEX/_TOTAL, CIRCLE_NODE_INDEX/_TOTAL, BUILDKITE_PARALLEL_JOB/_COUNT)"),
        _arg("--out", default=None, help="report folder (default: [run] out_dir)"),
        _arg("--sim", nargs="+", default=None, help="simulators (replaces [run] simulators)"),
        _arg("--only", action="append", default=None,
             help="keep case ids matching this glob or text (a whole case id selects exactly that case)"),
        _WAVES,
        _arg("--path", choices=DRIVE_MODES, default=None,
             help="auto: per case the fastest path that can run it (native, else fast, else clock); clock: "
                  "cocotb drives every clock; fast: a generated HDL harness plays and captures whole runs; "
                  "native: that harness as a plain executable, no cocotb (default: [run] path, 'auto')"),
        _arg("--new-out", action="store_true",
             help="when another run is writing the report folder, write a sibling folder (OUT-2, ...) instead "
                  "of stopping"),
    )),
    ("demo", "run the bundled sample regression (sim/demo.toml)", _cmd_demo, (
        _arg("--out", default=None, help="report folder (default: ./vkit-demo)"),
        _arg("--sim", default=None, help="simulator (default: the demo's, verilator)"),
        _JOBS,
        _arg("--path", choices=DRIVE_MODES, default=None,
             help="auto (the default: native on Verilog designs), clock (cocotb every clock), fast "
                  "(generated HDL harness under cocotb) or native (that harness, no cocotb)"),
    )),
    ("export", "write one case as vectors and a self-checking plain-HDL testbench", _cmd_export, (
        _arg("config", help="config TOML"),
        _arg("case", help="the whole id of one case (as summary.txt lists it)"),
        _arg("--sim", nargs="+", default=None, help="simulators (replaces [run] simulators)"),
        _arg("--out", default="vkit-export", help="export folder (default: ./vkit-export)"),
    )),
    ("replay", "judge the capture an exported testbench wrote, as a live run would", _cmd_replay, (
        _arg("export_dir", help="folder written by `vkit export`"),
        _arg("--capture", default=None, help="capture file (default: capture.bin/.txt in the folder)"),
        _arg("--out", default=None, help="report folder (default: EXPORT_DIR/report)"),
    )),
    ("score-dump", "score a waveform dump (VCD, FST) of a run: rebuild the input frames, model, score the output",
     _cmd_score_dump, (
        _arg("config", help="config TOML naming the design (spec, ports, reset polarity)"),
        _arg("dump", help="the waveform dump: .vcd, .fst or .ghw"),
        _arg("--design", default=None, help="the design's name in the config (default: its only design)"),
        _arg("--scope", default=None,
             help="hierarchical path of the design's instance in the dump, e.g. belt_cam_tb.dut.u_edge "
                  "(default: the design's instance key; a unique port name is found anywhere)"),
        _arg("--signal", action="append", default=None, metavar="ROLE=PATH",
             help="dump path of one role whose signal is not SCOPE.PORT (repeatable)"),
        _arg("--out", default=None, help="report folder (default: DUMP-STEM-vkit beside the dump)"),
        _arg("--timing", default=None, help="a timing preset the run should follow (e.g. hd1280x720p60): each "
                                            "input frame's size and the hsync pulses of each vsync period are checked"),
    )),
    ("merge", "merge shard report.json files", _cmd_merge, (
        _arg("out", help="folder for the merged report.json, junit.xml and summary.txt"),
        _arg("reports", nargs="+", help="shard report.json files or their folders"),
    )),
    ("model", "run the bit-exact model on images and write a quality report", _cmd_model, (
        _SPEC,
        _arg("images", nargs="+", help="PNG/PPM/PGM images"),
        _arg("--out", default="vkit-model", help="report folder (default: ./vkit-model)"),
        _arg("--max-image-pixels", type=_positive_int, default=None,
             help="decompression-bomb guard: refuse image files claiming more pixels (default: "
                  "vkit.video.images.DEFAULT_MAX_PIXELS)"),
    )),
    ("widths", "print each stage's range and bits, and the lane layout of the data words", _cmd_widths, (
        _SPEC,
        _arg("--json", action="store_true", help="print JSON instead of a table: {stages: [...], bus: the lane layout}"),
        _arg("--pixels-per-clock", type=int, default=1, help="pixels the data words carry a clock: 1, 2, 4 or 8"),
        _arg("--lane-order", default="first_low", help="first_low (first pixel in the low bits) or first_high"),
        _arg("--component-order", default="RGB", help="R, G, B in a pixel's field, most significant first"),
    )),
    ("strength", "which spec mutants a stimulus kills, and why the rest survive (no simulator)", _cmd_strength, (
        _SPEC,
        _arg("stimulus", nargs="*", help="pattern names (name or name:seed) or image files (default: the scaffold's)"),
        _arg("--size", type=_size, default=(32, 24), help="WIDTHxHEIGHT (default 32x24)"),
        _arg("--frames", type=int, default=2, help="frames per pattern (default 2, as a scaffolded config)"),
        _arg("--synthesize", action="store_true", help="also pick frames that kill the survivors"),
        _arg("--json", action="store_true", help="print JSON instead of text"),
    )),
    ("lut", "write a lookup table file", _cmd_lut, (
        _arg("kind", choices=["root"], help="table kind"),
        _arg("--address-bits", type=int, default=13),
        _arg("--data-bits", type=int, default=8),
        _arg("--scale", type=int, default=8),
        _arg("--rounding", action="store_true", help="round half up instead of the floor (math.isqrt)"),
        _arg("--package", default=None, help="VHDL package name (default: from the file name)"),
        _arg("--format", choices=["readmemh", "readmemb", "vhdl"], default="readmemh"),
        _arg("-o", "--output", required=True, help="output file"),
    )),
    ("init", "write a starter vkit.toml, cocotb test and Makefile for an existing design", _cmd_init, (
        _arg("top", help="top-level module or entity"),
        _arg("sources", nargs="+", help="HDL files of the design, in compile order"),
        _arg("--out", default=".", help="folder to write into (default: the current folder)"),
        _arg("--family", choices=["video", "stream"], default=None, help="interface family (default: guessed)"),
        _arg("--spec", default=None, help="pipeline preset (default: guessed from the names)"),
        _arg("--pixel-format", default=None, help="gray8 or rgb888 (default: from the data width)"),
        _arg("--sim", nargs="+", default=None, help="simulators for the config"),
        _arg("-P", "--param", action="append", default=None, metavar="NAME=VALUE",
             help="parameter / generic value (repeatable)"),
        _arg("-D", "--define", action="append", default=None, metavar="NAME[=VALUE]",
             help="Verilog define (repeatable)"),
        _arg("-I", "--include-dir", action="append", default=None, metavar="DIR",
             help="folder `include searches (repeatable)"),
        _arg("--name", default=None, help="the design's name in the config (default: the top)"),
        _arg("--force", action="store_true",
             help="rewrite the Makefile and test module of an existing kit (its config is kept)"),
        _arg("--rewrite-config", action="store_true", help="with --force, write a new config as well"),
    )),
    ("make-vars", "write one design's build on one simulator as make variables (Makefile.vkit runs this)",
     _cmd_make_vars, (
        _arg("config", help="config TOML"),
        _arg("--design", required=True, help="the design's name in the config"),
        _arg("--sim", required=True, help="simulator: icarus, verilator or ghdl"),
        _arg("--out", default=None, help="file to write (default: .vkit-make/DESIGN-SIM.mk beside the config; "
                                         "its path is printed)"),
    )),
    ("pattern", "write a verification pattern as PNG", _cmd_pattern, (
        _arg("name", help="pattern name (see vkit.video.patterns.PATTERNS)"),
        _arg("--size", type=_size, default=(64, 48), help="WIDTHxHEIGHT (default 64x48)"),
        _arg("--seed", type=int, default=0),
        _arg("--rgb", action="store_true", help="write RGB even for gray patterns"),
        _arg("-o", "--output", required=True, help="output PNG"),
    )),
)
"""Every subcommand: name, help, the function it calls, and its arguments (a tuple inside = one
mutually exclusive group)."""


def build_parser() -> argparse.ArgumentParser:
    """The argument parser of the ``vkit`` command."""
    p = argparse.ArgumentParser(prog="vkit", description="Verification kit for streaming 3x3 video-filter RTL.")
    sub = p.add_subparsers(dest="command", required=True)
    for name, help_text, func, arguments in _COMMANDS:
        cmd = sub.add_parser(name, help=help_text)
        for item in arguments:
            if isinstance(item, _Arg):
                cmd.add_argument(*item.flags, **item.options)
                continue
            group = cmd.add_mutually_exclusive_group()
            for arg in item:
                group.add_argument(*arg.flags, **arg.options)
        cmd.set_defaults(func=func)
    return p


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``vkit`` console script; returns the exit code (0, 1 or 2)."""
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # argparse already printed its one-line usage error
        return EXIT_CONFIG if exc.code not in (0, None) else EXIT_PASS
    try:
        return int(args.func(args))
    except VkitError as exc:
        print(f"vkit: error: {' '.join(str(exc).split())}", file=sys.stderr)
        return exc.exit_code
    except BrokenPipeError:  # the reader (e.g. `head`) closed the pipe: not an error of ours
        sys.stderr.close()
        return EXIT_PASS
    except KeyboardInterrupt:
        print("vkit: interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
