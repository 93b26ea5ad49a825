"""The registry of bakes: one place that both the CLI and the batch runner call.

A *bake* is one call of one core capability with explicit parameters: it reads its inputs, runs a pure
function, and writes its outputs atomically plus a JSON manifest. The CLI builds the parameter object from
options, the batch runner from a recipe; both call :func:`run_bake`, so a command line and a recipe give
byte-identical outputs.

The bake interface
    ``params``: a frozen dataclass deriving from :class:`bakery.bakes.params.Params` whose fields are
    declared with :func:`bakery.bakes.params.param` (type, default, allowed values, unit, help: the one
    declaration the CLI options, recipe keys and docs are generated from).
    ``outputs(inputs, output, params) -> list[Path]``: every file the bake will write (main output, manifest,
    mip levels, faces, side files), known before anything is written. :func:`run_bake` checks them against
    the inputs; the batch planner checks them against other jobs.
    ``run(inputs, output, params, progress) -> list[Path]``: does the work and returns the files written, which
    must be exactly those of ``outputs``. ``progress(fraction, label)`` reports how far it got (fractions
    rising to 1); bakes never print.

Adding a bake: write a module under ``bakery/bakes/`` with the parameter dataclass, ``outputs`` and ``run``,
call :func:`register` at import, and add the module name to :data:`BAKE_MODULES`. Bake modules must not import
heavy libraries at module level (the batch planner imports them all).
"""

from __future__ import annotations

import dataclasses
import importlib
import os
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from bakery.bakes.params import Params, option_name
from bakery.errors import BakeryError
from bakery.progress import Progress, no_progress, within  # noqa: F401  (the bakes' progress channel)

#: Modules that register bakes when imported.
BAKE_MODULES: list[str] = ["bakery.bakes.normals", "bakery.bakes.roughness", "bakery.bakes.envmaps",
                          "bakery.bakes.glossy", "bakery.bakes.relief", "bakery.bakes.pack"]

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
        The parameter dataclass (see the module notes).
    outputs : callable
        ``outputs(inputs, output, params) -> list[Path]``, every file :attr:`run` writes.
    run : callable
        ``run(inputs, output, params, progress) -> list[Path]``.
    output_suffix : str
        The extension of the main output when ``-o`` names a folder and the input's own cannot be written.
    """

    name: str
    summary: str
    inputs: tuple[str, ...]
    params: type
    outputs: Callable[[dict[str, Path], Path, Any], list[Path]]
    run: Callable[[dict[str, Path], Path, Any, Progress], list[Path]]
    output_suffix: str = ".png"

    @property
    def required_inputs(self) -> tuple[str, ...]:
        return tuple(r for r in self.inputs if not r.endswith("?"))

    @property
    def optional_inputs(self) -> tuple[str, ...]:
        return tuple(r[:-1] for r in self.inputs if r.endswith("?"))


_REGISTRY: dict[str, Bake] = {}


def register(bake: Bake) -> Bake:
    if not (dataclasses.is_dataclass(bake.params) and issubclass(bake.params, Params)):
        raise TypeError(f"params of bake {bake.name!r} must be a dataclass deriving from Params")
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


def one_output(inputs: Mapping[str, Path], output: Path, params: Any) -> list[Path]:
    """The ``outputs`` of a bake that writes one file and its manifest."""
    from bakery.io.manifest import manifest_path

    return [output, manifest_path(output)]


def planned_outputs(name: str, inputs: Mapping[str, str | os.PathLike], output: str | os.PathLike,
                    params: Any = None) -> list[Path]:
    """Every file bake ``name`` would write for these inputs (nothing is written)."""
    bake = get_bake(name)
    params = bake.params() if params is None else params
    paths = {role: Path(p) for role, p in inputs.items() if p is not None}
    return [Path(p) for p in bake.outputs(paths, Path(output), params)]


def run_bake(name: str, inputs: Mapping[str, str | os.PathLike], output: str | os.PathLike,
             params: Any = None, progress: Progress | None = None) -> list[Path]:
    """Run one bake: check its inputs exist and that none of the files it will write is an input, then run it.

    Returns the written files (the manifest included), which are exactly those the bake declared.
    """
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
    from bakery.io.atomic import check_distinct, check_output_folder

    declared = [Path(p) for p in bake.outputs(paths, output, params)]
    check_output_folder(declared)
    check_distinct(declared, _input_files(paths))
    try:
        written = [Path(p) for p in bake.run(paths, output, params, progress or no_progress)]
    except MemoryError:
        raise BakeryError(f"out of memory for {_work_size(paths, params)}; try a smaller one",
                          output) from None
    if sorted(map(str, written)) != sorted(map(str, declared)):
        raise RuntimeError(f"bake {name!r} wrote {sorted(map(str, written))} but declared "
                           f"{sorted(map(str, declared))}")
    return written


def _work_size(paths: Mapping[str, Path], params: Any) -> str:
    """The size of a bake's work in words, for the out-of-memory message: its first image input's size, else
    its ``size`` / ``face-size`` parameter."""
    from bakery.io.images import image_size

    for p in paths.values():
        try:
            w, h = image_size(p)
        except (BakeryError, OSError):
            continue
        return f"a {w}x{h} input ({p})"
    for name in ("face_size", "size"):
        if isinstance(getattr(params, name, None), int):
            return f"{option_name(name)} {getattr(params, name)}"
    return "this input"


def level_path(output: Path, level: int, *, tag: str = "", face: str = "") -> Path:
    """Where loose mip level ``level`` of ``output`` goes: level 0 is ``output`` itself (unless ``tag`` or
    ``face`` is given), level k is ``NAME.mipKK.ext`` (two digits), with ``.TAG`` before and ``.FACE`` after the
    level: ``rock.png`` -> ``rock.mip03.png``, ``rock.length.mip03.png``, ``sky.mip02.x+.exr``."""
    stem, ext = output.stem, output.suffix
    parts = [stem] + ([tag] if tag else []) + ([f"mip{level:02d}"] if level or tag or face else [])
    parts += [face] if face else []
    return output.with_name(".".join(parts) + ext)


def _input_files(paths: Mapping[str, Path]) -> list[Path]:
    """Input paths with face patterns expanded to their six files."""
    out: list[Path] = []
    for p in paths.values():
        if "{" in p.name:
            from bakery.io.envfiles import face_paths

            out += face_paths(p)
        else:
            out.append(p)
    return out


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
    """Build a bake's parameter dataclass from recipe values, checking names and values.

    ``where`` names the place for error messages, e.g. ``"recipe.toml: rule 'walls'"``.
    """
    fields = {f.name for f in dataclasses.fields(bake.params)}
    kwargs = {}
    for key, value in values.items():
        name = key.replace("-", "_")
        if name not in fields:
            known = ", ".join(sorted(option_name(k) for k in fields))
            raise BakeryError(f"{where}: bake {bake.name!r} has no parameter {key!r}; it takes: {known}")
        kwargs[name] = value
    try:
        return bake.params(**kwargs)
    except BakeryError as exc:
        raise BakeryError(f"{where}: {exc}") from None
