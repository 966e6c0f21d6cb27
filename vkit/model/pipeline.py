"""The filter pipeline described as data, its bit-exact integer model and its floating-point twin."""

from __future__ import annotations

import difflib
import sys
from collections import OrderedDict
from dataclasses import dataclass, field, fields, replace
from pathlib import Path
from typing import Any, Iterable, Mapping, Sequence

import numpy as np

from vkit.core.errors import ConfigError

if sys.version_info >= (3, 11):
    import tomllib as _toml
else:  # pragma: no cover - exercised on Python 3.10 only
    import tomli as _toml

__all__ = [
    "INPUTS",
    "FILTER_KINDS",
    "GRADIENT_KINDS",
    "ORDER_KINDS",
    "MAGNITUDE_METHODS",
    "LumaSpec",
    "WindowSpec",
    "FilterSpec",
    "MagnitudeSpec",
    "OutputSpec",
    "PipelineSpec",
    "Stage",
    "ModelResult",
    "PRESETS",
    "SPECS_DIR",
    "preset",
    "run_model",
    "run_float",
    "run_model_frames",
]

INPUTS = ("gray8", "rgb888")
"""Input formats: one 8-bit grey component, or 8-bit R, G, B."""
FILTER_KINDS = (
    "sobel", "prewitt", "scharr", "custom", "box", "gaussian", "sharpen", "laplacian", "median", "min", "max",
)
"""Values of ``filter.kind``."""
GRADIENT_KINDS = ("sobel", "prewitt", "scharr")
"""Kinds that give a horizontal and a vertical gradient (stages ``gx``, ``gy``) and then a magnitude."""
ORDER_KINDS = ("median", "min", "max")
"""Order (rank) filters: no weights, no shift."""
MAGNITUDE_METHODS = ("exact", "table", "abs_sum", "max_min_half")
"""Values of ``magnitude.method``."""
BORDERS = ("replicate", "zero", "constant", "mirror", "unchecked")
"""Values of ``window.border`` (the meaning of each is in :mod:`vkit.model.window`)."""
ROUNDINGS = ("truncate", "half_up")
"""Rounding modes of a right shift (see :func:`vkit.model.fixedpoint.shift_round`)."""

# Real coefficients of the named luma weights, for the floating-point twin.
_FLOAT_LUMA = {
    "bt601": (0.299, 0.587, 0.114),  # ITU-R BT.601-7
    "bt709": (0.2126, 0.7152, 0.0722),  # ITU-R BT.709-6
    "opencv": (0.299, 0.587, 0.114),  # OpenCV's RGB2GRAY uses the BT.601 coefficients
}


# --------------------------------------------------------------------------------------------------
# validation helpers


def _closest(word: str, choices: Iterable[str]) -> str:
    choices = list(choices)
    found = difflib.get_close_matches(str(word), choices, n=1, cutoff=0.0)
    return found[0] if found else choices[0]


def _choice(where: str, value: Any, choices: Sequence[str]) -> str:
    if not isinstance(value, str) or value not in choices:
        raise ConfigError(
            f"{where} = {value!r} is not known; use one of {', '.join(choices)} "
            f"(closest: {_closest(str(value), choices)!r})"
        )
    return value


def _int(where: str, value: Any, lo: int | None = None, hi: int | None = None) -> int:
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)):
        raise ConfigError(f"{where} = {value!r} must be an integer; write it without quotes or a decimal point")
    value = int(value)
    if (lo is not None and value < lo) or (hi is not None and value > hi):
        span = f"{lo if lo is not None else '-inf'}..{hi if hi is not None else 'inf'}"
        raise ConfigError(f"{where} = {value} is out of range; use a value in {span}")
    return value


def _bool(where: str, value: Any) -> bool:
    if not isinstance(value, (bool, np.bool_)):
        raise ConfigError(f"{where} = {value!r} must be true or false")
    return bool(value)


def _check_keys(where: str, data: Mapping[str, Any], allowed: Sequence[str]) -> None:
    if not isinstance(data, Mapping):
        raise ConfigError(f"[{where}] must be a table of keys, got {type(data).__name__}; write it as [{where}]")
    for key in data:
        if key not in allowed:
            raise ConfigError(
                f"unknown key {key!r} in {where}; did you mean {_closest(key, allowed)!r}? "
                f"(valid keys: {', '.join(allowed)})"
            )


# --------------------------------------------------------------------------------------------------
# spec dataclasses


