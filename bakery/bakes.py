"""The registry of bakes: one place that both the CLI and the batch runner call.

A *bake* is one call of one core capability with explicit parameters: it reads its inputs, runs a pure
function, and writes its outputs atomically plus a JSON manifest. The CLI builds the parameter object from
options, the batch runner from a recipe; both call :func:`run_bake`, so a command line and a recipe give
byte-identical outputs.

Adding a bake: write a module with a parameter dataclass and a ``run(inputs, output, params)`` function,
call :func:`register` at import, and add the module name to :data:`BAKE_MODULES`. Nothing else changes.
Bake modules must not import heavy libraries at module level (the batch planner imports them all).
"""

from __future__ import annotations

import dataclasses
import importlib
import os
import types
import typing
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from enum import Enum
from pathlib import Path
from typing import Any

from bakery.errors import BakeryError

#: Modules that register bakes when imported.
BAKE_MODULES: list[str] = ["bakery.normals.bakes", "bakery.roughness.bakes", "bakery.envmap.envbakes",
                          "bakery.envmap.glossy_bakes"]


@dataclass(frozen=True)
class Bake:
    """One registered capability.

    Attributes
    ----------
    name : str
        Its name in recipes and manifests, e.g. ``"normal"`` or ``"env-specular"``.
    summary : str
        One line for listings.
    inputs : tuple of str
        Input roles in order, e.g. ``("height",)`` or ``("base", "detail")``. A role ending in ``?`` is optional.
    params : type
        A dataclass whose fields (with defaults) are the bake's parameters.
    run : callable
        ``run(inputs: dict[str, Path], output: Path, params) -> list[Path]``: writes every output (atomically)
        and returns the written paths, the manifest included.
    """

    name: str
    summary: str
    inputs: tuple[str, ...]
    params: type
    run: Callable[[dict[str, Path], Path, Any], list[Path]]

    @property
    def required_inputs(self) -> tuple[str, ...]:
        return tuple(r for r in self.inputs if not r.endswith("?"))

    @property
    def optional_inputs(self) -> tuple[str, ...]:
        return tuple(r[:-1] for r in self.inputs if r.endswith("?"))


_REGISTRY: dict[str, Bake] = {}


def register(bake: Bake) -> Bake:
    if not dataclasses.is_dataclass(bake.params):
        raise TypeError(f"params of bake {bake.name!r} must be a dataclass")
    _REGISTRY[bake.name] = bake
    return bake


def _load_all() -> None:
    for mod in BAKE_MODULES:
        importlib.import_module(mod)


def all_bakes() -> dict[str, Bake]:
    _load_all()
    return dict(sorted(_REGISTRY.items()))


def get_bake(name: str) -> Bake:
    _load_all()
    try:
        return _REGISTRY[name]
    except KeyError:
        known = ", ".join(sorted(_REGISTRY)) or "none"
        raise BakeryError(f"unknown bake {name!r}; known bakes: {known}") from None


def run_bake(name: str, inputs: Mapping[str, str | os.PathLike], output: str | os.PathLike,
             params: Any = None) -> list[Path]:
    """Run one bake: check inputs exist and differ from the output, then call the bake's ``run``."""
    bake = get_bake(name)
    params = bake.params() if params is None else params
    paths = {role: Path(p) for role, p in inputs.items() if p is not None}
    missing = [r for r in bake.required_inputs if r not in paths]
    if missing:
        raise BakeryError(f"bake {name!r} needs input(s): {', '.join(missing)}")
    for p in paths.values():
        if not p.exists() and "{" not in p.name:  # a {face} pattern names six files; its bake checks them
            raise BakeryError("file not found", p)
    output = Path(output)
    from bakery.io.atomic import check_distinct

    check_distinct([output], paths.values())
    return bake.run(paths, output, params)


