"""Planning a batch: the graph of jobs a recipe makes from the files on disk, and which of them must run.

:func:`make_plan` walks the source root once and takes the rules in the recipe's graph order (a rule after
the rules whose outputs it reads, :func:`bakery.batch.recipe.load_recipe`). Per rule it matches source
files, or the files the jobs of an upstream rule will write (``@RULE``), pairs the other inputs by their
templates, resolves parameters (recipe defaults, then the rule, then folder files from the source root down
to the matched file's folder: in each folder ``[bake.<bake>]`` first, then ``[rule.<rule>]``) and decides
with the cache whether the job runs and why. A job's key covers its source inputs' content digests and the
keys of the jobs that make its other inputs, so a changed source re-runs exactly the jobs downstream of it.

Every file of every job (main output, manifest, mip levels, faces, side files) is known before anything
runs: for an up-to-date job the cache holds the files it wrote; otherwise the bake declares them
(:func:`bakery.bakes.planned_outputs`). Every file must stay inside the output root (not in its ``.bakery``
folder, no link leading out) and no two jobs may write one file. Problems raise :class:`BakeryError` naming
the rule, the file and the key, before any job runs.

A bake may need the size of an input to name its files (mip levels); for an input that an upstream job has
not written yet, the upstream job's own first input stands in (the bakes that write images from images keep
the size), and the job is marked ``assumed``: :func:`refresh_files` checks its files again against the real
input once the upstream job ran.

Nothing here imports heavy libraries when nothing needs to run: a run with nothing to do must start fast.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from bakery.batch.cache import STATE_DIR, Cache, job_key, stat_signature
from bakery.batch.recipe import FOLDER_FILE, FolderSettings, Recipe, Rule, graph_order, load_folder_file
from bakery.errors import BakeryError

RUN, SKIP, FAIL = "run", "skip", "fail"

#: Manifests (``NAME.ext.bakery.json``, :func:`bakery.io.manifest.manifest_path`) are never another rule's input.
MANIFEST_SUFFIX = ".bakery.json"


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
        Input role -> path, relative to the source root, or to the output root for a role in ``upstream``.
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
        Input role -> content digest (``job:<key>`` for a file another job makes: the key that determines it).
    key : str
        The job key (see :mod:`bakery.batch.cache`).
    action : {"run", "skip", "fail"}
        ``"fail"`` is decided at planning (an input missing with ``unpaired = "fail"``, an unreadable input, an
        upstream job that cannot run).
    reason : str
        Why the job runs, is skipped or failed, in words.
    upstream : dict of str to str
        Input role -> the output (job id) of the job that makes that input.
    files : list of str
        Every file the job writes, relative to the output root, sorted.
    assumed : bool
        The files were named with a stand-in for an input not written yet (see the module notes).
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
    upstream: dict[str, str] = field(default_factory=dict)
    files: list[str] = field(default_factory=list)
    assumed: bool = False

    def shown(self, role: str) -> str:
        """An input as the plan shows it: ``path`` for a source, ``@RULE/path`` for another job's file."""
        return f"@{self.upstream_rules[role]}/{self.inputs[role]}" if role in self.upstream else self.inputs[role]

    upstream_rules: dict[str, str] = field(default_factory=dict)  # role -> rule of the job that makes it


@dataclass
class Plan:
    """The jobs of a recipe in graph order (rules in the recipe's graph order, then output path), decided
    against the cache; every job comes after the jobs that make its inputs."""

    recipe: Recipe
    jobs: list[Job]
    cache: Cache
    unselected: int = 0
    all_outputs: set[str] = field(default_factory=set)  # outputs of every job, selected by --only or not
    writers: dict[str, str] = field(default_factory=dict)  # every planned file -> the output of its job

    @property
    def to_run(self) -> list[Job]:
        return [j for j in self.jobs if j.action == RUN]

    def stale(self) -> dict[str, list]:
        """Files the cache says bakery wrote that no job of the recipe writes now: file -> [size, mtime_ns]
        as written (from rules, sources or parameters that changed)."""
        out: dict[str, list] = {}
        for entry in self.cache.jobs.values():
            for rel, sig in entry.get("outputs", {}).items():
                if rel not in self.writers:
                    out[rel] = sig
        for rel, sig in self.cache.stale.items():
            if rel not in self.writers:
                out[rel] = sig
        return dict(sorted(out.items()))


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
    cache = Cache.load(recipe.output) if cache is None else cache
    files, folders = scan_sources(recipe.source)
    settings = {d: load_folder_file(recipe.source / d / FOLDER_FILE, recipe, _shown(recipe, d))
                for d in folders}
    only_patterns = _only_patterns(only)
    out_root = recipe.output.resolve()
    matched: dict[str, set[str]] = {}  # rule -> rules whose main outputs its plain pattern matches
    while True:  # plan in graph order; a plain pattern matching a later rule's outputs adds an edge, re-plan
        order = graph_order(recipe.rules, matched)
        jobs, by_output, writers = _plan_rules(order, recipe, files, settings, cache, force, out_root)
        late = _late_matches(order, jobs)
        if not late:
            break
        for rule, producers in late.items():
            matched.setdefault(rule, set()).update(producers)
    all_outputs = {j.output for j in jobs}
    unselected = 0
    if only_patterns:
        keep = {id(j) for j in jobs if _selected(j, only_patterns)}
        for job in reversed(jobs):  # pull in what the chosen jobs need: downstream jobs come later in the list
            if id(job) in keep:
                keep.update(id(by_output[o]) for o in job.upstream.values())
        selected = [j for j in jobs if id(j) in keep]
        unselected, jobs = len(jobs) - len(selected), selected
    return Plan(recipe, jobs, cache, unselected, all_outputs, {f: j.output for f, j in writers.items()})