@dataclass(frozen=True)
class LumaSpec:
    """RGB to luma (see :func:`vkit.model.luma.luma`).

    Attributes:
        weights: a preset name (``"bt601"``, ``"bt709"``, ``"opencv"``) or integer ``(r, g, b)`` weights.
        fraction_bits: fraction bits of the weights, 0..24. For a preset name, None (the default) keeps
            the preset's own (8 for bt601/bt709, 15 for opencv); another value re-quantises the
            preset's real coefficients to that many bits. Required with integer weights.
        output_bits: bits of the luma value, 1..24 (12 gives 0..4080 for 8-bit RGB and BT.601).
        rounding: rounding of the final right shift, ``"truncate"`` or ``"half_up"``.
    """

    weights: str | tuple[int, int, int] = "bt601"
    fraction_bits: int | None = None
    output_bits: int = 12
    rounding: str = "half_up"

    def __post_init__(self) -> None:
        if isinstance(self.weights, str):
            from vkit.model.luma import PRESETS as luma_presets

            _choice("luma.weights", self.weights, tuple(luma_presets))
        else:
            w = self.weights
            if isinstance(w, (str, bytes)) or not isinstance(w, Sequence) or len(w) != 3:
                raise ConfigError(f"luma.weights = {w!r} must be a preset name or three integers [r, g, b]")
            object.__setattr__(self, "weights", tuple(_int("luma.weights", x, 0) for x in w))
            if self.fraction_bits is None:
                raise ConfigError("luma.fraction_bits is needed with integer weights; add fraction_bits = 8 (or the weights' own)")
        if self.fraction_bits is not None:
            object.__setattr__(self, "fraction_bits", _int("luma.fraction_bits", self.fraction_bits, 0, 24))
        object.__setattr__(self, "output_bits", _int("luma.output_bits", self.output_bits, 1, 24))
        _choice("luma.rounding", self.rounding, ROUNDINGS)

    def resolved(self) -> Any:
        """The :class:`vkit.model.luma.LumaWeights` this spec stands for."""
        from vkit.model.luma import PRESETS as luma_presets
        from vkit.model.luma import LumaWeights, weights_from_coefficients

        if isinstance(self.weights, str):
            base = luma_presets[self.weights]
            if self.fraction_bits is None or self.fraction_bits == base.fraction_bits:
                return base
            return weights_from_coefficients(_FLOAT_LUMA[self.weights], self.fraction_bits, self.weights)
        r, g, b = self.weights
        return LumaWeights(r, g, b, int(self.fraction_bits), "custom")

    def coefficients(self) -> tuple[float, float, float]:
        """Real coefficients ``(kr, kg, kb)`` of the floating-point twin (the standard's, for a preset)."""
        if isinstance(self.weights, str):
            return _FLOAT_LUMA[self.weights]
        scale = float(1 << int(self.fraction_bits))
        return tuple(w / scale for w in self.weights)  # type: ignore[return-value]

    def to_dict(self) -> dict[str, Any]:
        """Plain-data form (the ``[luma]`` table)."""
        out: dict[str, Any] = {"weights": self.weights if isinstance(self.weights, str) else list(self.weights)}
        if self.fraction_bits is not None:
            out["fraction_bits"] = self.fraction_bits
        out.update(output_bits=self.output_bits, rounding=self.rounding)
        return out


@dataclass(frozen=True)
class WindowSpec:
    """The 3x3 window and what it sees beyond the frame edge.

    Attributes:
        border: ``replicate``, ``zero``, ``constant``, ``mirror`` or ``unchecked`` (the one-pixel ring
            is not compared).
        constant: the value read outside the frame when ``border = "constant"``, on the scale of the
            filter's input (luma scale after a luma stage).
    """

    border: str = "replicate"
    constant: int = 0

    def __post_init__(self) -> None:
        _choice("window.border", self.border, BORDERS)
        object.__setattr__(self, "constant", _int("window.constant", self.constant))

    def to_dict(self) -> dict[str, Any]:
        """Plain-data form (the ``[window]`` table)."""
        return {"border": self.border, "constant": self.constant}


