"""Batch recipes: reading and checking the TOML file that describes a run over a texture library.

A recipe names a source root, an output root and rules. Each rule matches source files with a pattern, runs
one registered bake on them with parameters, and names its output with a template built from the matched
file's path parts. Settings can be overridden per folder by a small TOML file (:data:`FOLDER_FILE`) placed
beside the textures. The format is described in ``docs/batch.md``; an example is ``samples/library.toml``.

Patterns (relative to the source root, ``/`` separated, case-sensitive)
    ``**`` as a whole segment matches zero or more folders; ``*`` any characters within one segment; ``?``
    one character; ``[abc]`` one of the listed characters; ``{field}`` like ``*`` (at least one character)
    but remembered under that name for templates; the same ``{field}`` twice must match the same text.
    Hidden files and folders (a name starting with ``.``) never match.
Templates (output names and the paths of a rule's other inputs)
    Plain text with ``{field}`` placeholders: ``path`` (the matched file relative to the source root),
    ``dir`` (its folder, empty at the root), ``name``, ``stem`` (name without the last suffix), ``ext``
    (the suffix without its dot), ``parent`` (the name of the matched file's folder), ``rule`` (the rule
    name) and every ``{field}`` of the rule's pattern. Empty and ``.`` segments are dropped after filling
    in, so ``{dir}/{stem}_n.png`` works at the root. Absolute paths and ``..`` are refused.
Chained rules (another rule's outputs as inputs)
    ``@RULE`` in ``match`` takes the main output of every job of rule ``RULE``; ``@RULE/PATTERN`` the files
    those jobs write (main and side outputs, never manifests) that match ``PATTERN``, relative to the output
    root. A partner template ``inputs.ROLE = "@RULE/TEMPLATE"`` names a file that rule ``RULE`` writes (a
    file it does not write is refused before any job runs). A plain pattern also matches the main outputs
    of the other rules' jobs (never side outputs or manifests, never the rule's own outputs), so a rule over
    ``*_normal.png`` takes the normal maps another rule makes. The rules form a graph: a cycle is refused with
    the rules named, and the plan runs them in its topological order.

Nothing here imports heavy libraries: a run with nothing to do must start fast.
"""

from __future__ import annotations

import re
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from bakery.errors import BakeryError

#: The per-folder override file: it applies to its folder and every folder below it.
FOLDER_FILE = "bakery-folder.toml"

#: Fields every template may use (plus the pattern's own ``{field}`` names).
PATH_FIELDS = ("path", "dir", "name", "stem", "ext", "parent", "rule")

_FIELD = re.compile(r"\{([A-Za-z_][A-Za-z0-9_]*)\}")
_RULE_KEYS = {"name", "bake", "match", "exclude", "output", "inputs", "params", "unpaired"}
_NAME = re.compile(r"[A-Za-z0-9][A-Za-z0-9_.-]*")
_TOP_KEYS = {"source", "output", "profile", "defaults", "rule"}


@dataclass(frozen=True)
class Pattern:
    """A compiled file pattern (see the module notes for the syntax)."""

    text: str
    regex: re.Pattern
    fields: tuple[str, ...]

    def match(self, rel: str) -> dict[str, str] | None:
        """The ``{field}`` values if ``rel`` (a ``/``-separated path) matches, else None."""
        m = self.regex.fullmatch(rel)
        return None if m is None else {k: v for k, v in m.groupdict().items() if v is not None}


@dataclass(frozen=True)
class Template:
    """An output or input name template (see the module notes)."""

    text: str
    fields: tuple[str, ...]

    def render(self, values: dict[str, str]) -> str:
        """Fill in the fields and normalise: no empty or ``.`` segments; ``..`` refused."""
        text = _FIELD.sub(lambda m: values[m.group(1)], self.text)
        parts = [p for p in text.split("/") if p not in ("", ".")]
        if any(p == ".." for p in parts):
            raise BakeryError(f"template {self.text!r} gives {text!r}, which leaves its root folder")
        if not parts:
            raise BakeryError(f"template {self.text!r} gives an empty path")
        return "/".join(parts)


