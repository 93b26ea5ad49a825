"""Commands generated from bakes: every option of a bake command comes from the bake's parameter declarations.

:func:`bake_command` adds a typer command whose options are the fields of the bake's parameter dataclass
(:mod:`bakery.bakes.params`: same names as the recipe keys, same help, same allowed values and defaults), plus
the options that belong to the command alone (:data:`COMMAND_OPTIONS`): the inputs, ``-o/--output``.

The ``-o`` rule, the same for every command: an ``-o`` that ends in ``/`` or names an existing folder is an
output folder, and each output takes its input's file name (with the bake's own extension where the input's
cannot be written); otherwise ``-o`` is the output file. Several inputs need an output folder. Exit codes: 2
when nothing was written (bad usage, or the one input is bad), 1 when some of several inputs failed and the
others were written, 0 otherwise.
"""

from __future__ import annotations

import inspect
from pathlib import Path
from typing import Annotated, Any, Literal

import typer

from bakery.bakes.params import Spec, specs
from bakery.cli._common import STATE, ProgressDisplay, command, echo
from bakery.errors import BakeryError

#: Options and arguments that belong to the commands, not to the bakes.
COMMAND_OPTIONS = ("output",)
#: Extensions a bake keeps from its input when -o is a folder.
IMAGE_SUFFIXES = (".png", ".tif", ".tiff", ".exr")


def _option(spec: Spec) -> tuple[Any, Any]:
    """(annotation, default) of the typer option for one parameter."""
    names = [f"--{spec.option}"]
    help_text = spec.help
    if spec.unit:
        help_text += f" Unit: {spec.unit}."
    choices = spec.choices
    base = spec.base
    kwargs: dict[str, Any] = {"show_default": False}
    if base is bool:
        names = [f"--{spec.option}/--no-{spec.option}"]
        help_text += f" [default: {'on' if spec.default else 'off'}]"
        return Annotated[bool, typer.Option(*names, help=help_text, **kwargs)], bool(spec.default)
    if choices is not None and spec.parse is None:
        kwargs["case_sensitive"] = False
        py: Any = Literal[tuple(choices)]
    elif spec.parse is not None or base is str:
        py = str
        kwargs["metavar"] = spec.metavar or "TEXT"
    elif base is int:
        py = int
        kwargs["metavar"] = spec.metavar or "INTEGER"
    elif base is float:
        py = float
        kwargs["metavar"] = spec.metavar or "NUMBER"
    else:  # a union of a number and choices, or other text forms
        py = str
        kwargs["metavar"] = spec.metavar or "TEXT"
    if spec.default not in (None, ()):
        help_text += f" [default: {spec.describe_default()}]"
    return Annotated[py | None, typer.Option(*names, help=help_text, **kwargs)], None


def _params_from_cli(bake, values: dict[str, Any]):
    kwargs = {}
    for spec in specs(bake.params):
        v = values.get(spec.name)
        if v is None:
            continue
        if isinstance(v, str) and spec.parse is not None:
            try:
                v = spec.parse(v)
            except BakeryError as exc:
                raise BakeryError(f"--{spec.option}: {exc}") from None
        kwargs[spec.name] = v
    try:
        return bake.params(**kwargs)
    except BakeryError as exc:  # messages start with the parameter's name: show it as the option
        text = str(exc)
        first = text.split(" ", 1)[0].rstrip(":")
        if first in {s.option for s in specs(bake.params)}:
            text = "--" + text
        raise BakeryError(text) from None


def output_for(bake, source: Path | None, out_text: str, many: bool) -> Path:
    """The -o rule (see the module notes): the output file for one input."""
    out = Path(out_text)
    is_folder = out_text.endswith(("/", "\\")) or out.is_dir()
    if not is_folder:
        if many:
            raise BakeryError("several inputs need an output folder: end -o with / (the folder must exist)", out)
        return out
    if not out.is_dir():
        raise BakeryError("output folder does not exist", out)
    if source is None:
        raise BakeryError("this command makes one file from no input: give -o a file name", out)
    name = source.name.replace("{face}", "cube").replace("{index}", "cube")
    stem = Path(name).stem
    suffix = bake.output_suffix
    if suffix == ".png" and Path(name).suffix.lower() in IMAGE_SUFFIXES:
        suffix = Path(name).suffix
    return out / f"{stem}{suffix}"