@dataclass(frozen=True)
class FilterSpec:
    """The 3x3 filter.

    Attributes:
        kind: one of :data:`FILTER_KINDS`.
        taps: the 3x3 integer weights, rows top to bottom, for ``kind = "custom"`` only (correlation,
            not convolution: ``taps[0][0]`` weighs the upper-left neighbour).
        shift: right shift applied to the weighted sum (to ``gx``/``gy`` for gradient kinds), bits >= 0.
            Not used by order filters, and must stay 0 for ``box`` (which divides by 9).
        rounding: rounding of that shift (and of box's divide by 9), ``"truncate"`` or ``"half_up"``.
        absolute: take the absolute value of the weighted sum before the shift (linear non-gradient kinds).
    """

    kind: str = "sobel"
    taps: tuple[tuple[int, int, int], tuple[int, int, int], tuple[int, int, int]] | None = None
    shift: int = 0
    rounding: str = "half_up"
    absolute: bool = False

    def __post_init__(self) -> None:
        _choice("filter.kind", self.kind, FILTER_KINDS)
        if self.kind == "custom":
            t = self.taps
            ok = isinstance(t, Sequence) and len(t) == 3 and all(isinstance(r, Sequence) and len(r) == 3 for r in t)
            if not ok:
                raise ConfigError(f"filter.taps = {t!r} must be 3 rows of 3 integers for kind 'custom'")
            object.__setattr__(self, "taps", tuple(tuple(_int("filter.taps", v) for v in row) for row in t))
        elif self.taps is not None:
            raise ConfigError(f"filter.taps is only used with kind 'custom', not {self.kind!r}; remove taps or set kind = \"custom\"")
        object.__setattr__(self, "shift", _int("filter.shift", self.shift, 0, 62))
        _choice("filter.rounding", self.rounding, ROUNDINGS)
        object.__setattr__(self, "absolute", _bool("filter.absolute", self.absolute))
        if self.kind == "box" and self.shift:
            raise ConfigError("filter.shift must be 0 for kind 'box' (it divides by 9); use kind 'custom' for a shifted sum")
        if self.kind in ORDER_KINDS and (self.shift or self.absolute):
            raise ConfigError(f"filter.shift and filter.absolute do not apply to order filter {self.kind!r}; remove them")
        if self.kind in GRADIENT_KINDS and self.absolute:
            raise ConfigError(f"filter.absolute does not apply to gradient kind {self.kind!r}; the magnitude is unsigned already")

    @property
    def is_gradient(self) -> bool:
        """True for sobel, prewitt and scharr."""
        return self.kind in GRADIENT_KINDS

    @property
    def is_order(self) -> bool:
        """True for median, min and max."""
        return self.kind in ORDER_KINDS

    def kernels(self) -> dict[str, np.ndarray]:
        """The integer kernels this filter correlates with: ``{"gx": .., "gy": ..}`` or ``{"filtered": ..}``.

        Empty for order filters.
        """
        from vkit.model.kernels import KERNELS

        if self.is_gradient:
            return {"gx": _as_kernel(KERNELS[f"{self.kind}_x"]), "gy": _as_kernel(KERNELS[f"{self.kind}_y"])}
        if self.kind == "custom":
            return {"filtered": np.array(self.taps, dtype=np.int64)}
        if self.is_order:
            return {}
        return {"filtered": _as_kernel(KERNELS[self.kind])}

    def to_dict(self) -> dict[str, Any]:
        """Plain-data form (the ``[filter]`` table)."""
        out: dict[str, Any] = {"kind": self.kind}
        if self.taps is not None:
            out["taps"] = [list(r) for r in self.taps]
        out.update(shift=self.shift, rounding=self.rounding, absolute=self.absolute)
        return out


def _as_kernel(k: Any) -> np.ndarray:
    arr = np.asarray(k)
    as_int = np.rint(arr).astype(np.int64)
    if arr.shape != (3, 3) or not np.array_equal(as_int, arr):
        raise ConfigError(f"kernel {arr.tolist()!r} must be 3x3 integers")
    return as_int


@dataclass(frozen=True)
class MagnitudeSpec:
    """Gradient magnitude from ``gx`` and ``gy`` (see :mod:`vkit.model.magnitude`).

    Attributes:
        method: ``exact`` (integer square root of ``gx**2 + gy**2``), ``table`` (root table addressed
            by the shifted, clamped sum of squares), ``abs_sum`` (``|gx| + |gy|``) or ``max_min_half``.
        shift: right shift of the sum of squares that forms the table address (``table`` only), bits.
        address_bits: table address width (``table`` only); addresses above ``2**address_bits - 1`` clamp.
        table_scale: table entry ``a`` holds ``sqrt(table_scale * a)`` (``table`` only).
        data_bits: width of a table entry (``table`` only).
        rounding: rounding of the table entries, ``"truncate"`` (floor, i.e. an integer square root) or
            ``"half_up"``.
    """

    method: str = "table"
    shift: int = 12
    address_bits: int = 13
    table_scale: int = 8
    data_bits: int = 8
    rounding: str = "truncate"

    def __post_init__(self) -> None:
        _choice("magnitude.method", self.method, MAGNITUDE_METHODS)
        object.__setattr__(self, "shift", _int("magnitude.shift", self.shift, 0, 62))
        object.__setattr__(self, "address_bits", _int("magnitude.address_bits", self.address_bits, 1, 24))
        object.__setattr__(self, "table_scale", _int("magnitude.table_scale", self.table_scale, 1))
        object.__setattr__(self, "data_bits", _int("magnitude.data_bits", self.data_bits, 1, 31))
        _choice("magnitude.rounding", self.rounding, ROUNDINGS)

    def to_dict(self) -> dict[str, Any]:
        """Plain-data form (the ``[magnitude]`` table)."""
        return {f.name: getattr(self, f.name) for f in fields(self)}


@dataclass(frozen=True)
class OutputSpec:
    """Mapping of the last stage to the output pixel.

    ``v = (v * scale) >> shift`` (floor), then saturate to ``0 .. 2**bits - 1``, then ``invert`` gives
    ``max - v``, then ``threshold`` t gives ``max if v >= t else 0``.

    Attributes:
        bits: output pixel width, 1..31.
        shift: right shift after the scale, bits >= 0.
        scale: integer gain >= 1 before the shift.
        invert: map ``v`` to ``2**bits - 1 - v``.
        threshold: None, or a level in ``0 .. 2**bits - 1`` that binarises the output.
    """

    bits: int = 8
    shift: int = 0
    scale: int = 1
    invert: bool = False
    threshold: int | None = None

    def __post_init__(self) -> None:
        object.__setattr__(self, "bits", _int("output.bits", self.bits, 1, 31))
        object.__setattr__(self, "shift", _int("output.shift", self.shift, 0, 62))
        object.__setattr__(self, "scale", _int("output.scale", self.scale, 1))
        object.__setattr__(self, "invert", _bool("output.invert", self.invert))
        if self.threshold is not None:
            object.__setattr__(self, "threshold", _int("output.threshold", self.threshold, 0, (1 << self.bits) - 1))

    @property
    def max_value(self) -> int:
        """Largest output value, ``2**bits - 1``."""
        return (1 << self.bits) - 1

    def to_dict(self) -> dict[str, Any]:
        """Plain-data form (the ``[output]`` table); ``threshold`` only when set."""
        out: dict[str, Any] = {"bits": self.bits, "shift": self.shift, "scale": self.scale, "invert": self.invert}
        if self.threshold is not None:
            out["threshold"] = self.threshold
        return out