def _plan_rules(order: list[Rule], recipe: Recipe, files: list[str], settings: dict[str, FolderSettings],
                cache: Cache, force: bool, out_root: Path) -> tuple[list[Job], dict[str, Job], dict[str, Job]]:
    """Every job of the rules in ``order``: (jobs in graph order, main output -> job, every file -> job)."""
    from bakery import __version__
    from bakery.bakes import get_bake, params_from_mapping, params_to_dict

    jobs: list[Job] = []
    by_rule: dict[str, list[Job]] = {}
    by_output: dict[str, Job] = {}
    writers: dict[str, Job] = {}  # every planned file -> its job
    objs: dict[int, Any] = {}  # id(job) -> its parameter object (to ask the bake for its files)
    for rule in order:  # graph order: upstream rules first
        bake = get_bake(rule.bake)
        rule_jobs = []
        for rel, producer in _candidates(rule, files, by_rule):
            if rel is None:  # a bake without inputs: one job
                values, job_inputs, upstream = {"rule": rule.name}, {}, {}
            else:
                fields = _fields(rule, rel)
                if fields is None:
                    continue
                values = _path_fields(rel, rule) | fields
                first = bake.inputs[0].rstrip("?")
                job_inputs = {first: rel}
                upstream = {first: producer} if producer is not None else {}
            missing: list[str] = []
            for role, tmpl in rule.inputs.items():
                try:
                    other = tmpl.render(values)
                except BakeryError as exc:
                    raise BakeryError(f"{rule.where}: key 'inputs.{role}': {exc}") from None
                up_rule = rule.inputs_from.get(role)
                if up_rule is not None:
                    maker = writers.get(other)
                    if maker is None or maker.rule != up_rule:
                        by = f" (job {maker.output} of rule {maker.rule!r} writes it)" if maker else ""
                        raise BakeryError(f"{rule.where}: key 'inputs.{role}': rule {up_rule!r} writes no file "
                                          f"{other}{by}, which the job for {rel} needs; no job has run")
                    job_inputs[role], upstream[role] = other, maker
                elif (recipe.source / other).is_file():
                    job_inputs[role] = other
                    upstream.pop(role, None)
                elif role in bake.required_inputs:
                    missing.append(f"no {role} input {other}")
                else:
                    job_inputs.pop(role, None)
                    upstream.pop(role, None)
            try:
                output = rule.output.render(values)
            except BakeryError as exc:
                raise BakeryError(f"{rule.where}: key 'output': {exc}") from None
            check_output(out_root, output, rule)
            merged, origins = _resolve_values(rule, recipe, settings, rel)
            params_obj = params_from_mapping(bake, merged, f"{rule.where}: params" + (f" for {rel}" if rel else ""))
            roles = [r for r in (x.rstrip("?") for x in bake.inputs) if r in job_inputs]
            job = Job(rule.name, bake.name, bake.run.__module__, {r: job_inputs[r] for r in roles}, output, merged,
                      params_to_dict(params_obj), origins)
            job.upstream = {r: upstream[r].output for r in roles if r in upstream}
            job.upstream_rules = {r: upstream[r].rule for r in roles if r in upstream}
            objs[id(job)] = params_obj
            if missing:
                job.action = SKIP if rule.unpaired == "skip" else FAIL
                job.reason = "; ".join(missing)
            rule_jobs.append(job)
        rule_jobs.sort(key=lambda j: j.output)
        for job in rule_jobs:
            if job.output in by_output:
                _two_writers(job.output, by_output[job.output], job, recipe)
            by_output[job.output] = job
            _decide_job(job, recipe, cache, by_output, force, __version__)
            job.files = _files(job, recipe, cache, by_output, objs.pop(id(job)))
            for rel in job.files:
                check_output(out_root, rel, next(r for r in recipe.rules if r.name == job.rule))
                other = writers.get(rel)
                if other is not None and other is not job:
                    _two_writers(rel, other, job, recipe)
                writers[rel] = job
        by_rule[rule.name] = rule_jobs
        jobs += rule_jobs
    return jobs, by_output, writers


