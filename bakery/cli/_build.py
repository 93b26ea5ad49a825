"""Commands generated from bakes: every option of a bake command comes from the bake's parameter declarations.

:func:`bake_command` adds a typer command whose options are the fields of the bake's parameter dataclass
(:mod:`bakery.bakes.params`: same names as the recipe keys, same help, same allowed values and defaults), plus
the options that belong to the command alone (:data:`COMMAND_OPTIONS`): the inputs, ``-o/--output``,
``--profile`` and, where several inputs are taken, ``--jobs``.

The ``-o`` rule, the same for every command: an ``-o`` that ends in ``/`` or names an existing folder is an
output folder, and each output takes its input's file name (with the bake's own extension where the input's
cannot be written); an ``-o`` holding ``{stem}``, ``{name}`` or ``{ext}`` is a name template filled in from
each input (``-o "normals/{stem}_normal.ktx2"``: the folder must exist, the extension picks the format);
otherwise ``-o`` is the output file. Several inputs need an output folder or a name template.

Several inputs: a command whose bake has one required input takes several files and folders (a folder stands
for the image files directly inside it, not those in its subfolders) and bakes them in parallel worker processes
(``--jobs``), one line per finished file. Every output is known before any work starts: two inputs that would
write the same file (``a.png`` and ``a.tif`` -> ``a.png``), or an output that is one of the inputs, are refused.
A bad file fails alone. Exit codes: 2 when nothing was written (bad usage, or every input is bad), 1 when some
of several inputs failed and the others were written, 0 otherwise.

Parameter values: an option given on the command line wins over the ``--profile`` file
(:mod:`bakery.profiles`), which wins over the bake's own default.
"""

from __future__ import annotations

import inspect
from dataclasses import dataclass
from pathlib import Path
from typing import Annotated, Any, Literal

import typer

from bakery.bakes.params import Spec, specs
from bakery.cli._common import ProgressDisplay, command, echo
from bakery.errors import BakeryError

#: Options and arguments that belong to the commands, not to the bakes.
COMMAND_OPTIONS = ("output", "profile", "jobs")
#: Extensions a bake keeps from its input when -o is a folder.
IMAGE_SUFFIXES = (".png", ".tif", ".tiff", ".exr")

PROFILE_HELP = ("Target profile (a .toml file, docs/profiles.md): the defaults of every parameter it states; "
                "options given here win.")
JOBS_HELP = "Worker processes for several inputs. Default: every core this process may use."


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
        # None when not given, so that a profile's value can take its place
        return Annotated[bool | None, typer.Option(*names, help=help_text, **kwargs)], None
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


def _explicit_values(bake, values: dict[str, Any]) -> dict[str, Any]:
    """The parameter values given on the command line (parsed), by field name."""
    out = {}
    for spec in specs(bake.params):
        v = values.get(spec.name)
        if v is None:
            continue
        if isinstance(v, str) and spec.parse is not None:
            try:
                v = spec.parse(v)
            except BakeryError as exc:
                raise BakeryError(f"--{spec.option}: {exc}") from None
        out[spec.name] = v
    return out


def resolve_params(bake, explicit: dict[str, Any], profile, output: Path | None) -> tuple[Any, dict[str, Any]]:
    """(parameter object, values by field name): command-line values over the profile's over the bake's own
    defaults. Errors name the option, or the profile file and key the value came from."""
    merged: dict[str, Any] = {}
    from_profile: dict[str, str] = {}
    if profile is not None:
        for word, v in profile.defaults_for(bake.name, output).items():
            merged[word.replace("-", "_")] = v
            from_profile[word.replace("-", "_")] = profile.where(word, bake.name)
    merged.update(explicit)
    try:
        return bake.params(**merged), merged
    except BakeryError as exc:  # messages start with the parameter's name: show where its value came from
        text = str(exc)
        name = text.split(" ", 1)[0].rstrip(":").replace("-", "_")
        if name in explicit:
            text = "--" + text
        elif name in from_profile:
            text = f"{from_profile[name]}: {text}"
        raise BakeryError(text) from None


def output_for(bake, source: Path | None, out_text: str, many: bool) -> Path:
    """The -o rule (see the module notes): the output file for one input."""
    out = Path(out_text)
    if _template_fields(out_text) - {"face", "index"}:
        return _from_template(source, out_text)
    is_folder = out_text.endswith(("/", "\\")) or out.is_dir()
    if not is_folder:
        if many:
            raise BakeryError("several inputs need an output folder (end -o with /; the folder must exist) or a "
                              "name template such as out/{stem}_normal.png", out)
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