_SECTIONS = {
    "luma": LumaSpec,
    "window": WindowSpec,
    "filter": FilterSpec,
    "magnitude": MagnitudeSpec,
    "output": OutputSpec,
}
_TOP_KEYS = ("name", "input", "luma", "window", "filter", "magnitude", "output")


@dataclass(frozen=True)
class PipelineSpec:
    """A whole pipeline: input format, optional luma, window border, filter, optional magnitude, output.

    Build one with :func:`preset`, :meth:`from_dict` or :meth:`from_toml`. ``rgb888`` input always has a
    luma stage (the default :class:`LumaSpec` when none is given); ``gray8`` input has one only when it
    is given (the grey value then stands for R = G = B). Gradient kinds always have a magnitude stage
    (the default :class:`MagnitudeSpec` when none is given); other kinds must not have one.
    """

    name: str = "edge"
    input: str = "rgb888"
    luma: LumaSpec | None = None
    window: WindowSpec = field(default_factory=WindowSpec)
    filter: FilterSpec = field(default_factory=FilterSpec)
    magnitude: MagnitudeSpec | None = None
    output: OutputSpec = field(default_factory=OutputSpec)

    def __post_init__(self) -> None:
        if not isinstance(self.name, str) or not self.name:
            raise ConfigError(f"name = {self.name!r} must be a non-empty string")
        _choice("input", self.input, INPUTS)
        for key, cls in _SECTIONS.items():
            value = getattr(self, key)
            if value is not None and not isinstance(value, cls):
                raise ConfigError(f"{key} must be a {cls.__name__}, got {type(value).__name__}; build it with PipelineSpec.from_dict")
        if self.input == "rgb888" and self.luma is None:
            object.__setattr__(self, "luma", LumaSpec())
        if self.filter.is_gradient and self.magnitude is None:
            object.__setattr__(self, "magnitude", MagnitudeSpec())
        if not self.filter.is_gradient and self.magnitude is not None:
            raise ConfigError(
                f"[magnitude] needs a gradient filter (sobel, prewitt, scharr), not {self.filter.kind!r}; remove [magnitude]"
            )

    # ---------------------------------------------------------------- construction and export

    @classmethod
    def from_dict(cls, data: Mapping[str, Any]) -> PipelineSpec:
        """Build a spec from plain data (the parsed TOML shape).

        Raises:
            ConfigError: on an unknown key (naming it and the closest valid key) or a bad value.
        """
        _check_keys("pipeline spec", data, _TOP_KEYS)
        kwargs: dict[str, Any] = {}
        if "name" in data:
            kwargs["name"] = data["name"]
        if "input" in data:
            kwargs["input"] = data["input"]
        for key, sub in _SECTIONS.items():
            if key not in data or data[key] is None:
                continue
            section = data[key]
            allowed = [f.name for f in fields(sub)]
            _check_keys(key, section, allowed)
            kwargs[key] = sub(**dict(section))
        return cls(**kwargs)

    @classmethod
    def from_toml(cls, path: str | Path) -> PipelineSpec:
        """Read a spec from a TOML file (see the module docs for its keys)."""
        p = Path(path)
        try:
            with p.open("rb") as fh:
                data = _toml.load(fh)
        except FileNotFoundError:
            raise ConfigError(f"pipeline spec file {str(p)!r} does not exist; check the path") from None
        except _toml.TOMLDecodeError as exc:
            raise ConfigError(f"pipeline spec file {str(p)!r} is not valid TOML ({exc}); fix the syntax") from None
        if "name" not in data:
            data = {"name": p.stem, **data}
        return cls.from_dict(data)

    @classmethod
    def from_toml_text(cls, text: str) -> PipelineSpec:
        """Read a spec from TOML text."""
        try:
            data = _toml.loads(text)
        except _toml.TOMLDecodeError as exc:
            raise ConfigError(f"pipeline spec text is not valid TOML ({exc}); fix the syntax") from None
        return cls.from_dict(data)

    def to_dict(self) -> dict[str, Any]:
        """Plain-data form; ``PipelineSpec.from_dict(spec.to_dict()) == spec``."""
        out: dict[str, Any] = {"name": self.name, "input": self.input}
        for key in _SECTIONS:
            value = getattr(self, key)
            if value is not None:
                out[key] = value.to_dict()
        return out

    def to_toml(self) -> str:
        """TOML text; ``PipelineSpec.from_toml_text(spec.to_toml()) == spec``."""
        data = self.to_dict()
        lines = [f"name = {_toml_value(data.pop('name'))}", f"input = {_toml_value(data.pop('input'))}"]
        for key, table in data.items():
            lines.append("")
            lines.append(f"[{key}]")
            lines.extend(f"{k} = {_toml_value(v)}" for k, v in table.items())
        return "\n".join(lines) + "\n"

    def with_border(self, border: str) -> PipelineSpec:
        """A copy with another ``window.border`` policy (the constant is kept)."""
        return replace(self, window=replace(self.window, border=border))

    # ---------------------------------------------------------------- derived facts

    @property
    def has_luma(self) -> bool:
        """True when a luma stage runs."""
        return self.luma is not None

    def stage_names(self) -> list[str]:
        """Names of the stages :func:`run_model` produces, in order."""
        names = ["input"]
        if self.luma is not None:
            names.append("luma")
        if self.filter.is_gradient:
            names += ["gx", "gy"]
            if self.magnitude is not None and self.magnitude.method in ("exact", "table"):
                names.append("sum_sq")
            if self.magnitude is not None and self.magnitude.method == "table":
                names.append("address")
            names.append("magnitude")
        else:
            names.append("filtered")
        names.append("output")
        return names