def _fields(rule: Rule, rel: str) -> dict[str, str] | None:
    """The pattern fields of ``rel`` for ``rule`` (empty for ``@RULE`` alone), or None when the rule's pattern
    does not take it or an exclude leaves it out."""
    fields = rule.match.match(rel) if rule.match is not None else {}
    if fields is None or any(e.match(rel) is not None for e in rule.exclude):
        return None
    return fields


def _late_matches(order: list[Rule], jobs: list[Job]) -> dict[str, set[str]]:
    """Rule -> the rules after it in ``order`` whose main outputs its plain pattern matches (it must come after
    them: the plan is made again in the new order)."""
    position = {r.name: i for i, r in enumerate(order)}
    late: dict[str, set[str]] = {}
    for rule in order:
        if rule.match_from is not None or rule.match is None:
            continue
        for job in jobs:
            if position[job.rule] > position[rule.name] and _fields(rule, job.output) is not None:
                late.setdefault(rule.name, set()).add(job.rule)
    return late


def _candidates(rule: Rule, files: list[str], by_rule: dict[str, list[Job]]):
    """(path, the job that makes it or None) for every file the rule's pattern is tried on: for a plain
    pattern the source files and the main outputs of the rules planned before it."""
    if rule.match_from is None:
        if rule.match is None:  # a bake without inputs: one job
            return [(None, None)]
        return [(rel, None) for rel in files] + [(j.output, j) for ups in by_rule.values() for j in ups]
    ups = by_rule[rule.match_from]
    if rule.match is None:  # "@RULE": every main output of that rule
        return [(j.output, j) for j in ups]
    return [(rel, j) for j in ups for rel in j.files if not rel.endswith(MANIFEST_SUFFIX)]


def _two_writers(rel: str, a: Job, b: Job, recipe: Recipe) -> None:
    def side(j: Job) -> str:
        return "" if j.output == rel else f" (beside its output {j.output})"

    raise BakeryError(f"two jobs write {rel}: rule {a.rule!r} from {_first(a)}{side(a)} and rule {b.rule!r} from "
                      f"{_first(b)}{side(b)}; make the output templates differ")


def _first(job: Job) -> str:
    return job.shown(next(iter(job.inputs))) if job.inputs else "no input"


def _decide_job(job: Job, recipe: Recipe, cache: Cache, by_output: dict[str, Job], force: bool,
                version: str) -> None:
    """Digests, key, action and reason of one job; the jobs that make its inputs are decided already."""
    if job.reason:  # unpaired: decided already
        return
    for role, out in job.upstream.items():
        maker = by_output[out]
        if maker.action == FAIL:
            job.action, job.reason = FAIL, (f"its {role} input {job.shown(role)} cannot be made: "
                                            f"{maker.reason}")
            return
        if not maker.key:  # skipped for want of an input: nothing to read
            job.action, job.reason = SKIP, (f"its {role} input {job.shown(role)} is not made "
                                            f"({maker.reason})")
            return
    try:
        job.digests = {role: ("job:" + by_output[job.upstream[role]].key if role in job.upstream
                              else cache.digest(recipe.source / rel)) for role, rel in job.inputs.items()}
    except BakeryError as exc:  # an unreadable input fails its own job, not the batch
        job.action, job.reason = FAIL, str(exc)
        return
    named = {role: (Path(rel).name, job.digests[role]) for role, rel in job.inputs.items()}
    encoder = _encoder() if job.output.lower().endswith(".ktx2") else None
    job.key = job_key(job.bake, named, job.params, version, encoder)
    job.action, job.reason = _decide(job, cache, recipe.output, force, version)


def _files(job: Job, recipe: Recipe, cache: Cache, by_output: dict[str, Job], params: Any) -> list[str]:
    """Every file of the job, relative to the output root: from the cache when the job's key is the recorded
    one (the same key writes the same files), else as the bake declares them."""
    entry = cache.jobs.get(job.output)
    if job.key and entry is not None and entry.get("key") == job.key and entry.get("outputs"):
        return sorted(entry["outputs"])
    paths: dict[str, Path] = {}
    for role, rel in job.inputs.items():
        if role in job.upstream:
            maker = by_output[job.upstream[role]]
            real = recipe.output / rel
            if maker.action == RUN or not real.is_file():
                stand_in = _stand_in(maker, recipe, by_output)
                if stand_in is not None:
                    paths[role], job.assumed = stand_in, True
                    continue
            paths[role] = real
        else:
            paths[role] = recipe.source / rel
    return _declared(job, paths, recipe, params)


