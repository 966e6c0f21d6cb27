"""The filter pipeline described as data: the spec sections, their checks, and the TOML form."""

from __future__ import annotations

import sys
from dataclasses import dataclass, field, fields, replace
from pathlib import Path
from typing import Any, Mapping, Sequence

import numpy as np

from vkit.core.errors import ConfigError
from vkit.core.vocab import PIXEL_FORMAT_BITS, components, is_rgb, is_ycbcr, sample_bits
from vkit.core.validate import check_keys, fail, want_bool, want_choice, want_int, want_table
from vkit.model.fixedpoint import ROUNDING
from vkit.model.kernels import KERNELS
from vkit.model.luma import PRESETS as LUMA_PRESETS
from vkit.model.luma import REAL_COEFFICIENTS, LumaWeights, weights_from_coefficients
from vkit.model.magnitude import METHODS
from vkit.model.window import BORDERS
from vkit.model.ycbcr import RANGES, STANDARDS, YCbCrCoding

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
    "BORDERS",
    "ROUNDINGS",
    "PASSTHROUGH_MAPPINGS",
    "CHROMA_MODES",
    "WHERE",
    "CodingSpec",
    "LumaSpec",
    "WindowSpec",
    "FilterSpec",
    "MagnitudeSpec",
    "OutputSpec",
    "PipelineSpec",
]

WHERE = "pipeline spec"
"""What a spec error names as the place to edit (the spec file, or the ``spec`` table of a design)."""

INPUTS = tuple(PIXEL_FORMAT_BITS)
"""Input formats: one grey sample or R, G, B samples of 1..16 bits each (``gray10``, ``rgb121212``)."""
FILTER_KINDS = (
    "sobel", "prewitt", "scharr", "custom", "box", "gaussian", "sharpen", "laplacian", "median", "min", "max",
)
"""Values of ``filter.kind``."""
GRADIENT_KINDS = ("sobel", "prewitt", "scharr")
"""Kinds that give a horizontal and a vertical gradient (stages ``gx``, ``gy``) and then a magnitude."""
ORDER_KINDS = ("median", "min", "max")
"""Order (rank) filters: no weights, no shift."""
MAGNITUDE_METHODS = METHODS
"""Values of ``magnitude.method`` (the methods of :mod:`vkit.model.magnitude`)."""
ROUNDINGS = ROUNDING
PASSTHROUGH_MAPPINGS = ("mapped", "raw")
"""Values of ``window.passthrough``: the frame's input sample through the output mapping, or as it is."""
"""Rounding modes of a right shift (see :func:`vkit.model.fixedpoint.shift_round`)."""