def _toml_value(value: Any) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, (int, np.integer)):
        return str(int(value))
    if isinstance(value, str):
        return '"' + value.replace("\\", "\\\\").replace('"', '\\"') + '"'
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(_toml_value(v) for v in value) + "]"
    raise ConfigError(f"cannot write {value!r} ({type(value).__name__}) as TOML")


# --------------------------------------------------------------------------------------------------
# presets

_EDGE = PipelineSpec(
    name="edge",
    input="rgb888",
    # BT.601 weights 77/150/29 (8 fraction bits), 12-bit luma: (77R + 150G + 29B + 8) >> 4, 0..4080.
    luma=LumaSpec(weights="bt601", fraction_bits=8, output_bits=12, rounding="half_up"),
    window=WindowSpec(border="replicate"),
    filter=FilterSpec(kind="sobel"),
    # address = min((gx^2 + gy^2) >> 12, 8191); magnitude = isqrt(8 * address), 0..255.
    magnitude=MagnitudeSpec(method="table", shift=12, address_bits=13, table_scale=8, data_bits=8, rounding="truncate"),
    output=OutputSpec(bits=8),
)

PRESETS: dict[str, PipelineSpec] = {
    "edge": _EDGE,
    # (sum of [1 2 1; 2 4 2; 1 2 1] * p + 8) >> 4
    "blur": PipelineSpec(
        name="blur", input="gray8", filter=FilterSpec(kind="gaussian", shift=4, rounding="half_up"), output=OutputSpec(bits=8)
    ),
    "median": PipelineSpec(name="median", input="gray8", filter=FilterSpec(kind="median"), output=OutputSpec(bits=8)),
    # 5p - up - down - left - right, saturated to 0..255
    "sharpen": PipelineSpec(name="sharpen", input="gray8", filter=FilterSpec(kind="sharpen"), output=OutputSpec(bits=8)),
    "erode": PipelineSpec(name="erode", input="gray8", filter=FilterSpec(kind="min"), output=OutputSpec(bits=8)),
    "dilate": PipelineSpec(name="dilate", input="gray8", filter=FilterSpec(kind="max"), output=OutputSpec(bits=8)),
    # isqrt(gx^2 + gy^2) is 0..23080 (15 bits); >> 7 brings it to 8 bits (0..180).
    "edge_exact": replace(
        _EDGE, name="edge_exact", magnitude=MagnitudeSpec(method="exact"), output=OutputSpec(bits=8, shift=7)
    ),
}
"""The built-in pipelines by name. Their formulas are the ones the sample RTL implements."""


SPECS_DIR = Path(__file__).parent / "specs"
"""Folder of the presets as TOML files (``<name>.toml``), starting points for your own specs."""


def preset(name: str) -> PipelineSpec:
    """The built-in pipeline ``name`` (one of :data:`PRESETS`)."""
    if name not in PRESETS:
        raise ConfigError(f"pipeline preset {name!r} is not known; use one of {', '.join(PRESETS)} (closest: {_closest(name, PRESETS)!r})")
    return PRESETS[name]


# --------------------------------------------------------------------------------------------------
# model results


@dataclass
class Stage:
    """One stage's values for a whole frame.

    Attributes:
        name: stage name (see :meth:`PipelineSpec.stage_names`).
        array: ``(H, W)`` values (``(H, W, 3)`` for an RGB input stage); a signed integer dtype wide
            enough for the range in the bit-exact model, float64 in the floating-point twin.
        lo, hi: the stage's theoretical range (from :func:`vkit.model.widths.stage_ranges`), not the values seen.
        signed: True when the theoretical range goes below 0.
        bits: width of the theoretical range.
        clamped: ``(H, W)`` bool, True where this stage clamped or saturated; None when the stage
            cannot clamp for any input.
    """

    name: str
    array: np.ndarray
    lo: int
    hi: int
    signed: bool
    bits: int
    clamped: np.ndarray | None = None