@dataclass(frozen=True)
class Rule:
    """One rule of a recipe: which files, which bake, which parameters, where the outputs go.

    Attributes
    ----------
    name : str
        Unique within the recipe; names the rule in plans, reports, folder files and ``--only``.
    bake : str
        A registered bake (:func:`bakery.bakes.get_bake`).
    match : Pattern or None
        Selects the files that fill the bake's first input role (one job per matched file). None for a bake
        without inputs (the rule makes exactly one job) and for ``match = "@RULE"`` (every main output of
        ``RULE``).
    exclude : tuple of Pattern
        Files matched by any of these are left out.
    output : Template
        The output path relative to the output root.
    inputs : dict of str to Template
        The other input roles, as paths relative to the source root; a role named here for the first role
        overrides the matched file (``{path}`` is the matched file).
    params : dict
        The rule's parameter values (checked against the bake's parameters when the recipe is loaded).
    unpaired : {"skip", "fail"}
        What happens when a required input named by ``inputs`` does not exist: the job is skipped (and
        listed as such) or fails.
    where : str
        ``"recipe.toml: rule 'name'"`` for messages.
    match_from : str or None
        The rule whose outputs ``match`` selects from (``@RULE``), or None: the source root.
    inputs_from : dict of str to str
        Input role -> the rule whose output its template names (``@RULE/...``); other roles are source files.
    """

    name: str
    bake: str
    match: Pattern | None
    exclude: tuple[Pattern, ...]
    output: Template
    inputs: dict[str, Template]
    params: dict[str, Any]
    unpaired: str
    where: str
    match_from: str | None = None
    inputs_from: dict[str, str] = field(default_factory=dict)

    @property
    def upstream(self) -> tuple[str, ...]:
        """The rules whose outputs this rule reads."""
        names = ([self.match_from] if self.match_from else []) + list(self.inputs_from.values())
        return tuple(dict.fromkeys(names))


@dataclass(frozen=True)
class Recipe:
    """A checked recipe. Paths are absolute (relative ones are taken from the recipe's folder)."""

    path: Path
    source: Path
    output: Path
    defaults: dict[str, dict[str, Any]]
    rules: tuple[Rule, ...]
    profile: Any = None  # a bakery.profiles.Profile (the recipe's ``profile`` key), or None


# ---------------------------------------------------------------------------------------------- parsing


def compile_pattern(text: str, where: str) -> Pattern:
    """Turn a pattern into an anchored regular expression; errors name ``where``."""
    if not isinstance(text, str) or not text.strip():
        raise BakeryError(f"{where}: expected a file pattern such as \"**/*_height.png\"; got {text!r}")
    if text.startswith("/") or re.match(r"^[A-Za-z]:", text) or "\\" in text:
        raise BakeryError(f"{where}: pattern {text!r} must be relative to the source root, with / between "
                          "folders")
    segments = text.split("/")
    if any(s in ("", ".", "..") for s in segments):
        raise BakeryError(f"{where}: pattern {text!r} has an empty, '.' or '..' folder part")
    out = []
    fields: list[str] = []
    for i, seg in enumerate(segments):
        last = i == len(segments) - 1
        if seg == "**":
            out.append("(?:[^/.][^/]*/)*" if not last else "(?:[^/.][^/]*/)*[^/.][^/]*")
            continue
        if "**" in seg:
            raise BakeryError(f"{where}: '**' must be a whole folder part in pattern {text!r}")
        out.append(_segment_regex(seg, fields, text, where) + ("" if last else "/"))
    try:
        regex = re.compile("".join(out))
    except re.error as exc:  # e.g. a character range backwards: [z-a]
        raise BakeryError(f"{where}: pattern {text!r} is not valid ({exc.msg})") from None
    return Pattern(text, regex, tuple(dict.fromkeys(fields)))


