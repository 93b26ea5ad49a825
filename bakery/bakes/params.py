"""Declaring bake parameters once.

Every bake has a frozen dataclass of parameters whose fields are declared with :func:`param`: the type
annotation gives the type and, for ``Literal[...]``, the allowed values; the default is the default; the field
metadata holds the help text, the unit and the range. The command-line options (``bakery/cli/_build.py``), the
recipe keys (:func:`bakery.bakes.params_from_mapping`), ``bakery batch --list-bakes`` and the reference page
``docs/reference.md`` (:mod:`bakery.bakes.reference`) are all generated from these declarations, so a command
option and its recipe key are the same word (``-`` and ``_`` alike) and share one help text.

Parameters that several bakes share (the sample type, the green convention, edges, channels, the KTX2 texel
format) are declared once here and used by each bake.

Checks run when a parameter object is built (:meth:`Params.__post_init__`): allowed values (text choices
are case-insensitive), numbers finite and within range, whole numbers whole. Messages name the parameter
by its option / key name.

This module imports neither numpy nor OpenCV: planning a batch and ``bakery --help`` stay light.
"""

from __future__ import annotations

import dataclasses
import functools
import math
import types
import typing
from collections.abc import Callable
from typing import Any, Literal

from bakery.errors import BakeryError
from bakery.types import Bits  # noqa: F401 (the sample type of every bake; recipes may write bits = 16)

#: Green-channel convention of a normal map file: +Y up (OpenGL-style, glTF 2.0) or down (DirectX-style).
YConvention = Literal["up", "down"]
#: How a texture continues past its borders.
Edges = Literal["wrap", "clamp", "mirror"]
#: One channel of an image file, by letter (RGB(A) order).
Channel = Literal["r", "g", "b", "a"]

BITS_HELP = ("Output samples: 8 or 16 (PNG, TIFF), half (EXR), float (EXR, TIFF). Default: follows the input "
             "where the output format holds it.")


def param(default: Any, help: str, *, unit: str | None = None, low: float | None = None,
          high: float | None = None, low_open: bool = False, parse: Callable[[str], Any] | None = None,
          metavar: str | None = None) -> Any:
    """A parameter field: ``name: type = param(default, "help", unit=..., low=..., high=...)``.

    ``low``/``high`` bound numbers (``low_open``: strictly above ``low``); ``parse`` turns command-line text
    into the value (lists such as ``1.5x2`` or ``0,0.25,1``); ``metavar`` names the value in ``--help``.
    """
    meta = {"help": help, "unit": unit, "low": low, "high": high, "low_open": low_open, "parse": parse,
            "metavar": metavar}
    if isinstance(default, list | dict | set):
        raise TypeError("parameter defaults must be immutable")
    return dataclasses.field(default=default, metadata=meta)


def option_name(field_name: str) -> str:
    """The word used on the command line and in recipes: ``detail_strength`` -> ``detail-strength``."""
    return field_name.replace("_", "-")


@dataclasses.dataclass(frozen=True)
class Spec:
    """One parameter as the generators see it."""

    name: str
    hint: Any
    default: Any
    help: str
    unit: str | None
    low: float | None
    high: float | None
    low_open: bool
    parse: Callable[[str], Any] | None
    metavar: str | None

    @property
    def option(self) -> str:
        return option_name(self.name)

    @property
    def base(self) -> Any:
        """The type without ``None``: ``float | None`` -> ``float``."""
        args = [a for a in _union_args(self.hint) if a is not type(None)]
        if len(args) == 1:
            return args[0]
        return typing.Union[tuple(args)]  # noqa: UP007 (a runtime union of the remaining types)

    @property
    def optional(self) -> bool:
        return type(None) in _union_args(self.hint)

    @property
    def choices(self) -> tuple | None:
        """Allowed values of a ``Literal`` parameter, as declared."""
        out: list = []
        for a in _union_args(self.base):
            if typing.get_origin(a) is Literal:
                out += list(typing.get_args(a))
        return tuple(out) or None

    def describe_default(self) -> str:
        d = self.default
        if d is None:
            return "none"
        if isinstance(d, bool):
            return "on" if d else "off"
        if isinstance(d, tuple):
            return ",".join(f"{v:g}" if isinstance(v, float) else str(v) for v in d) or "none"
        if isinstance(d, float):
            return f"{d:g}"
        return str(d)


def _union_args(hint: Any) -> tuple:
    if typing.get_origin(hint) in (typing.Union, types.UnionType):
        return typing.get_args(hint)
    return (hint,)


@functools.cache
def specs(cls: type) -> tuple[Spec, ...]:
    """The declared parameters of a parameter dataclass, in declaration order."""
    hints = typing.get_type_hints(cls)
    out = []
    for f in dataclasses.fields(cls):
        m = f.metadata
        if "help" not in m:
            raise TypeError(f"{cls.__name__}.{f.name} is not declared with bakery.bakes.params.param")
        out.append(Spec(f.name, hints[f.name], f.default, m["help"], m["unit"], m["low"], m["high"],
                        m["low_open"], m["parse"], m["metavar"]))
    return tuple(out)


class Params:
    """Base of every bake's parameter dataclass: values are checked and tidied when the object is built."""

    def __post_init__(self) -> None:
        for spec in specs(type(self)):
            value = getattr(self, spec.name)
            tidy = check_value(spec, value)
            if tidy is not value:  # canonical form: bits = 16 -> "16", a list -> a tuple
                object.__setattr__(self, spec.name, tidy)
        self.check()

    def check(self) -> None:
        """Checks across parameters (override); raise :class:`BakeryError`."""