@dataclass
class ModelResult:
    """What :func:`run_model` or :func:`run_float` returns for one frame.

    Attributes:
        output: ``(H, W)`` output pixels (integers in ``0 .. 2**bits - 1``; float64 for the twin).
        valid_mask: ``(H, W)`` bool, False where the border policy leaves the pixel unchecked.
        stages: stage name to :class:`Stage`, in pipeline order.
    """

    output: np.ndarray
    valid_mask: np.ndarray
    stages: "OrderedDict[str, Stage]"


# --------------------------------------------------------------------------------------------------
# bit-exact model

_BAND_ROWS = 32


@dataclass(frozen=True)
class _Plan:
    spec: PipelineSpec
    widths: dict[str, Any]
    dtypes: dict[str, np.dtype]
    weights: Any
    kernels: dict[str, tuple[tuple[int, int, int], ...]]
    pad_dtype: np.dtype
    table: np.ndarray | None


_PLANS: dict[PipelineSpec, _Plan] = {}


def _plan(spec: PipelineSpec) -> _Plan:
    plan = _PLANS.get(spec)
    if plan is not None:
        return plan
    from vkit.model.widths import dtype_for_range, stage_range_map

    widths = stage_range_map(spec)
    dtypes = {name: dtype_for_range(w.lo, w.hi) for name, w in widths.items()}
    weights = spec.luma.resolved() if spec.luma is not None else None
    kernels = {name: tuple(tuple(int(v) for v in row) for row in k.tolist()) for name, k in spec.filter.kernels().items()}
    src = widths["luma"] if "luma" in widths else widths["input"]
    bound = max(abs(src.lo), abs(src.hi))
    for k in kernels.values():
        bound = max(bound, sum(abs(v) for row in k for v in row) * max(abs(src.lo), abs(src.hi), abs(spec.window.constant)))
    if spec.filter.shift:
        bound += 1 << spec.filter.shift
    pad_dtype = dtype_for_range(-bound - 1, bound + 4) if not spec.filter.is_order else dtype_for_range(
        min(src.lo, spec.window.constant), max(src.hi, spec.window.constant)
    )
    table = None
    if spec.magnitude is not None and spec.magnitude.method == "table":
        from vkit.model.magnitude import root_table

        m = spec.magnitude
        table = np.asarray(root_table(m.address_bits, m.data_bits, m.table_scale, m.rounding)).astype(dtypes["magnitude"])
    plan = _Plan(spec, widths, dtypes, weights, kernels, pad_dtype, table)
    if len(_PLANS) >= 64:  # specs are few in practice; keep the cache bounded anyway
        _PLANS.clear()
    _PLANS[spec] = plan
    return plan


def _check_image(spec: PipelineSpec, image: Any) -> np.ndarray:
    arr = np.asarray(image)
    if spec.input == "rgb888":
        if arr.ndim != 3 or arr.shape[2] != 3 or arr.shape[0] < 1 or arr.shape[1] < 1:
            raise ConfigError(
                f"pipeline {spec.name!r} takes rgb888 input: expected a (height, width, 3) uint8 array, got shape "
                f"{arr.shape}; convert a grey frame with np.repeat(img[..., None], 3, axis=2) or use a gray8 spec"
            )
    elif arr.ndim != 2 or arr.shape[0] < 1 or arr.shape[1] < 1:
        raise ConfigError(
            f"pipeline {spec.name!r} takes gray8 input: expected a (height, width) uint8 array, got shape "
            f"{arr.shape}; convert RGB first (e.g. vkit.model.luma.luma(rgb, vkit.model.luma.BT601)) or use an rgb888 spec"
        )
    if arr.dtype != np.uint8:
        raise ConfigError(
            f"pipeline {spec.name!r} takes uint8 pixels, got dtype {arr.dtype}; "
            "check the range is 0..255 and convert with image.astype(np.uint8)"
        )
    return arr


def _luma_rows(plan: _Plan, img: np.ndarray) -> np.ndarray:
    """Luma of a block of rows, ``(rows, W)`` int32 (a grey block stands for R = G = B)."""
    from vkit.model.luma import luma

    spec = plan.spec
    assert spec.luma is not None and plan.weights is not None
    rgb = img if img.ndim == 3 else np.repeat(img[..., None], 3, axis=2)
    return luma(rgb, plan.weights, spec.luma.output_bits, spec.luma.rounding)


def _new_stage(plan: _Plan, name: str, array: np.ndarray, clamped: np.ndarray | None) -> Stage:
    w = plan.widths[name]
    return Stage(name, array, w.lo, w.hi, w.signed, w.bits, clamped)


