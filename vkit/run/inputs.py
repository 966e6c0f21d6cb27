"""What a case feeds the simulator: its frames, the check of its signal map, and its SimCase."""

from __future__ import annotations

import hashlib
import importlib
import os
from pathlib import Path

import numpy as np

from vkit.core.vocab import is_ycbcr, pixel_format_name, sample_bits
from vkit.model.luma import sample_dtype
from vkit.core.errors import ConfigError
from vkit.core.validate import closest, fail
from vkit.run.config import IMAGE_PIXELS_SETTING, Case
from vkit.sim.case import SimCase
from vkit.sim.hdlports import HdlDesign, Port, find_design
from vkit.sim.signals import CONTROL_ROLES
from vkit.video.images import load_image
from vkit.video.patterns import pattern_in_format, ycbcr_frame

__all__ = ["FRAMES_CACHE", "make_frames", "check_ports", "check_parameters", "make_sim_case", "BACKPRESSURE_SEED_OFFSET"]

BACKPRESSURE_SEED_OFFSET = 7919
"""Added to a stream case's seed for its back-pressure pattern, so ready and valid gaps are not the same
random sequence (any fixed prime does; vkit init's generated tests use the same offset)."""


def _crop(image: np.ndarray, width: int, height: int) -> np.ndarray:
    h, w = image.shape[:2]
    top, left = (h - height) // 2, (w - width) // 2
    return image[top:top + height, left:left + width]


def _image_frame(case: Case, mode: str) -> np.ndarray:
    """The case's image file read as ``mode`` and centre-cropped to the case's size."""
    try:
        loaded = load_image(case.stimulus_name, mode=mode, convert=case.convert,
                            max_pixels=case.max_image_pixels, setting=IMAGE_PIXELS_SETTING)
    except ConfigError as exc:
        if "convert" not in str(exc):
            raise
        raise ConfigError(f"{exc} (in a vkit config: convert = true under [stimulus])") from None
    return _crop(loaded, case.width, case.height)


FRAMES_CACHE = "frames"
"""Folder of the build cache that keeps drawn pattern frames (a regression draws the same frames each run)."""

_PATTERN_CODE = ("vkit.video.patterns", "vkit.video.killers", "vkit.model.ycbcr", "vkit.model.luma", __name__)
"""Modules the drawn frames depend on: their source is part of the frames cache key."""


def _frames_key(case: Case) -> str:
    fmt = case.design.pixel_format
    coding = case.design.pipeline_spec().ycbcr_coding if is_ycbcr(fmt) else None
    digest = hashlib.sha256(repr((case.stimulus_name, case.height, case.width, fmt, coding, case.seed,
                                  case.frames, sorted(dict(case.pattern_options).items()))).encode())
    for name in _PATTERN_CODE:
        digest.update(Path(importlib.import_module(name).__file__ or "").read_bytes())
    return digest.hexdigest()[:32]


def make_frames(case: Case, cache_dir: Path | None = None) -> np.ndarray:
    """The case's input frames, ``(N, H, W)`` (grey) or ``(N, H, W, 3)`` (RGB), uint8 for samples of up
    to 8 bits and uint16 above; patterns are drawn at the design's sample width.

    Frame ``k`` of a pattern uses seed ``case.seed + k`` (seeded patterns differ per frame). An image
    is read in the design's pixel format (conversions only with ``[stimulus] convert = true``) and
    centre-cropped to the case's size; every frame of an image case is that image. A Y'CbCr design reads
    an RGB image (at 8 bits a sample or the format's width, if more) and converts it with the spec's
    ``[coding]`` (:attr:`vkit.model.spec.PipelineSpec.ycbcr_coding`), as its patterns are. With ``cache_dir``
    (the build cache), drawn pattern frames are kept in its :data:`FRAMES_CACHE` folder, keyed on the
    pattern, size, format, coding, seeds and the drawing code, and read back by the next run instead of drawn.
    """
    if cache_dir is None or case.stimulus != "pattern":
        return _draw_frames(case)
    path = Path(cache_dir) / FRAMES_CACHE / f"{_frames_key(case)}.npy"
    try:
        return np.load(path, allow_pickle=False)
    except (OSError, ValueError):  # not kept yet, or a damaged entry: drawn and kept again
        pass
    frames = _draw_frames(case)
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_suffix(f".{os.getpid()}.tmp")
    with open(tmp, "wb") as fh:
        np.save(fh, frames)
    tmp.replace(path)  # whole or not at all: parallel cases may keep the same frames
    return frames


