"""Planning a batch: which jobs a recipe makes from the files on disk, and which of them must run.

:func:`make_plan` walks the source root once, matches every rule, pairs each rule's other inputs by their
templates, resolves parameters (recipe defaults, then the rule, then folder files from the source root down
to the matched file's folder: in each folder ``[bake.<bake>]`` first, then ``[rule.<rule>]``), checks every
output path (inside the output root, not in its ``.bakery`` folder, no link leading out, no two jobs on one
file) and then decides per job with the cache whether it runs and why. Everything is checked before any job
runs; problems raise :class:`BakeryError` naming the file and the key.

Nothing here imports heavy libraries: a run with nothing to do must start fast.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from bakery.batch.cache import STATE_DIR, Cache, job_key, stat_signature
from bakery.batch.recipe import FOLDER_FILE, FolderSettings, Recipe, Rule, load_folder_file
from bakery.errors import BakeryError

RUN, SKIP, FAIL = "run", "skip", "fail"


@dataclass
class Job:
    """One bake call of a batch.

    Attributes
    ----------
    rule, bake : str
        The rule that made the job and the bake it runs.
    module : str
        The module that registers the bake (workers import it before running).
    inputs : dict of str to str
        Input role -> path relative to the source root.
    output : str
        Output path relative to the output root (it also identifies the job).
    values : dict
        Parameter values as written in the recipe and folder files, merged (workers rebuild the parameter
        object from them).
    params : dict
        All parameters after resolution, defaults included (what the manifest records).
    origins : dict of str to str
        Parameter -> where its value came from (for the plan).
    digests : dict of str to str
        Input role -> content digest.
    key : str
        The job key (see :mod:`bakery.batch.cache`).
    action : {"run", "skip", "fail"}
        ``"fail"`` is decided at planning (an input missing with ``unpaired = "fail"``).
    reason : str
        Why the job runs, is skipped or failed, in words.
    """

    rule: str
    bake: str
    module: str
    inputs: dict[str, str]
    output: str
    values: dict[str, Any]
    params: dict[str, Any]
    origins: dict[str, str]
    digests: dict[str, str] = field(default_factory=dict)
    key: str = ""
    action: str = RUN
    reason: str = ""


@dataclass
class Plan:
    """The jobs of a recipe in a stable order (rule order, then output path), decided against the cache."""

    recipe: Recipe
    jobs: list[Job]
    cache: Cache
    unselected: int = 0
    all_outputs: set[str] = field(default_factory=set)  # outputs of every job, selected by --only or not

    @property
    def to_run(self) -> list[Job]:
        return [j for j in self.jobs if j.action == RUN]


def scan_sources(root: Path) -> tuple[list[str], list[str]]:
    """Every visible file under ``root`` (relative ``/`` paths, sorted) and the folders holding a folder file.

    Hidden names (starting with ``.``) are skipped; links to folders are not followed; a link to a file outside
    the source root is refused (bakery reads only the source root), before any job runs.
    """
    files: list[str] = []
    folders: list[str] = []
    real_root = root.resolve()
    for dirpath, dirnames, filenames in os.walk(root):
        dirnames[:] = sorted(d for d in dirnames if not d.startswith("."))
        rel_dir = Path(dirpath).relative_to(root).as_posix()
        prefix = "" if rel_dir == "." else rel_dir + "/"
        for name in sorted(filenames):
            if name.startswith("."):
                continue
            if name == FOLDER_FILE:
                folders.append("" if rel_dir == "." else rel_dir)
                continue
            link = Path(dirpath) / name
            if link.is_symlink() and not link.resolve().is_relative_to(real_root):
                raise BakeryError(f"links to {link.resolve()}, outside the source root {root}; bakery reads only "
                                  "the source root (copy the file in, or move the root up)", link)
            files.append(prefix + name)
    files.sort()
    return files, folders


def make_plan(recipe: Recipe, *, force: bool = False, only: tuple[str, ...] = (),
              cache: Cache | None = None) -> Plan:
    """Build every job of ``recipe`` and decide which run; see the module notes."""
    from bakery import __version__
    from bakery.bakes import get_bake, params_from_mapping, params_to_dict

    cache = Cache.load(recipe.output) if cache is None else cache
    files, folders = scan_sources(recipe.source)
    settings = {d: load_folder_file(recipe.source / d / FOLDER_FILE, recipe, _shown(recipe, d))
                for d in folders}
    only_patterns = _only_patterns(only)
    out_root = recipe.output.resolve()
    jobs: list[Job] = []
    unselected = 0
    for rule in recipe.rules:
        bake = get_bake(rule.bake)
        rule_jobs = []
        for rel in files if rule.match is not None else [None]:
            if rel is None:  # a bake without inputs: one job
                values, job_inputs = {"rule": rule.name}, {}
            else:
                fields = rule.match.match(rel)
                if fields is None or any(e.match(rel) is not None for e in rule.exclude):
                    continue
                values = _path_fields(rel, rule) | fields
                job_inputs = {bake.inputs[0].rstrip("?"): rel}
            missing: list[str] = []
            for role, tmpl in rule.inputs.items():
                try:
                    other = tmpl.render(values)
                except BakeryError as exc:
                    raise BakeryError(f"{rule.where}: key 'inputs.{role}': {exc}") from None
                if (recipe.source / other).is_file():
                    job_inputs[role] = other
                elif role in bake.required_inputs:
                    missing.append(f"no {role} input {other}")
                else:
                    job_inputs.pop(role, None)
            try:
                output = rule.output.render(values)
            except BakeryError as exc:
                raise BakeryError(f"{rule.where}: key 'output': {exc}") from None
            check_output(out_root, output, rule)
            merged, origins = _resolve_values(rule, recipe, settings, rel)
            params_obj = params_from_mapping(bake, merged, f"{rule.where}: params" + (f" for {rel}" if rel else ""))
            ordered = {r: job_inputs[r] for r in (x.rstrip("?") for x in bake.inputs) if r in job_inputs}
            job = Job(rule.name, bake.name, bake.run.__module__, ordered, output, merged, params_to_dict(params_obj),
                      origins)
            if missing:
                job.action = SKIP if rule.unpaired == "skip" else FAIL
                job.reason = "; ".join(missing)
            rule_jobs.append(job)
        rule_jobs.sort(key=lambda j: j.output)
        jobs += rule_jobs
    _check_unique(jobs)  # over every job, selected or not: the recipe itself must be sound
    all_outputs = {j.output for j in jobs}
    if only_patterns:
        selected = [j for j in jobs if _selected(j, only_patterns)]
        unselected, jobs = len(jobs) - len(selected), selected
    for job in jobs:
        if job.reason:  # unpaired: decided already
            continue
        try:
            job.digests = {role: cache.digest(recipe.source / rel) for role, rel in job.inputs.items()}
        except BakeryError as exc:  # an unreadable input fails its own job, not the batch
            job.action, job.reason = FAIL, str(exc)
            continue
        named = {role: (Path(rel).name, job.digests[role]) for role, rel in job.inputs.items()}
        encoder = _encoder() if job.output.lower().endswith(".ktx2") else None
        job.key = job_key(job.bake, named, job.params, __version__, encoder)
        job.action, job.reason = _decide(job, cache, recipe.output, force, __version__)
    return Plan(recipe, jobs, cache, unselected, all_outputs)


def _shown(recipe: Recipe, folder: str) -> str:
    return (Path(recipe.source.name) / folder / FOLDER_FILE).as_posix()


def _path_fields(rel: str, rule: Rule) -> dict[str, str]:
    p = Path(rel)
    parent = p.parent.as_posix()
    return {"path": rel, "dir": "" if parent == "." else parent, "name": p.name, "stem": p.stem,
            "ext": p.suffix[1:], "parent": p.parent.name, "rule": rule.name}


def _resolve_values(rule: Rule, recipe: Recipe, settings: dict[str, FolderSettings],
                    rel: str | None) -> tuple[dict[str, Any], dict[str, str]]:
    """Merge parameter values: profile < recipe defaults < rule < folder files from the root down (bake, then
    rule). The profile's values reach the bakes they apply to (:meth:`bakery.profiles.Profile.defaults_for`)."""
    merged: dict[str, Any] = {}
    origins: dict[str, str] = {}

    def put(values: dict[str, Any], origin: str) -> None:
        for k, v in values.items():
            name = k.replace("-", "_")
            merged[name] = v
            origins[name] = origin

    profile = getattr(recipe, "profile", None)
    if profile is not None:
        output = None  # the job's output path decides whether a stated layout applies
        try:
            if rel is None:
                output = rule.output.render({"rule": rule.name})
            elif rule.match is not None and (fields := rule.match.match(rel)) is not None:
                output = rule.output.render(_path_fields(rel, rule) | fields)
        except (BakeryError, KeyError):
            output = None
        put(profile.defaults_for(rule.bake, output), f"profile {profile.path.name}")
    put(recipe.defaults.get(rule.bake, {}), f"recipe [defaults.{rule.bake}]")
    put(rule.params, f"rule {rule.name!r}")
    parts = Path(rel).parent.parts if rel is not None else None
    if parts is None:  # no input file, no folder
        return dict(sorted(merged.items())), dict(sorted(origins.items()))
    for depth in range(len(parts) + 1):
        folder = "/".join(parts[:depth])
        s = settings.get(folder)
        if s is None:
            continue
        put(s.bakes.get(rule.bake, {}), _shown(recipe, folder))
        put(s.rules.get(rule.name, {}), _shown(recipe, folder))
    return dict(sorted(merged.items())), dict(sorted(origins.items()))