@dataclass(frozen=True)
class LumaSpec:
    """RGB to luma (see :func:`vkit.model.luma.luma`).

    Attributes:
        weights: a preset name (``"bt601"``, ``"bt709"``, ``"opencv"``) or integer ``(r, g, b)`` weights.
        fraction_bits: fraction bits of the weights, 0..24. For a preset name, None (the default) keeps
            the preset's own (8 for bt601/bt709, 15 for opencv); another value re-quantises the
            preset's real coefficients to that many bits. Required with integer weights.
        output_bits: bits of the luma value, 1..24 (12 gives 0..4080 for 8-bit RGB and BT.601).
        rounding: rounding of the final right shift, ``"truncate"``, ``"half_up"`` or ``"half_even"``.
    """

    weights: str | tuple[int, int, int] = "bt601"
    fraction_bits: int | None = None
    output_bits: int = 12
    rounding: str = "half_up"

    def __post_init__(self) -> None:
        if isinstance(self.weights, str):
            want_choice(WHERE, "luma.weights", self.weights, tuple(LUMA_PRESETS))
        else:
            w = self.weights
            if isinstance(w, (str, bytes)) or not isinstance(w, Sequence) or len(w) != 3:
                raise fail(WHERE, "luma.weights", w, "neither a preset name nor three integers",
                           f"write [r, g, b] or one of {', '.join(LUMA_PRESETS)}")
            object.__setattr__(self, "weights", tuple(want_int(WHERE, "luma.weights", x, 0) for x in w))
            if self.fraction_bits is None:
                raise ConfigError(
                    f"{WHERE}: luma.fraction_bits is missing and integer weights need it; "
                    "add fraction_bits = 8 (or the weights' own)"
                )
        if self.fraction_bits is not None:
            object.__setattr__(self, "fraction_bits", want_int(WHERE, "luma.fraction_bits", self.fraction_bits, 0, 24))
        object.__setattr__(self, "output_bits", want_int(WHERE, "luma.output_bits", self.output_bits, 1, 24))
        want_choice(WHERE, "luma.rounding", self.rounding, ROUNDINGS)

    def resolved(self) -> LumaWeights:
        """The :class:`vkit.model.luma.LumaWeights` this spec stands for."""
        if isinstance(self.weights, str):
            base = LUMA_PRESETS[self.weights]
            if self.fraction_bits is None or self.fraction_bits == base.fraction_bits:
                return base
            return weights_from_coefficients(REAL_COEFFICIENTS[self.weights], self.fraction_bits, self.weights)
        r, g, b = self.weights
        return LumaWeights(r, g, b, int(self.fraction_bits), "custom")

    def coefficients(self) -> tuple[float, float, float]:
        """Real coefficients ``(kr, kg, kb)`` of the floating-point twin (the standard's, for a preset)."""
        if isinstance(self.weights, str):
            return REAL_COEFFICIENTS[self.weights]
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
        border: ``replicate``, ``zero``, ``constant``, ``mirror``, ``reflect``, ``passthrough`` (the
            output on the one-pixel frame is the filter's input sample: the grey value, or the luma of
            an RGB pixel) or ``unchecked`` (the one-pixel ring is not compared).
        constant: the value read outside the frame when ``border = "constant"``, on the scale of the
            filter's input (luma scale after a luma stage).
        passthrough: for ``border = "passthrough"``, ``"mapped"`` (the input sample goes through the
            output mapping: scale, shift, saturate, invert, threshold) or ``"raw"`` (the input sample
            is the output as it is; it must fit ``output.bits``).
    """

    border: str = "replicate"
    constant: int = 0
    passthrough: str = "mapped"

    def __post_init__(self) -> None:
        want_choice(WHERE, "window.border", self.border, BORDERS)
        object.__setattr__(self, "constant", want_int(WHERE, "window.constant", self.constant))
        want_choice(WHERE, "window.passthrough", self.passthrough, PASSTHROUGH_MAPPINGS)

    def to_dict(self) -> dict[str, Any]:
        """Plain-data form (the ``[window]`` table); ``passthrough`` only when it says something."""
        out: dict[str, Any] = {"border": self.border, "constant": self.constant}
        if self.border == "passthrough" or self.passthrough != "mapped":
            out["passthrough"] = self.passthrough
        return out


@dataclass(frozen=True)
class FilterSpec:
    """The 3x3 filter.

    Attributes:
        kind: one of :data:`FILTER_KINDS`.
        taps: the 3x3 integer weights, rows top to bottom, for ``kind = "custom"`` only (correlation,
            not convolution: ``taps[0][0]`` weighs the upper-left neighbour).
        shift: right shift applied to the weighted sum (to ``gx``/``gy`` for gradient kinds), bits >= 0.
            Not used by order filters, and must stay 0 for ``box`` (which divides by 9).
        rounding: rounding of that shift (and of box's divide by 9), ``"truncate"``, ``"half_up"`` or ``"half_even"``.
        absolute: take the absolute value of the weighted sum before the shift (linear non-gradient kinds).
    """

    kind: str = "sobel"
    taps: tuple[tuple[int, int, int], tuple[int, int, int], tuple[int, int, int]] | None = None
    shift: int = 0
    rounding: str = "half_up"
    absolute: bool = False

    def __post_init__(self) -> None:
        want_choice(WHERE, "filter.kind", self.kind, FILTER_KINDS)
        if self.kind == "custom":
            t = self.taps
            ok = isinstance(t, Sequence) and len(t) == 3 and all(isinstance(r, Sequence) and len(r) == 3 for r in t)
            if not ok:
                raise fail(WHERE, "filter.taps", t, "not 3 rows of 3 integers",
                           "kind 'custom' needs [[a, b, c], [d, e, f], [g, h, i]]")
            object.__setattr__(self, "taps", tuple(tuple(want_int(WHERE, "filter.taps", v) for v in row) for row in t))
        elif self.taps is not None:
            raise fail(WHERE, "filter.taps", self.taps, f"only used with kind 'custom', not {self.kind!r}",
                       'remove taps or set kind = "custom"')
        object.__setattr__(self, "shift", want_int(WHERE, "filter.shift", self.shift, 0, 62))
        want_choice(WHERE, "filter.rounding", self.rounding, ROUNDINGS)
        object.__setattr__(self, "absolute", want_bool(WHERE, "filter.absolute", self.absolute))
        self._check_kind_options()

    def _check_kind_options(self) -> None:
        """Options that only some kinds take."""
        if self.kind == "box" and self.shift:
            raise fail(WHERE, "filter.shift", self.shift, "not 0 for kind 'box' (it divides by 9)",
                       "use kind 'custom' for a shifted sum")
        if self.kind in ORDER_KINDS and (self.shift or self.absolute):
            key, value = ("filter.shift", self.shift) if self.shift else ("filter.absolute", self.absolute)
            raise fail(WHERE, key, value, f"not used by order filter {self.kind!r}", "remove it")
        if self.kind in GRADIENT_KINDS and self.absolute:
            raise fail(WHERE, "filter.absolute", self.absolute, f"not used by gradient kind {self.kind!r}",
                       "remove it: the magnitude is unsigned already")

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
        want_choice(WHERE, "magnitude.method", self.method, MAGNITUDE_METHODS)
        object.__setattr__(self, "shift", want_int(WHERE, "magnitude.shift", self.shift, 0, 62))
        object.__setattr__(self, "address_bits", want_int(WHERE, "magnitude.address_bits", self.address_bits, 1, 24))
        object.__setattr__(self, "table_scale", want_int(WHERE, "magnitude.table_scale", self.table_scale, 1))
        object.__setattr__(self, "data_bits", want_int(WHERE, "magnitude.data_bits", self.data_bits, 1, 31))
        want_choice(WHERE, "magnitude.rounding", self.rounding, ROUNDINGS)

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
        object.__setattr__(self, "bits", want_int(WHERE, "output.bits", self.bits, 1, 31))
        object.__setattr__(self, "shift", want_int(WHERE, "output.shift", self.shift, 0, 62))
        object.__setattr__(self, "scale", want_int(WHERE, "output.scale", self.scale, 1))
        object.__setattr__(self, "invert", want_bool(WHERE, "output.invert", self.invert))
        if self.threshold is not None:
            object.__setattr__(self, "threshold", want_int(WHERE, "output.threshold", self.threshold, 0, self.max_value))

    @property
    def max_value(self) -> int:
        """Largest output value, ``2**bits - 1``."""
        return (1 << self.bits) - 1

    def levels(self, value: np.ndarray, top: float) -> np.ndarray:
        """The last two steps of the output mapping on ``value`` (already within ``0 .. top``):
        ``invert``, then ``threshold``. ``top`` is :attr:`max_value`, as an int or a float (the float
        twin), and sets the type of the result."""
        if self.invert:
            value = top - value
        if self.threshold is not None:
            value = np.where(value >= self.threshold, top, 0 * top)
        return value

    def to_dict(self) -> dict[str, Any]:
        """Plain-data form (the ``[output]`` table); ``threshold`` only when set."""
        out: dict[str, Any] = {"bits": self.bits, "shift": self.shift, "scale": self.scale, "invert": self.invert}
        if self.threshold is not None:
            out["threshold"] = self.threshold
        return out


@dataclass(frozen=True)
class CodingSpec:
    """How R'G'B' becomes the Y'CbCr a Y'CbCr design takes (the ``[coding]`` table): the standard's
    coefficients and the range. The model filters Y' as it comes and never needs it; RGB stimulus
    (image files and patterns) is converted with it (:func:`vkit.model.ycbcr.rgb_to_ycbcr`).

    Args:
        standard: ``"bt601"`` (ITU-R BT.601) or ``"bt709"`` (ITU-R BT.709).
        range: ``"full"`` or ``"limited"`` (Y' 16..235, Cb/Cr 16..240 at 8 bits).
    """

    standard: str = "bt601"
    range: str = "full"

    def __post_init__(self) -> None:
        want_choice(WHERE, "coding.standard", self.standard, tuple(STANDARDS))
        want_choice(WHERE, "coding.range", self.range, RANGES)

    def at_bits(self, bits: int) -> YCbCrCoding:
        """The coding on samples of ``bits`` bits (RGB drawn at 8 bits or more)."""
        return YCbCrCoding(self.standard, self.range, max(8, int(bits)))

    def to_dict(self) -> dict[str, Any]:
        """Plain-data form (the ``[coding]`` table)."""
        return {"standard": self.standard, "range": self.range}


_SECTIONS = {
    "coding": CodingSpec,
    "luma": LumaSpec,
    "window": WindowSpec,
    "filter": FilterSpec,
    "magnitude": MagnitudeSpec,
    "output": OutputSpec,
}
_TOP_KEYS = ("name", "input", "chroma", "coding", "luma", "window", "filter", "magnitude", "output")
CHROMA_MODES = ("drop", "pass")
"""Values of ``chroma`` for a Y'CbCr input: the colour differences are dropped (the output is Y' alone)
or passed through, delayed with their pixel, above Y' in the output word."""


@dataclass(frozen=True)
class PipelineSpec:
    """A whole pipeline: input format, optional luma, window border, filter, optional magnitude, output.

    Build one with :func:`preset`, :meth:`from_dict` or :meth:`from_toml`. RGB input (``rgb888``,
    ``rgb101010``, ...) always has a luma stage (the default :class:`LumaSpec` when none is given); grey
    input (``gray8``, ``gray10``, ...) has one only when it is given (the grey value then stands for
    R = G = B). The input's sample width (1..16 bits) sets every stage's range. Gradient kinds always have a magnitude stage
    (the default :class:`MagnitudeSpec` when none is given); other kinds must not have one.
    """

    name: str = "edge"
    input: str = "rgb888"
    luma: LumaSpec | None = None
    chroma: str = "drop"
    coding: CodingSpec | None = None
    window: WindowSpec = field(default_factory=WindowSpec)
    filter: FilterSpec = field(default_factory=FilterSpec)
    magnitude: MagnitudeSpec | None = None
    output: OutputSpec = field(default_factory=OutputSpec)

    def __post_init__(self) -> None:
        if not isinstance(self.name, str) or not self.name:
            raise fail(WHERE, "name", self.name, "not a non-empty string", 'give a name in quotes, e.g. name = "edge"')
        want_choice(WHERE, "input", self.input, INPUTS)
        for key, cls in _SECTIONS.items():
            value = getattr(self, key)
            if value is not None and not isinstance(value, cls):
                raise ConfigError(
                    f"{WHERE}: {key} is a {type(value).__name__}, not a {cls.__name__}; build it with PipelineSpec.from_dict"
                )
        if is_rgb(self.input) and self.luma is None:
            object.__setattr__(self, "luma", LumaSpec())
        if self.filter.is_gradient and self.magnitude is None:
            object.__setattr__(self, "magnitude", MagnitudeSpec())
        if not self.filter.is_gradient and self.magnitude is not None:
            raise ConfigError(
                f"{WHERE}: [magnitude] needs a gradient filter (sobel, prewitt, scharr), not {self.filter.kind!r}; "
                "remove [magnitude]"
            )
        self._check_passthrough()
        self._check_chroma()

    def _check_chroma(self) -> None:
        """Y'CbCr input: Y' is filtered (no luma stage); ``chroma`` says what becomes of Cb and Cr."""
        want_choice(WHERE, "chroma", self.chroma, CHROMA_MODES)
        if not is_ycbcr(self.input):
            if self.chroma != "drop":
                raise fail(WHERE, "chroma", self.chroma, f"only for a Y'CbCr input, not {self.input}",
                           "remove it, or give input = \"ycbcr422_8\" (or another Y'CbCr format)")
            if self.coding is not None:
                raise fail(WHERE, "coding", "(a table)", f"only for a Y'CbCr input, not {self.input}",
                           "remove [coding], or give input = \"ycbcr422_8\" (or another Y'CbCr format)")
            return
        if self.luma is not None:
            raise fail(WHERE, "luma", "(a table)", f"not used with {self.input} input (Y' is filtered as it comes)",
                       "remove [luma]")

    @property
    def ycbcr_coding(self) -> YCbCrCoding | None:
        """The coding RGB stimulus is converted with for a Y'CbCr input (``[coding]``, else BT.601 full range);
        None for other inputs."""
        if not is_ycbcr(self.input):
            return None
        return (self.coding or CodingSpec()).at_bits(self.input_bits)

    @property
    def chroma_bits(self) -> int:
        """Bits the passed-through colour differences add above Y' in the output word (0 when dropped)."""
        if self.chroma != "pass":
            return 0
        return self.input_bits * (components(self.input) - 1)

    @property
    def output_word_bits(self) -> int:
        """Bits of the whole output word: ``output.bits`` of Y' (or the filter's result) plus the chroma passed."""
        return self.output.bits + self.chroma_bits

    def _check_passthrough(self) -> None:
        """A raw pass-through border must fit the filter's input sample into the output word."""
        if self.window.border != "passthrough" or self.window.passthrough != "raw":
            return
        source_bits = self.luma.output_bits if self.luma is not None else self.input_bits
        if source_bits > self.output.bits:
            raise fail(WHERE, "window.passthrough", "raw",
                       f"too narrow: the {source_bits}-bit input sample does not fit output.bits = {self.output.bits}",
                       f'set output.bits >= {source_bits} or passthrough = "mapped"')

    @property
    def input_bits(self) -> int:
        """Bits of one input sample (one component for RGB)."""
        return sample_bits(self.input)

    # ---------------------------------------------------------------- construction and export

    @classmethod
    def from_dict(cls, data: Mapping[str, Any]) -> PipelineSpec:
        """Build a spec from plain data (the parsed TOML shape).

        Raises:
            ConfigError: on an unknown key (naming it and the closest valid key) or a bad value.
        """
        check_keys(WHERE, want_table(WHERE, "spec", data), _TOP_KEYS)
        kwargs: dict[str, Any] = {}
        if "name" in data:
            kwargs["name"] = data["name"]
        if "input" in data:
            kwargs["input"] = data["input"]
        if "chroma" in data:
            kwargs["chroma"] = data["chroma"]
        for key, sub in _SECTIONS.items():
            if key not in data or data[key] is None:
                continue
            section = want_table(WHERE, key, data[key])
            check_keys(f"{WHERE} [{key}]", section, [f.name for f in fields(sub)])
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
        except IsADirectoryError:
            raise ConfigError(f"pipeline spec file {str(p)!r} is a directory; give a spec TOML file or a preset name") from None
        except OSError as exc:
            raise ConfigError(f"pipeline spec file {str(p)!r} cannot be read ({exc.strerror}); check the path") from None
        except UnicodeDecodeError as exc:
            raise ConfigError(f"pipeline spec file {str(p)!r} is not UTF-8 text (byte {exc.start}); "
                              "give a spec TOML file") from None
        except _toml.TOMLDecodeError as exc:
            raise ConfigError(f"pipeline spec file {str(p)!r} is not valid TOML ({exc}); fix the syntax") from None
        if not data:
            raise ConfigError(f"pipeline spec file {str(p)!r} is empty; write its stages (see vkit.model.spec) "
                              "or give a preset name") from None
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
        if self.chroma != "drop":
            out["chroma"] = self.chroma
        for key in _SECTIONS:
            value = getattr(self, key)
            if value is not None:
                out[key] = value.to_dict()
        return out

    def to_toml(self) -> str:
        """TOML text; ``PipelineSpec.from_toml_text(spec.to_toml()) == spec``."""
        data = self.to_dict()
        lines = [f"name = {_toml_value(data.pop('name'))}", f"input = {_toml_value(data.pop('input'))}"]
        if "chroma" in data:
            lines.append(f"chroma = {_toml_value(data.pop('chroma'))}")
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
    raise ConfigError(f"{WHERE}: cannot write {value!r} ({type(value).__name__}) as TOML; give numbers, strings or lists")