def check_value(spec: Spec, value: Any) -> Any:
    """``value`` checked against its declaration, in canonical form (e.g. ``bits = 16`` -> ``"16"``)."""
    name = spec.option
    if value is None:
        if spec.optional or spec.default is None:
            return None
        raise BakeryError(f"{name} needs a value")
    choices = spec.choices
    base = spec.base
    if choices is not None:
        if isinstance(value, str):
            for c in choices:
                if str(c).lower() == value.lower():
                    return c
        elif not isinstance(value, bool):
            for c in choices:
                if c == value or (isinstance(c, str) and isinstance(value, int | float) and c == f"{value:g}"):
                    return c
        others = [a for a in _union_args(base) if typing.get_origin(a) is not Literal]
        if not others:
            raise BakeryError(f"{name} must be one of {', '.join(map(str, choices))}; got {value!r}")
        base = others[0] if len(others) == 1 else typing.Union[tuple(others)]  # noqa: UP007
    return _check_typed(spec, base, value, name)


def _check_typed(spec: Spec, base: Any, value: Any, name: str) -> Any:
    origin = typing.get_origin(base)
    if origin in (typing.Union, types.UnionType):
        errors = []
        for a in typing.get_args(base):
            try:
                return _check_typed(spec, a, value, name)
            except BakeryError as exc:
                errors.append(str(exc))
        raise BakeryError(errors[0])
    if base is bool:
        if not isinstance(value, bool):
            raise BakeryError(f"{name} must be true or false; got {value!r}")
        return value
    if base is int:
        if isinstance(value, bool) or not isinstance(value, int):
            if isinstance(value, float) and value.is_integer():
                value = int(value)
            else:
                raise BakeryError(f"{name} must be a whole number; got {value!r}")
        return _in_range(spec, value, name)
    if base is float:
        if isinstance(value, bool) or not isinstance(value, int | float):
            raise BakeryError(f"{name} must be a number; got {value!r}")
        return _in_range(spec, float(value), name)
    if base is str:
        if not isinstance(value, str):
            raise BakeryError(f"{name} must be text; got {value!r}")
        return value
    if origin is tuple:
        args = typing.get_args(base)
        if isinstance(value, int | float) and not isinstance(value, bool):
            value = (value,)
        if isinstance(value, str) and spec.parse is not None:
            value = spec.parse(value)
        if not isinstance(value, list | tuple):
            raise BakeryError(f"{name} must be a list of numbers; got {value!r}")
        if len(args) == 2 and args[1] is Ellipsis:
            inner = [args[0]] * len(value)
        else:
            inner = list(args)
            if len(value) != len(inner):
                raise BakeryError(f"{name} takes {len(inner)} values; got {len(value)}")
        out = tuple(_check_typed(spec, t, v, name) for t, v in zip(inner, value, strict=True))
        return out
    return value


def _in_range(spec: Spec, value: float, name: str) -> float:
    if isinstance(value, float) and not math.isfinite(value):
        raise BakeryError(f"{name} must be a finite number; got {value}")
    if spec.low is not None and (value <= spec.low if spec.low_open else value < spec.low):
        raise BakeryError(f"{name} must be {'above' if spec.low_open else 'at least'} {spec.low:g}; got {value:g}")
    if spec.high is not None and value > spec.high:
        raise BakeryError(f"{name} must be at most {spec.high:g}; got {value:g}")
    return value


def parse_numbers(text: str) -> tuple[float, ...]:
    """Command-line lists of numbers: ``"1.5"``, ``"1.5x2"``, ``"0,0.25,1"``."""
    parts = [p for p in text.lower().replace("x", ",").replace(";", ",").split(",") if p.strip()]
    try:
        return tuple(float(p) for p in parts)
    except ValueError:
        raise BakeryError(f"expected numbers separated by commas (or WIDTHxHEIGHT); got {text!r}") from None


# ------------------------------------------------------------------------------ shared declarations


def bits_param(help: str = BITS_HELP) -> Any:
    return param(None, help)


def y_param(help: str = "Green-channel convention of the normal map files: up = +Y up (OpenGL-style, "
            "glTF 2.0), down = +Y down (DirectX-style).") -> Any:
    return param("up", help)


def edges_param(help: str = "How the texture continues past its borders: wrap (it tiles), clamp (the edge "
                "repeats), mirror.") -> Any:
    return param("wrap", help)


def channel_param(help: str = "Channel of the input file to read (r, g, b, a); default: the only one, or "
                  "equal r, g, b.") -> Any:
    return param(None, help)


KTX2_FORMAT_HELP = ("Texel format of .ktx2 outputs: a short name (rgba8, rgba16f, bc4, bc5, bc6h, bc7-srgb ...), a "
                    "Vulkan format name, or compressed (the block format made for the map; docs/compression.md).")


def ktx2_format_param(default: str | None = None, help: str = KTX2_FORMAT_HELP) -> Any:
    return param(default, help)


def loose_param(what: str = "every mip level as an image file (NAME.png, NAME.mip01.png ...)") -> Any:
    return param(False, f"With a .ktx2 output, also write {what} beside it.")


def effort_param() -> Any:
    return param("fast", "Block-compression effort for .ktx2 outputs: fast, balanced or best (slower, a little "
                 "more accurate; docs/compression.md).")


def zstd_param() -> Any:
    return param(None, "Zstandard supercompression level (1-22) of .ktx2 outputs; default none.", low=1, high=22)