def run_model(spec: PipelineSpec, image: Any, *, keep_stages: bool = True, band_rows: int = _BAND_ROWS) -> ModelResult:
    """Bit-exact integer model of the pipeline on one frame.

    The frame is processed in horizontal bands of ``band_rows`` rows (each read with a one-row halo)
    so temporaries stay in cache; the result does not depend on ``band_rows``.

    Args:
        spec: the pipeline.
        image: ``(H, W, 3)`` uint8 RGB for ``rgb888`` input, ``(H, W)`` uint8 for ``gray8``.
        keep_stages: False keeps only the ``output`` stage (faster; ``stages`` then holds ``input`` and
            ``output`` only).
        band_rows: rows per band, >= 1.

    Returns:
        :class:`ModelResult`; ``output`` is a signed integer array with values in ``0 .. 2**bits - 1``.

    Raises:
        ConfigError: wrong image shape or dtype for the spec's input format.
    """
    from vkit.model.fixedpoint import shift_round
    from vkit.model.kernels import correlate_padded, maximum3x3, median3x3, minimum3x3
    from vkit.model.window import interior_mask, pad

    img = _check_image(spec, image)
    band_rows = _int("band_rows", band_rows, 1)
    plan = _plan(spec)
    height, width = img.shape[:2]
    filt, mag, out_spec = spec.filter, spec.magnitude, spec.output
    names = [n for n in spec.stage_names() if n != "input"]
    kept = names if keep_stages else ["output"]
    clamp_names = [n for n in kept if plan.widths[n].can_clamp]
    arrays, clamps = _allocate(
        (height, width), [(n, plan.dtypes[n]) for n in kept], [(n, np.dtype(bool)) for n in clamp_names]
    )
    border, constant = spec.window.border, spec.window.constant
    order_func = {"median": median3x3, "min": minimum3x3, "max": maximum3x3}.get(filt.kind)
    top_value = out_spec.max_value

    for r0 in range(0, height, band_rows):
        r1 = min(height, r0 + band_rows)
        a0, a1 = max(0, r0 - 1), min(height, r1 + 1)
        top = r0 - a0
        rows = r1 - r0
        band: dict[str, np.ndarray] = {}
        views = {name: arrays[name][r0:r1] for name in kept}
        src = img[a0:a1]
        if spec.luma is not None:
            src = _luma_rows(plan, src)
            band["luma"] = src[top : top + rows]
        if order_func is not None:
            value = order_func(src, border, constant)[top : top + rows]
            band["filtered"] = value
        else:
            padded = pad(src, border, constant, dtype=plan.pad_dtype)[top : top + rows + 2]
            for name, k in plan.kernels.items():
                acc = correlate_padded(padded, k)
                if filt.absolute:
                    acc = np.abs(acc, out=acc)
                if filt.kind == "box":
                    acc = np.floor_divide(acc + 4, 9) if filt.rounding == "half_up" else np.floor_divide(acc, 9)
                else:
                    acc = shift_round(acc, filt.shift, filt.rounding)
                band[name] = acc
        if filt.is_gradient:
            assert mag is not None
            value = band["magnitude"] = _magnitude_band(plan, band, views)
        else:
            value = band["filtered"]
        # output mapping (order filters on gray8 hand back uint8: widen so max - v cannot wrap)
        v = value if value.dtype.kind != "u" else value.astype(np.int32)
        if out_spec.scale != 1:
            v = np.multiply(v, out_spec.scale, dtype=np.int64)
        if out_spec.shift:
            v = np.right_shift(v, out_spec.shift)
        if plan.widths["output"].can_clamp:
            clamps["output"][r0:r1] = (v < 0) | (v > top_value)
            v = np.clip(v, 0, top_value)
        if out_spec.invert:
            v = top_value - v
        if out_spec.threshold is not None:
            v = np.where(v >= out_spec.threshold, top_value, 0)
        band["output"] = v
        for name in kept:
            if band[name] is not views[name]:
                views[name][...] = band[name]
        for name in clamp_names:
            if name != "output":
                clamps[name][r0:r1] = band[f"{name}_clamped"]

    stages: OrderedDict[str, Stage] = OrderedDict()
    stages["input"] = _new_stage(plan, "input", img, None)
    for name in kept:
        stages[name] = _new_stage(plan, name, arrays[name], clamps.get(name))
    return ModelResult(arrays["output"], interior_mask(height, width, border), stages)