def _segment_regex(seg: str, fields: list[str], text: str, where: str) -> str:
    out = ["(?!\\.)"]  # hidden names never match
    i = 0
    while i < len(seg):
        c = seg[i]
        if c == "*":
            out.append("[^/]*")
        elif c == "?":
            out.append("[^/]")
        elif c == "[":
            j = seg.find("]", i + 2)
            if j < 0:
                raise BakeryError(f"{where}: unclosed '[' in pattern {text!r}")
            body = seg[i + 1:j]
            neg = body.startswith("!")
            body = body[1:] if neg else body
            out.append("[" + ("^" if neg else "") + body.replace("\\", "\\\\").replace("^", "\\^") + "]")
            i = j
        elif c == "{":
            m = _FIELD.match(seg, i)
            if m is None:
                raise BakeryError(f"{where}: '{{' must start a field like {{material}} in pattern {text!r}")
            name = m.group(1)
            if name in PATH_FIELDS:
                raise BakeryError(f"{where}: field {{{name}}} in pattern {text!r} is reserved; "
                                  f"choose another name (reserved: {', '.join(PATH_FIELDS)})")
            out.append(f"(?P={name})" if name in fields else f"(?P<{name}>[^/]+?)")
            fields.append(name)
            i = m.end() - 1
        elif c in "}]":
            raise BakeryError(f"{where}: unexpected {c!r} in pattern {text!r}")
        else:
            out.append(re.escape(c))
        i += 1
    return "".join(out)


def compile_template(text: Any, available: tuple[str, ...], where: str) -> Template:
    """Check a template: relative, no ``..``, only known fields."""
    if not isinstance(text, str) or not text.strip():
        raise BakeryError(f"{where}: expected a path template such as \"{{dir}}/{{stem}}_normal.png\"; "
                          f"got {text!r}")
    if text.startswith("/") or re.match(r"^[A-Za-z]:", text) or "\\" in text:
        raise BakeryError(f"{where}: template {text!r} must be a relative path with / between folders "
                          "(absolute paths are refused)")
    if any(p == ".." for p in text.split("/")):
        raise BakeryError(f"{where}: template {text!r} must not contain '..' (outputs stay inside their root)")
    fields = _FIELD.findall(text)
    rest = _FIELD.sub("", text)
    if "{" in rest or "}" in rest:
        raise BakeryError(f"{where}: template {text!r} has a stray brace; fields look like {{stem}}")
    for f in fields:
        if f not in available:
            raise BakeryError(f"{where}: unknown field {{{f}}} in template {text!r}; available: "
                              f"{', '.join('{' + a + '}' for a in available)}")
    return Template(text, tuple(fields))


def read_toml(path: Path) -> dict[str, Any]:
    """Read a TOML file; syntax errors name the file and the line."""
    try:
        data = path.read_bytes()
    except FileNotFoundError:
        raise BakeryError("file not found", path) from None
    except OSError as exc:
        raise BakeryError(f"cannot read the file ({exc.strerror})", path) from None
    try:
        return tomllib.loads(data.decode("utf-8"))
    except UnicodeDecodeError:
        raise BakeryError("not UTF-8 text; TOML files must be UTF-8", path) from None
    except tomllib.TOMLDecodeError as exc:
        raise BakeryError(f"TOML syntax error: {exc}", path) from None