def _declared(job: Job, paths: dict[str, Path], recipe: Recipe, params: Any) -> list[str]:
    try:
        return declared_files(job.bake, paths, recipe.output, job.output, params)
    except BakeryError as exc:
        rule = next(r for r in recipe.rules if r.name == job.rule)
        if exc.path is not None and exc.path in {str(p) for p in paths.values()}:
            if job.action == RUN:  # an input whose header cannot be read fails its own job when it runs
                job.action, job.reason = FAIL, str(exc)
            return [job.output]
        raise BakeryError(f"{rule.where}: key 'output': {exc}") from None


def declared_files(bake: str, paths: dict[str, Path], out_root: Path, output: str, params: Any) -> list[str]:
    """Every file ``bake`` declares for these inputs, relative to the output root, sorted. Raises
    :class:`BakeryError` (naming the input when its header cannot be read, or a file outside the root)."""
    from bakery.bakes import planned_outputs

    rels = []
    for p in planned_outputs(bake, paths, out_root / output, params):
        try:
            rels.append(Path(os.path.normpath(p)).relative_to(os.path.normpath(out_root)).as_posix())
        except ValueError:
            raise BakeryError(f"bake {bake!r} would write {p}, outside the output root") from None
    return sorted(set(rels))


def taken_by_another(files: list[str], output: str, writers: dict[str, str], first: str) -> str | None:
    """The refusal when a job renamed from its real inputs (its files follow the size of ``first``) would
    write a file that another job writes (``writers``: file -> that job's output); else None."""
    for rel in files:
        other = writers.get(rel)
        if other is not None and other != output:
            return (f"would write {rel}, which the job for {other} writes (its files follow the size of "
                    f"{first}, known only now)")
    return None


def _stand_in(maker: Job, recipe: Recipe, by_output: dict[str, Job]) -> Path | None:
    """An existing file with the size that ``maker``'s main output will have: its own first input (recursively
    when that is made by another job that runs too)."""
    if not maker.inputs:
        return None
    role, rel = next(iter(maker.inputs.items()))
    if role not in maker.upstream:
        return recipe.source / rel
    up = by_output[maker.upstream[role]]
    if up.action != RUN and (recipe.output / rel).is_file():
        return recipe.output / rel
    return _stand_in(up, recipe, by_output)


def refresh_files(job: Job, recipe: Recipe, plan: Plan) -> str | None:
    """Name the files of an ``assumed`` job again from its real inputs (its upstream jobs have run); returns a
    message when it would now write a file that another job writes, else None (``job.files`` is updated)."""
    from bakery.bakes import get_bake, params_from_mapping

    if not job.assumed:
        return None
    bake = get_bake(job.bake)
    paths = {role: (recipe.output if role in job.upstream else recipe.source) / rel for role, rel in job.inputs.items()}
    params = params_from_mapping(bake, job.values, f"rule {job.rule!r}")
    try:
        files = _declared(job, paths, recipe, params)
    except BakeryError as exc:
        return str(exc)
    problem = taken_by_another(files, job.output, plan.writers, job.shown(next(iter(job.inputs))))
    if problem is not None:
        return problem
    for rel in job.files:
        plan.writers.pop(rel, None)
    for rel in files:
        plan.writers[rel] = job.output
    job.files, job.assumed = files, False
    return None


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
    from bakery.io.ktx2_formats import encoder_version  # reads package metadata; loads no encoder

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
    paths = [*job.inputs.values(), job.output]  # inputs made by other jobs count by their path too
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
    for role in job.inputs:
        old, rel = old_inputs.get(role), job.shown(role)
        if old is None:
            reasons.append(f"new {role} input")
        elif old[0] != rel:
            reasons.append(f"{role} input is now {rel}")
        elif old[1] != job.digests[role]:
            reasons.append(f"{role} input {rel} changed" + (" upstream" if role in job.upstream else ""))
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


def cache_entry(job: Job, outputs: dict[str, list[int]], version: str,
                findings: list[dict] | None = None) -> dict[str, Any]:
    """The cache record of a job that ran: its key, what went into it, the files it wrote and what
    ``bakery inspect`` found in them (None: not inspected), so later runs that skip it still report them."""
    return {"key": job.key, "bake": job.bake, "rule": job.rule,
            "inputs": {r: [job.shown(r), job.digests[r]] for r in job.inputs},
            "params": job.params, "bakery": version, "outputs": outputs, "findings": findings}