def bake_command(app: typer.Typer, command_name: str, bake_name: str, doc: str, *, inputs_help: dict[str, str],
                 output_help: str, positional_optional: bool = False, report=None) -> None:
    """Add ``command_name`` to ``app``: a thin command over bake ``bake_name``.

    ``inputs_help`` gives the help of every input role; a bake with one required input takes several files
    (``INPUTS...``); optional roles become ``--ROLE FILE`` options, or optional positional arguments with
    ``positional_optional``. ``report(written)`` prints what was written (default: one ``wrote`` line each).
    """
    from bakery.bakes import get_bake

    bake = get_bake(bake_name)
    required, optional = bake.required_inputs, bake.optional_inputs
    many = len(required) == 1 and not positional_optional
    parameters = []
    annotations: dict[str, Any] = {}
    taken = {s.name for s in specs(bake.params)}

    def add(name: str, annotation: Any, default: Any = inspect.Parameter.empty) -> None:
        if name in annotations:
            raise TypeError(f"{command_name}: {name!r} is both an input and a parameter")
        annotations[name] = annotation
        parameters.append(inspect.Parameter(name, inspect.Parameter.KEYWORD_ONLY, default=default,
                                            annotation=annotation))

    if many:
        role = required[0]
        add(f"in_{role}", Annotated[list[Path], typer.Argument(
            metavar=role.upper(), help=inputs_help[role] + " Several files need an output folder.",
            show_default=False)])
    else:
        for role in required:
            add(f"in_{role}", Annotated[Path, typer.Argument(metavar=role.upper(), help=inputs_help[role],
                                                             show_default=False)])
    for role in optional:
        if positional_optional:
            add(f"in_{role}", Annotated[Path | None, typer.Argument(metavar=f"{role.upper()}",
                                                                    help=inputs_help[role], show_default=False)],
                None)
        else:
            if role in taken:
                raise TypeError(f"{command_name}: input --{role} clashes with a parameter")
            add(f"in_{role}", Annotated[Path | None, typer.Option(f"--{role.replace('_', '-')}",
                                                                  help=inputs_help[role], show_default=False)],
                None)
    add("output", Annotated[str, typer.Option("-o", "--output", help=output_help, show_default=False,
                                              metavar="PATH")])
    for spec in specs(bake.params):
        annotation, default = _option(spec)
        add(spec.name, annotation, default)

    def body(**values: Any) -> None:
        from bakery.bakes import run_bake

        params = _params_from_cli(bake, values)
        out = values.pop("output")
        extra = {role: values.get(f"in_{role}") for role in optional}
        if many:
            sources = list(values[f"in_{required[0]}"])
            if not sources:
                raise BakeryError(f"give at least one {required[0]} file")
            jobs = [({required[0]: s, **extra}, s) for s in sources]
        else:
            named = {role: values[f"in_{role}"] for role in required}
            jobs = [({**named, **extra}, named[required[0]] if required else None)]
        several = len(jobs) > 1
        outputs = [output_for(bake, source, out, several) for _, source in jobs]
        failed = 0
        for (inputs, source), target in zip(jobs, outputs, strict=True):
            label = f"{command_name} {source.name if source is not None else target.name}"
            try:
                written = run_bake(bake_name, inputs, target, params, progress=ProgressDisplay(label))
            except BakeryError as exc:
                if not several or STATE["debug"]:
                    raise
                typer.echo(f"error: {exc}", err=True)
                failed += 1
                continue
            (report or _report)(written)
        if failed:
            raise typer.Exit(2 if failed == len(jobs) else 1)

    body.__signature__ = inspect.Signature(parameters)
    body.__annotations__ = annotations
    body.__doc__ = doc
    body.__name__ = command_name.replace("-", "_")
    app.command(command_name)(command(body))


def _report(paths: list[Path]) -> None:
    for p in paths:
        echo(f"wrote {p}")
    quality_lines(paths)


def quality_lines(paths: list[Path]) -> None:
    """One line per block-compressed output: the quality report its manifest holds."""
    import json

    for p in paths:
        if p.name.endswith(".bakery.json"):
            for name, q in (json.loads(p.read_text(encoding="utf-8")).get("quality") or {}).items():
                echo(f"quality {name}: {q['summary']}")