def load_recipe(path: str | Path) -> Recipe:
    """Read and check a recipe; every problem raises :class:`BakeryError` naming the file and the key.

    Parameters are checked against each bake's parameter dataclass here, so a wrong value stops the run
    before any job starts.
    """
    path = Path(path)
    data = read_toml(path)
    where = str(path)
    base = path.resolve().parent
    unknown = sorted(set(data) - _TOP_KEYS)
    if unknown:
        raise BakeryError(f"{where}: unknown key {unknown[0]!r}; a recipe has: source, output, profile, "
                          "[defaults.<bake>] tables and [[rule]] entries")
    source = _root(data, "source", base, where)
    output = _root(data, "output", base, where)
    if not source.is_dir():
        raise BakeryError(f"{where}: key 'source': folder {source} does not exist")
    if output.exists() and not output.is_dir():
        raise BakeryError(f"{where}: key 'output': {output} is a file; the output root must be a folder")
    if output == source or _inside(output, source) or _inside(source, output):
        raise BakeryError(f"{where}: key 'output': the output root {output} and the source root {source} must "
                          "not contain each other (outputs would mix with sources)")
    profile = _profile(data, base, where)
    defaults_raw = data.get("defaults", {})
    if not isinstance(defaults_raw, dict):
        raise BakeryError(f"{where}: key 'defaults': expected tables like [defaults.normal]")
    defaults: dict[str, dict[str, Any]] = {}
    for bake_name, values in defaults_raw.items():
        defaults[bake_name] = _bake_values(bake_name, values, f"{where}: [defaults.{bake_name}]")
    rules_raw = data.get("rule")
    if not isinstance(rules_raw, list) or not rules_raw:
        raise BakeryError(f"{where}: no rules; add at least one [[rule]] with bake, match and output")
    rules = []
    names: set[str] = set()
    for i, raw in enumerate(rules_raw, 1):
        rule = _rule(raw, i, where, defaults)
        if rule.name in names:
            raise BakeryError(f"{rule.where}: another rule has the name {rule.name!r}; names must be unique")
        names.add(rule.name)
        rules.append(rule)
    rules = _check_graph(rules)
    return Recipe(path.resolve(), source, output, defaults, tuple(rules), profile)


def _profile(data: dict, base: Path, where: str) -> Any:
    """The recipe's target profile (key ``profile``: a .toml file relative to the recipe's folder), or None."""
    value = data.get("profile")
    if value is None:
        return None
    if not isinstance(value, str) or not value.strip():
        raise BakeryError(f"{where}: key 'profile': expected the path of a profile .toml file (relative to the "
                          "recipe's folder)")
    from bakery.profiles import load_profile

    try:
        return load_profile(base / Path(value).expanduser())
    except BakeryError as exc:
        raise BakeryError(f"{where}: key 'profile': {exc}") from None


def _check_graph(rules: list[Rule]) -> list[Rule]:
    """The rules in graph order (:func:`graph_order`); unknown rule names, a rule reading its own outputs and
    cycles are refused."""
    by_name = {r.name: r for r in rules}
    for r in rules:
        for up in r.upstream:
            key = "match" if up == r.match_from else next(f"inputs.{k}" for k, v in r.inputs_from.items() if v == up)
            if up not in by_name:
                raise BakeryError(f"{r.where}: key {key!r}: no rule is named {up!r}; the rules are: "
                                  f"{', '.join(by_name)}")
            if up == r.name:
                raise BakeryError(f"{r.where}: key {key!r}: the rule reads its own outputs (@{up}); a rule cannot "
                                  "consume what it writes")
    return graph_order(rules)


def graph_order(rules: list[Rule] | tuple[Rule, ...], matched: dict[str, set[str]] | None = None) -> list[Rule]:
    """The rules in an order where every rule comes after the rules whose outputs it reads (recipe order where
    that allows). ``matched``: rule -> the rules whose planned outputs its plain pattern matches (found when
    planning). A cycle is refused with the rules named."""
    by_name = {r.name: r for r in rules}
    matched = matched or {}
    order: list[Rule] = []
    state: dict[str, int] = {}  # 1: on the current path, 2: placed

    def ups(r: Rule) -> list[str]:
        return list(r.upstream) + sorted(matched.get(r.name, set()) - set(r.upstream))

    def visit(r: Rule, path: list[str]) -> None:
        if state.get(r.name) == 2:
            return
        if state.get(r.name) == 1:
            cycle = path[path.index(r.name):] + [r.name]
            how = [f"{a!r} matches files {b!r} writes" for a, b in zip(cycle, cycle[1:], strict=False)
                   if b in matched.get(a, set()) and b not in by_name[a].upstream]
            note = f"; by pattern: {', '.join(how)} (narrow the pattern or add an exclude)" if how else ""
            raise BakeryError(f"{r.where}: the rules form a cycle: {' -> '.join(cycle)} (each reads the outputs of "
                              f"the next){note}; no job can run first")
        state[r.name] = 1
        for up in ups(r):
            visit(by_name[up], path + [r.name])
        state[r.name] = 2
        order.append(r)

    for r in rules:
        visit(r, [])
    return order