def bake_threads() -> int | None:
    """How many threads a bake may start for one job: ``BAKERY_THREADS`` when set (batch workers set 1, so N
    workers use N cores), else None (each function's own default). Results never depend on it."""
    value = os.environ.get("BAKERY_THREADS", "").strip()
    if not value:
        return None
    try:
        n = int(value)
    except ValueError:
        raise BakeryError(f"BAKERY_THREADS must be a whole number; got {value!r}") from None
    if n < 1:
        raise BakeryError(f"BAKERY_THREADS must be at least 1; got {n}")
    return n


def bake_progress(message: str) -> None:
    """A short progress line from a long bake, on stderr. Silent where ``BAKERY_PROGRESS=0``: set by
    ``bakery --quiet`` and in batch workers, whose jobs the batch reports itself."""
    if os.environ.get("BAKERY_PROGRESS", "").strip() != "0":
        import sys

        print(message, file=sys.stderr, flush=True)


def params_to_dict(params: Any) -> dict[str, Any]:
    """A bake's parameters as plain JSON-able values (for manifests and cache keys)."""
    out = {}
    for f in dataclasses.fields(params):
        v = getattr(params, f.name)
        if isinstance(v, Path):
            v = v.as_posix()
        elif isinstance(v, tuple):
            v = list(v)
        elif hasattr(v, "value") and isinstance(v.value, str | int | float):  # Enum
            v = v.value
        out[f.name] = v
    return out


def params_from_mapping(bake: Bake, values: Mapping[str, Any], where: str) -> Any:
    """Build a bake's parameter dataclass from recipe values, checking names and types.

    ``where`` names the place for error messages, e.g. ``"recipe.toml: rule 'walls'"``.
    """
    fields = {f.name: f for f in dataclasses.fields(bake.params)}
    hints = typing.get_type_hints(bake.params)
    kwargs = {}
    for key, value in values.items():
        name = key.replace("-", "_")
        if name not in fields:
            known = ", ".join(sorted(k.replace("_", "-") for k in fields))
            raise BakeryError(f"{where}: bake {bake.name!r} has no parameter {key!r}; it takes: {known}")
        kwargs[name] = _coerce(hints[name], value, f"{where}: parameter {key!r}")
    try:
        return bake.params(**kwargs)
    except BakeryError:
        raise
    except (TypeError, ValueError) as exc:
        raise BakeryError(f"{where}: {exc}") from None


def _coerce(hint: Any, value: Any, where: str) -> Any:
    origin = typing.get_origin(hint)
    args = typing.get_args(hint)
    if origin in (typing.Union, types.UnionType):
        if value is None and type(None) in args:
            return None
        errors = []
        for a in args:
            if a is type(None):
                continue
            try:
                return _coerce(a, value, where)
            except BakeryError as exc:
                errors.append(str(exc))
        raise BakeryError(errors[0] if errors else f"{where}: unexpected value {value!r}")
    if origin is typing.Literal:
        if value not in args:
            raise BakeryError(f"{where}: expected one of {', '.join(map(repr, args))}; got {value!r}")
        return value
    if isinstance(hint, type) and issubclass(hint, Enum):
        try:
            return hint(value)
        except ValueError:
            choices = ", ".join(repr(m.value) for m in hint)
            raise BakeryError(f"{where}: expected one of {choices}; got {value!r}") from None
    if hint is bool:
        if not isinstance(value, bool):
            raise BakeryError(f"{where}: expected true or false; got {value!r}")
        return value
    if hint is int:
        if isinstance(value, bool) or not isinstance(value, int):
            raise BakeryError(f"{where}: expected a whole number; got {value!r}")
        return value
    if hint is float:
        if isinstance(value, bool) or not isinstance(value, int | float):
            raise BakeryError(f"{where}: expected a number; got {value!r}")
        return float(value)
    if hint is str:
        if not isinstance(value, str):
            raise BakeryError(f"{where}: expected text; got {value!r}")
        return value
    if origin is tuple:
        if not isinstance(value, list | tuple):
            raise BakeryError(f"{where}: expected a list; got {value!r}")
        inner = args[0] if args else Any
        return tuple(_coerce(inner, v, where) for v in value)
    return value