#: Fields of an -o name template, for an input ``stone/granite_height.png``. (``{face}`` and ``{index}`` are
#: not template fields: they name the six faces of a cube output, see :mod:`bakery.io.envfiles`.)
TEMPLATE_FIELDS = {"stem": "granite_height", "name": "granite_height.png", "ext": "png"}


def _template_fields(out_text: str) -> set[str]:
    """The ``{field}`` names in an -o value (empty for a plain path)."""
    import string

    if "{" not in out_text and "}" not in out_text:
        return set()
    try:
        return {f for _, f, _, _ in string.Formatter().parse(out_text) if f is not None}
    except ValueError:
        raise BakeryError("-o template has a stray brace; fields look like {stem}", Path(out_text)) from None


def _from_template(source: Path | None, out_text: str) -> Path:
    """The output an -o name template gives for one input (see the module notes)."""
    if source is None:
        raise BakeryError("this command makes one file from no input: give -o a file name, not a template",
                          Path(out_text))
    bad = sorted(_template_fields(out_text) - set(TEMPLATE_FIELDS) - {"face", "index"})
    if bad:
        raise BakeryError(f"-o template field {{{bad[0]}}} is unknown; fields are "
                          + ", ".join(f"{{{f}}}" for f in TEMPLATE_FIELDS), Path(out_text))
    name = source.name.replace("{face}", "cube").replace("{index}", "cube")
    values = {"stem": Path(name).stem, "name": name, "ext": Path(name).suffix.lstrip(".")}
    text = out_text
    for field, value in values.items():
        text = text.replace(f"{{{field}}}", value)
    out = Path(text)
    if text.endswith(("/", "\\")) or out.name in ("", ".", ".."):
        raise BakeryError("-o template must end in a file name such as {stem}_normal.png", Path(out_text))
    if not out.parent.is_dir():
        raise BakeryError("output folder does not exist", out.parent)
    return out