def split_ref(text: Any, where: str) -> tuple[str | None, Any]:
    """``"@RULE/rest"`` -> ("RULE", "rest"); ``"@RULE"`` -> ("RULE", None); anything else -> (None, text)."""
    if not isinstance(text, str) or not text.startswith("@"):
        return None, text
    head, sep, rest = text[1:].partition("/")
    if not _NAME.fullmatch(head):
        raise BakeryError(f"{where}: {text!r}: '@' must be followed by a rule name, as in \"@normals\" or "
                          "\"@normals/**/*_normal.png\"")
    return head, (rest if sep else None)


def _root(data: dict, key: str, base: Path, where: str) -> Path:
    value = data.get(key)
    if not isinstance(value, str) or not value.strip():
        raise BakeryError(f"{where}: key {key!r}: expected a folder path (relative to the recipe's folder)")
    return (base / Path(value).expanduser()).resolve()


def _inside(path: Path, root: Path) -> bool:
    return path.is_relative_to(root)


def _rule(raw: Any, index: int, where: str, defaults: dict) -> Rule:
    from bakery.bakes import get_bake

    w = f"{where}: rule {index}"
    if not isinstance(raw, dict):
        raise BakeryError(f"{w}: expected a table")
    name = raw.get("name", None)
    if name is not None:
        if not isinstance(name, str) or not _NAME.fullmatch(name):
            raise BakeryError(f"{w}: key 'name': expected letters, digits, '-', '_' or '.'; got {name!r}")
        w = f"{where}: rule {name!r}"
    unknown = sorted(set(raw) - _RULE_KEYS)
    if unknown:
        raise BakeryError(f"{w}: unknown key {unknown[0]!r}; a rule has: {', '.join(sorted(_RULE_KEYS))}")
    for key in ("bake", "output"):
        if key not in raw:
            raise BakeryError(f"{w}: missing key {key!r}")
    if not isinstance(raw["bake"], str):
        raise BakeryError(f"{w}: key 'bake': expected a bake name")
    try:
        bake = get_bake(raw["bake"])
    except BakeryError as exc:
        raise BakeryError(f"{w}: key 'bake': {exc}") from None
    if name is None:
        name = f"{bake.name}-{index}"
    if not bake.inputs:  # a bake without inputs (a table, a lookup texture): one job per rule
        extra = sorted({"match", "exclude", "inputs"} & set(raw))
        if extra:
            raise BakeryError(f"{w}: key {extra[0]!r}: bake {bake.name!r} reads no input files, so its rule makes "
                              "one job and takes no 'match', 'exclude' or 'inputs'")
        output = compile_template(raw["output"], ("rule",), f"{w}: key 'output'")
        return Rule(name, bake.name, None, (), output, {}, _params(raw, bake, defaults, w),
                    _unpaired(raw, w), w)
    if "match" not in raw:
        raise BakeryError(f"{w}: missing key 'match' (the pattern of the files for input "
                          f"{bake.inputs[0].rstrip('?')!r})")
    match_from, match_text = split_ref(raw["match"], f"{w}: key 'match'")
    match = None if match_from and match_text is None else compile_pattern(match_text, f"{w}: key 'match'")
    excl_raw = raw.get("exclude", [])
    if isinstance(excl_raw, str):
        excl_raw = [excl_raw]
    if not isinstance(excl_raw, list):
        raise BakeryError(f"{w}: key 'exclude': expected a pattern or a list of patterns")
    exclude = tuple(compile_pattern(e, f"{w}: key 'exclude'") for e in excl_raw)
    available = PATH_FIELDS + (match.fields if match is not None else ())
    output = compile_template(raw["output"], available, f"{w}: key 'output'")
    roles = [r.rstrip("?") for r in bake.inputs]
    inputs_raw = raw.get("inputs", {})
    if not isinstance(inputs_raw, dict):
        raise BakeryError(f"{w}: key 'inputs': expected a table of role = \"template\"")
    inputs = {}
    inputs_from = {}
    for role, text in inputs_raw.items():
        if role not in roles:
            raise BakeryError(f"{w}: key 'inputs.{role}': bake {bake.name!r} has no input {role!r}; its inputs "
                              f"are: {', '.join(bake.inputs)}")
        up, text = split_ref(text, f"{w}: key 'inputs.{role}'")
        if up is not None:
            if text is None:
                raise BakeryError(f"{w}: key 'inputs.{role}': name the file of rule {up!r}, as in "
                                  f"\"@{up}/{{dir}}/{{material}}_{role}.png\"")
            inputs_from[role] = up
        inputs[role] = compile_template(text, available, f"{w}: key 'inputs.{role}'")
    missing = [r for r in bake.required_inputs if r != roles[0] and r not in inputs]
    if missing:
        raise BakeryError(f"{w}: bake {bake.name!r} needs input {missing[0]!r} too; name it with "
                          f"inputs.{missing[0]} = \"<template>\", e.g. \"{{dir}}/{{stem}}_{missing[0]}.png\"")
    return Rule(name, bake.name, match, exclude, output, inputs, _params(raw, bake, defaults, w),
                _unpaired(raw, w), w, match_from, inputs_from)