def _draw_frames(case: Case) -> np.ndarray:
    """The frames of :func:`make_frames`, drawn or read from the image."""
    fmt = case.design.pixel_format
    bits = sample_bits(fmt)
    coding = case.design.pipeline_spec().ycbcr_coding if is_ycbcr(fmt) else None
    frames = []
    for k in range(case.frames):
        if case.stimulus == "pattern":
            img = pattern_in_format(case.stimulus_name, case.height, case.width, fmt, seed=case.seed + k,
                                    coding=coding, **dict(case.pattern_options))
        elif is_ycbcr(fmt):
            img = ycbcr_frame(_image_frame(case, pixel_format_name("rgb", max(8, bits))), fmt, coding)
        else:
            img = _image_frame(case, fmt)
        frames.append(np.ascontiguousarray(img, dtype=sample_dtype(bits)))
    return np.stack(frames)


def _top_design(case: Case) -> HdlDesign | None:
    """The top level as the HDL front end reads it; None when it cannot read it."""
    d = case.design
    ints = {k: v for k, v in case.build_parameters().items()
            if isinstance(v, int) and not isinstance(v, bool)}
    try:
        return find_design(d.sources, d.top, parameters=ints, defines={k: str(v) for k, v in d.defines.items()},
                           include_dirs=d.include_dirs)
    except Exception:  # noqa: BLE001 - the reader is a pre-check only; the simulator has the last word
        return None


def _top_ports(case: Case) -> list[Port]:
    """The top level's ports as the HDL front end reads them; empty when it cannot read them."""
    design = _top_design(case)
    return list(design.ports) if design is not None else []


def _parameter_keys(case: Case) -> list[tuple[str, str, object]]:
    """``(config key, parameter name, value)`` of every parameter a build of the case sets."""
    d = case.design
    keys = [(f"parameters.{k}", k, v) for k, v in d.parameters.items()]
    keys += [(f"file_parameters.{k}", k, str(v)) for k, v in d.file_parameters.items()]
    keys += [(f"frame_parameters.{what}", k, k) for what, k in d.frame_parameters.items()]
    keys += [(f"timing_parameters.{k}", k, what) for k, what in d.timing_parameters.items()]
    return keys


def check_parameters(case: Case) -> None:
    """Check every parameter/generic the case sets against those written in the top level's sources.

    Runs before any build: a simulator given a parameter its design lacks may ignore it (Icarus only
    warns), and the case would then pass on the default value. When the light HDL reader cannot read
    the top level, nothing is checked here (the build log is scanned for the simulator's own words).

    Raises:
        ConfigError: a parameter is not one of the top level's (the line lists them, with "did you mean").
    """
    design = _top_design(case)
    if design is None:
        return
    d = case.design
    names = list(design.parameters)
    known = {n.lower() if design.language == "vhdl" else n for n in names}
    for key, name, value in _parameter_keys(case):
        if (name.lower() if design.language == "vhdl" else name) in known:
            continue
        near = closest(name, names)
        kind = "generic" if design.language == "vhdl" else "parameter"
        have = f"its {kind}s: {', '.join(names)}" if names else f"it has no {kind}s"
        raise fail(f"design {d.name}", key, value, f"not a {kind} of {d.top} ({have})",
                   f"did you mean {near!r}?" if near else f"remove it or name a {kind} {d.top} has")