def bake_command(app: typer.Typer, command_name: str, bake_name: str, doc: str, *, inputs_help: dict[str, str],
                 output_help: str, positional_optional: bool = False, report=None) -> None:
    """Add ``command_name`` to ``app``: a thin command over bake ``bake_name``.

    ``inputs_help`` gives the help of every input role; a bake with one required input takes several files and
    folders (``INPUTS...``, see the module notes); optional roles become ``--ROLE FILE`` options, or optional
    positional arguments with ``positional_optional`` (then the command takes one file). ``report(written)``
    prints what one input wrote (default: one ``wrote`` line each).
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
            metavar=role.upper(), help=inputs_help[role] + " Several files or folders (the image files directly "
            "inside each) need an output folder and are baked in parallel.", show_default=False)])
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
    add("profile", Annotated[Path | None, typer.Option("--profile", help=PROFILE_HELP, metavar="FILE",
                                                       show_default=False)], None)
    if many:
        add("jobs", Annotated[int | None, typer.Option("--jobs", "-j", min=1, help=JOBS_HELP, metavar="N",
                                                       show_default=False)], None)
    for spec in specs(bake.params):
        annotation, default = _option(spec)
        add(spec.name, annotation, default)

    def body(**values: Any) -> None:
        explicit = _explicit_values(bake, values)
        profile = None
        if values.get("profile") is not None:
            from bakery.profiles import load_profile

            profile = load_profile(values["profile"])
        out = values["output"]
        extra = {role: values[f"in_{role}"] for role in optional if values.get(f"in_{role}") is not None}
        if many:
            sources, several = expand_inputs(list(values[f"in_{required[0]}"]), required[0])
            if several and extra:
                raise BakeryError(f"--{next(iter(extra))} names one file: give one {required[0]} file with it")
            pairs = [({required[0]: s, **extra}, s) for s in sources]
        else:
            named = {role: values[f"in_{role}"] for role in required}
            pairs = [({**named, **extra}, named[required[0]] if required else None)]
            several = False
        jobs = []
        for inputs, source in pairs:
            target = output_for(bake, source, out, several)
            params, merged = resolve_params(bake, explicit, profile, target)
            jobs.append(FileJob(source, inputs, target, params, merged))
        if not several:
            job = jobs[0]
            label = f"{command_name} {job.source.name if job.source is not None else job.output.name}"
            from bakery.bakes import run_bake

            written = run_bake(bake_name, job.inputs, job.output, job.params, progress=ProgressDisplay(label))
            (report or _report)(written)
            return
        check_jobs(bake_name, jobs)
        failed = run_many(bake, jobs, values.get("jobs"))
        if failed:
            typer.echo(f"{command_name}: {failed} of {len(jobs)} inputs failed", err=True)
            raise typer.Exit(2 if failed == len(jobs) else 1)

    body.__signature__ = inspect.Signature(parameters)
    body.__annotations__ = annotations
    body.__doc__ = doc if many or len(required) == 0 else (
        doc.rstrip() + "\n\nTakes one file per input; a batch recipe pairs many files by name (docs/batch.md).")
    body.__name__ = command_name.replace("-", "_")
    app.command(command_name)(command(body))


@dataclass
class FileJob:
    """One input of a command: what it reads, where it writes, with which parameters."""

    source: Path | None
    inputs: dict[str, Path]
    output: Path
    params: Any
    values: dict[str, Any]  # the parameter values by field name (recipe form, for worker processes)


def expand_inputs(given: list[Path], role: str) -> tuple[list[Path], bool]:
    """(files, several): the files the command-line inputs stand for (a folder: the image files directly inside
    it, sorted, hidden ones left out), and whether they count as several (more than one, or any folder)."""
    from bakery.io.images import FORMATS

    if not given:
        raise BakeryError(f"give at least one {role} file")
    files: list[Path] = []
    for p in given:
        if p.is_dir():
            inside = sorted(f for f in p.iterdir() if f.is_file() and not f.name.startswith(".")
                            and f.suffix.lower() in FORMATS)
            if not inside:
                raise BakeryError("no image files directly inside this folder (subfolders are not searched)", p)
            files += inside
        else:
            files.append(p)
    return files, len(given) > 1 or any(p.is_dir() for p in given)


def check_jobs(bake_name: str, jobs: list[FileJob]) -> None:
    """Before any work: no two inputs write the same file, and no file written is one of the inputs."""
    from bakery.bakes import planned_outputs

    writers: dict[Path, FileJob] = {}
    inputs = {Path(p).resolve(): job for job in jobs for p in job.inputs.values()}
    for job in jobs:
        for path in planned_outputs(bake_name, job.inputs, job.output, job.params):
            key = path.resolve()
            other = writers.get(key)
            if other is not None and other is not job:
                raise BakeryError(f"{other.source} and {job.source} would both write {path}; rename one or bake "
                                  "them into different folders")
            writers[key] = job
            if key in inputs:
                raise BakeryError(f"the output of {job.source} would overwrite an input; choose another output "
                                  "folder", path)


def run_many(bake, jobs: list[FileJob], workers: int | None) -> int:
    """Bake every job, in parallel worker processes when more than one may run; one line per finished input
    (``[k/n] wrote OUT``), errors and warnings naming their input. Returns the number that failed."""
    from bakery.batch import default_jobs

    total = len(jobs)
    workers = min(workers or default_jobs(), total)
    state = {"done": 0, "failed": 0}

    def finished(job: FileJob, written: list[Path] | None, error: str | None, warned: list[str]) -> None:
        state["done"] += 1
        for w in warned:
            typer.echo(f"warning: {job.source}: {w}", err=True)
        if error is not None:
            state["failed"] += 1
            shown = error if str(job.source) in error else f"{job.source}: {error}"
            typer.echo(f"[{state['done']}/{total}] error: {shown}", err=True)
            return
        more = len(written) - 1
        also = f" (+{more} more file{'s' if more > 1 else ''})" if more > 0 else ""
        echo(f"[{state['done']}/{total}] wrote {job.output}{also}")
        quality_lines(written)

    if workers <= 1:
        import warnings

        from bakery.bakes import run_bake

        for job in jobs:
            with warnings.catch_warnings(record=True) as caught:
                warnings.simplefilter("always")
                try:
                    written, error = run_bake(bake.name, job.inputs, job.output, job.params), None
                except BakeryError as exc:
                    written, error = None, str(exc)
            finished(job, written, error, [" ".join(str(w.message).split()) for w in caught])
        return state["failed"]

    from bakery.batch.execute import run_local

    specs_ = [{"module": bake.run.__module__, "bake": bake.name, "values": job.values, "where": str(job.source),
               "out_root": str(job.output.parent), "output": job.output.name, "inspect": False,
               "inputs": {role: str(p) for role, p in job.inputs.items()}} for job in jobs]

    def on_result(i: int, res: dict) -> None:
        job = jobs[i]
        written = [job.output.parent / rel for rel in res.get("written", {})]
        finished(job, written, res["error"] if res["status"] == "failed" else None, res.get("warnings", []))

    run_local(specs_, workers, on_result)
    return state["failed"]


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