def _params(raw: dict, bake: Any, defaults: dict, w: str) -> dict[str, Any]:
    from bakery.bakes import params_from_mapping

    params = raw.get("params", {})
    if not isinstance(params, dict):
        raise BakeryError(f"{w}: key 'params': expected a table of parameter = value")
    params_from_mapping(bake, {**defaults.get(bake.name, {}), **params}, f"{w}: params")
    return dict(params)


def _unpaired(raw: dict, w: str) -> str:
    unpaired = raw.get("unpaired", "skip")
    if unpaired not in ("skip", "fail"):
        raise BakeryError(f"{w}: key 'unpaired': expected \"skip\" or \"fail\"; got {unpaired!r}")
    return unpaired


# ---------------------------------------------------------------------------------------------- folder files


@dataclass(frozen=True)
class FolderSettings:
    """One folder file: parameters per bake (``[bake.<name>]``) and per rule (``[rule.<name>]``)."""

    path: Path
    bakes: dict[str, dict[str, Any]]
    rules: dict[str, dict[str, Any]]


def load_folder_file(path: Path, recipe: Recipe, shown: str) -> FolderSettings:
    """Read and check a folder file against the recipe's rules and the registered bakes.

    ``shown`` is the name used in messages (the path relative to the source root's parent).
    """
    from bakery.bakes import get_bake, params_from_mapping

    data = read_toml(path)
    unknown = sorted(set(data) - {"bake", "rule"})
    if unknown:
        raise BakeryError(f"{shown}: unknown key {unknown[0]!r}; a folder file has [bake.<bake>] and "
                          "[rule.<rule>] tables of parameters")
    rules_by_name = {r.name: r for r in recipe.rules}
    bakes: dict[str, dict[str, Any]] = {}
    rules: dict[str, dict[str, Any]] = {}
    for key, table in data.get("bake", {}).items():
        bakes[key] = _bake_values(key, table, f"{shown}: [bake.{key}]")
    for key, table in data.get("rule", {}).items():
        w = f"{shown}: [rule.{key}]"
        if not isinstance(table, dict):
            raise BakeryError(f"{w}: expected a table of parameters")
        if key not in rules_by_name:
            raise BakeryError(f"{w}: the recipe has no rule {key!r}; its rules are: "
                              f"{', '.join(rules_by_name)}")
        params_from_mapping(get_bake(rules_by_name[key].bake), table, w)
        rules[key] = dict(table)
    return FolderSettings(path, bakes, rules)


# ---------------------------------------------------------------------------------------------- reference


def _bake_values(name: str, values: Any, where: str) -> dict[str, Any]:
    """A table of parameters for the bake ``name``, checked against its parameter dataclass."""
    from bakery.bakes import get_bake, params_from_mapping

    if not isinstance(values, dict):
        raise BakeryError(f"{where}: expected a table of parameters")
    try:
        bake = get_bake(name)
    except BakeryError as exc:
        raise BakeryError(f"{where}: {exc}") from None
    params_from_mapping(bake, values, where)
    return dict(values)