def _allocate(
    shape: tuple[int, int], *groups: list[tuple[str, np.dtype]]
) -> tuple[dict[str, np.ndarray], ...]:
    """Arrays of ``shape`` carved from one allocation (one large block is much cheaper for the
    allocator and the page-fault path than several frame-sized ones)."""
    count = shape[0] * shape[1]
    sizes = [[(name, dt, -(-count * dt.itemsize // 64) * 64) for name, dt in group] for group in groups]
    block = np.empty(sum(size for group in sizes for _, _, size in group), dtype=np.uint8)
    offset = 0
    out: list[dict[str, np.ndarray]] = []
    for group in sizes:
        arrays = {}
        for name, dt, size in group:
            arrays[name] = block[offset : offset + count * dt.itemsize].view(dt).reshape(shape)
            offset += size
        out.append(arrays)
    return tuple(out)


def _magnitude_band(plan: _Plan, band: dict[str, np.ndarray], views: dict[str, np.ndarray]) -> np.ndarray:
    """Magnitude of one band from ``band["gx"]``, ``band["gy"]``; writes ``sum_sq`` (and ``magnitude``)
    straight into the frame arrays in ``views`` when they are kept."""
    from vkit.model import magnitude as magmod

    m = plan.spec.magnitude
    assert m is not None
    gx, gy = band["gx"], band["gy"]
    if m.method in ("exact", "table"):
        sq_type = plan.dtypes["sum_sq"]
        ss = views.get("sum_sq")
        ss = np.multiply(gx, gx, dtype=sq_type, out=ss)
        ss += np.multiply(gy, gy, dtype=sq_type)
        band["sum_sq"] = ss
        if m.method == "exact":
            return magmod.isqrt(ss).astype(plan.dtypes["magnitude"], copy=False)
        addr, clamped = magmod.table_address(ss, m.shift, m.address_bits)
        band["address_clamped"] = clamped
        band["address"] = addr
        assert plan.table is not None
        out = views.get("magnitude")
        return plan.table.take(addr) if out is None else plan.table.take(addr, out=out)
    func = magmod.magnitude_abs_sum if m.method == "abs_sum" else magmod.magnitude_max_min_half
    return np.asarray(func(gx, gy)).astype(plan.dtypes["magnitude"], copy=False)


# --------------------------------------------------------------------------------------------------
# floating-point twin


def run_float(spec: PipelineSpec, image: Any) -> ModelResult:
    """The floating-point twin of :func:`run_model`: the same pipeline with real arithmetic.

    Differences from the bit-exact model: luma uses the standard's real coefficients (BT.601
    0.299/0.587/0.114, BT.709 0.2126/0.7152/0.0722; custom weights divided by ``2**fraction_bits``),
    scaled to ``output_bits``; kernels are applied in float64 and divided by ``2**shift`` (by 9 for
    box) with no rounding; the magnitude is the true ``sqrt(gx**2 + gy**2)`` on the scale the fixed
    method approximates (``sqrt(table_scale * sum_sq / 2**shift)`` for the table), with no address
    clamp; the output is ``v * scale / 2**shift``, limited to ``0 .. 2**bits - 1`` (the output word
    itself), then inverted or thresholded like the fixed output. Every array is float64.

    Stage ``lo``/``hi``/``bits`` repeat the bit-exact model's theoretical ranges, for comparison.
    ``clamped`` is set only on ``output`` (where the limit to the output word engaged).
    """
    from vkit.model.kernels import correlate3x3, maximum3x3, median3x3, minimum3x3
    from vkit.model.luma import luma_float
    from vkit.model.window import interior_mask

    img = _check_image(spec, image)
    plan = _plan(spec)
    height, width = img.shape[:2]
    border, constant = spec.window.border, float(spec.window.constant)
    filt, m, o = spec.filter, spec.magnitude, spec.output
    arrays: dict[str, np.ndarray] = {}
    src = img.astype(np.float64)
    if spec.luma is not None:
        rgb = img if img.ndim == 3 else np.repeat(img[..., None], 3, axis=2)
        src = luma_float(rgb, spec.luma.coefficients(), spec.luma.output_bits)
        arrays["luma"] = src
    if filt.is_order:
        func = {"median": median3x3, "min": minimum3x3, "max": maximum3x3}[filt.kind]
        arrays["filtered"] = func(src, border, constant).astype(np.float64)
        value = arrays["filtered"]
    else:
        for name, k in filt.kernels().items():
            acc = correlate3x3(src, k.tolist(), border, constant)
            if filt.absolute:
                acc = np.abs(acc)
            arrays[name] = acc / 9.0 if filt.kind == "box" else acc / float(1 << filt.shift)
        if filt.is_gradient:
            assert m is not None
            ss = arrays["gx"] ** 2 + arrays["gy"] ** 2
            if m.method in ("exact", "table"):
                arrays["sum_sq"] = ss
            if m.method == "table":
                arrays["address"] = ss / float(1 << m.shift)
                arrays["magnitude"] = np.sqrt(m.table_scale * arrays["address"])
            else:
                arrays["magnitude"] = np.sqrt(ss)
            value = arrays["magnitude"]
        else:
            value = arrays["filtered"]
    top = float(o.max_value)
    v = value * (o.scale / float(1 << o.shift))
    clamped = (v < 0) | (v > top)
    v = np.clip(v, 0.0, top)
    if o.invert:
        v = top - v
    if o.threshold is not None:
        v = np.where(v >= o.threshold, top, 0.0)
    arrays["output"] = v
    stages: OrderedDict[str, Stage] = OrderedDict()
    stages["input"] = _new_stage(plan, "input", img.astype(np.float64), None)
    for name in spec.stage_names()[1:]:
        stages[name] = _new_stage(plan, name, arrays[name], clamped if name == "output" else None)
    return ModelResult(v, interior_mask(height, width, border), stages)


def run_model_frames(spec: PipelineSpec, frames: Iterable[Any], *, keep_stages: bool = True) -> list[ModelResult]:
    """:func:`run_model` on each frame of a sequence, in order."""
    return [run_model(spec, frame, keep_stages=keep_stages) for frame in frames]