def check_ports(case: Case) -> None:
    """Check the case's signal map against the top level's ports as written in the sources.

    Runs before any build, so a misnamed port or a narrow data bus is one line naming the role, the
    port, the closest real port and the port list. When the light HDL reader cannot read the top
    level, nothing is checked here (the cocotb side checks the elaborated design again).

    Raises:
        ConfigError: a mapped port is missing, a control role is not 1 bit, or ``in_data`` is
            narrower than the pixel format.
    """
    d = case.design
    ports = _top_ports(case)
    names = [p.name for p in ports]
    by_name = {p.name: p for p in ports}
    by_lower = {p.name.lower(): p for p in ports}
    where = f"design {d.name}"
    for role, name in d.ports.items() if ports else ():
        port = by_name.get(name) or by_lower.get(name.lower())
        if port is None:
            near = closest(name, names)
            raise fail(where, f"ports.{role}", name, f"not a port of {d.top} (its ports: {', '.join(names)})",
                       f"did you mean {near!r}?" if near else "fix the name in the design's ports table")
        if port.width is None:
            continue
        if role in CONTROL_ROLES and port.width != 1:
            raise fail(where, f"ports.{role}", port.name, f"{port.width} bits wide",
                       f"a control role needs a 1-bit port; map {role!r} to one")
        _check_data_width(case, role, port)


def _check_data_width(case: Case, role: str, port: Port) -> None:
    """``in_data`` holds the pixel format; ``out_data`` is exactly as wide as the spec's output pixel."""
    d = case.design
    where = f"design {d.name}"
    bus = d.bus_layout()
    need = bus.word_bits
    lanes = f" x {bus.lanes} pixels a clock" if bus.lanes > 1 else ""
    if role == "in_data" and port.width is not None and port.width < need:
        raise fail(where, "ports.in_data", port.name, f"{port.width} bits wide but pixel_format "
                   f"{d.pixel_format}{lanes} needs {need} bits", "widen the port or use a narrower pixel_format")
    if role == "out_data" and port.width is not None:
        pixel = d.pipeline_spec().output_word_bits
        bits = pixel * bus.lanes
        if port.width != bits:
            side = "narrower" if port.width < bits else "wider"
            what = f"{bits}-bit output word ({pixel}-bit pixel{lanes})" if bus.lanes > 1 else f"{bits}-bit output pixel"
            raise fail(where, "ports.out_data", port.name, f"{port.width} bits wide, {side} than the "
                       f"{what} of spec {d.pipeline_spec().name}",
                       f"make the port {bits} bits wide or set [output] bits = {port.width // bus.lanes} in the spec")


def make_sim_case(case: Case, sim_dir: Path, frames: np.ndarray) -> SimCase:
    """The :class:`vkit.sim.case.SimCase` of ``case``: frames saved to ``sim_dir/frames.npy``, capture to
    ``sim_dir/capture.npz``; the same seeds and flow patterns whichever drive mode or test drives it."""
    d = case.design
    sim_dir.mkdir(parents=True, exist_ok=True)
    frames_file = sim_dir / "frames.npy"
    np.save(frames_file, frames)
    video, stream = d.family == "video", d.family == "stream"
    return SimCase(
        family=d.family, signals=dict(d.ports), frames_file=str(frames_file),
        capture_file=str(sim_dir / "capture.npz"),
        width=case.width, height=case.height, pixel_format=d.pixel_format, timing=case.timing,
        stalls=case.stalls.as_pattern(case.seed) if video else None,
        stream_gaps=case.gaps.as_pattern(case.seed) if stream else None,
        backpressure=case.backpressure.as_pattern(case.seed + BACKPRESSURE_SEED_OFFSET) if stream else None,
        blanking=case.blanking, blanking_value=case.blanking_value, seed=case.seed,
        clock_period_ns=d.clock_period_ns, reset_active_high=d.reset_active_high, reset_cycles=d.reset_cycles,
        timeout_clocks=d.timeout_clocks, simulator=case.simulator, label=case.id,
        parameters=case.build_parameters(), enable=case.enable, polarity=dict(d.port_polarity),
        component_order=d.component_order, pixels_per_clock=d.pixels_per_clock, lane_order=d.lane_order,
    )