def _encoder() -> str:
    from bakery.io.blockcodec import encoder_version  # reads package metadata; loads no encoder

    return encoder_version()


def check_output(out_root: Path, rel: str, rule: Rule) -> None:
    """Refuse an output that would land outside the (resolved) output root or in its state folder."""
    if rel.split("/", 1)[0] == STATE_DIR:
        raise BakeryError(f"{rule.where}: key 'output': {rel!r} is inside the output root's {STATE_DIR} folder, "
                          "which bakery keeps for its own state")
    resolved = (out_root / rel).resolve()
    if not resolved.is_relative_to(out_root):
        raise BakeryError(f"{rule.where}: key 'output': {rel!r} leads outside the output root {out_root} "
                          f"(through a link to {resolved.parent}); outputs must stay inside it")


def _check_unique(jobs: list[Job]) -> None:
    seen: dict[str, Job] = {}
    for job in jobs:
        other = seen.get(job.output)
        if other is not None:
            a = next(iter(other.inputs.values()), "no input")
            b = next(iter(job.inputs.values()), "no input")
            raise BakeryError(f"two jobs write {job.output}: rule {other.rule!r} from {a} and rule {job.rule!r} "
                              f"from {b}; make the output templates differ")
        seen[job.output] = job


def _only_patterns(only: tuple[str, ...]) -> list[Any]:
    from bakery.batch.recipe import compile_pattern

    pats = []
    for text in only:
        if text and "/" not in text and "*" not in text and "?" not in text and "[" not in text:
            pats.append(text)  # a rule name or a plain file name
        else:
            pats.append(compile_pattern(text, f"--only {text!r}"))
    return pats


def _selected(job: Job, patterns: list[Any]) -> bool:
    paths = [*job.inputs.values(), job.output]
    for p in patterns:
        if isinstance(p, str):
            if p == job.rule or any(x == p or x.rsplit("/", 1)[-1] == p for x in paths):
                return True
        elif any(p.match(x) is not None for x in paths):
            return True
    return False


def _decide(job: Job, cache: Cache, out_root: Path, force: bool, version: str) -> tuple[str, str]:
    entry = cache.jobs.get(job.output)
    if force:
        return RUN, "forced (--force)"
    if entry is None:
        return RUN, "new output"
    if entry.get("key") != job.key:
        return RUN, _explain_change(job, entry, version)
    for rel, sig in entry.get("outputs", {}).items():
        now = stat_signature(out_root / rel)
        if now is None:
            return RUN, f"output {rel} is missing"
        if list(now) != list(sig):
            return RUN, f"output {rel} changed since bakery wrote it"
    return SKIP, "up to date"


def _explain_change(job: Job, entry: dict[str, Any], version: str) -> str:
    reasons = []
    if entry.get("bake") != job.bake:
        reasons.append(f"bake changed from {entry.get('bake')!r}")
    old_inputs = entry.get("inputs", {})
    for role, rel in job.inputs.items():
        old = old_inputs.get(role)
        if old is None:
            reasons.append(f"new {role} input")
        elif old[0] != rel:
            reasons.append(f"{role} input is now {rel}")
        elif old[1] != job.digests[role]:
            reasons.append(f"{role} input {rel} changed")
    for role in old_inputs:
        if role not in job.inputs:
            reasons.append(f"{role} input gone")
    old_params = entry.get("params", {})
    changed = sorted(k for k in set(old_params) | set(job.params) if old_params.get(k) != job.params.get(k))
    if changed:
        reasons.append("parameters changed: " + ", ".join(changed))
    if entry.get("bakery") != version:
        reasons.append(f"bakery version changed from {entry.get('bakery')}")
    return "; ".join(reasons) or "job key changed"


def cache_entry(job: Job, outputs: dict[str, list[int]], version: str) -> dict[str, Any]:
    """The cache record of a job that ran: its key, what went into it and the files it wrote."""
    return {"key": job.key, "bake": job.bake, "rule": job.rule,
            "inputs": {r: [rel, job.digests[r]] for r, rel in job.inputs.items()},
            "params": job.params, "bakery": version, "outputs": outputs}
