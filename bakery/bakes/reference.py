"""The bakes' parameters as text: ``bakery batch --list-bakes`` and the reference page ``docs/reference.md``.

Both are generated from the parameter declarations (:mod:`bakery.bakes.params`), like the command options, so
they cannot drift from them. ``python -m bakery.bakes.reference docs/reference.md`` rewrites the page; a test
checks that the page in the repository is current.
"""

from __future__ import annotations

import sys
from pathlib import Path
from typing import Any

#: The command that runs each bake.
BAKE_COMMANDS = {
    "normal": "bakery normal", "height": "bakery height", "blend": "bakery blend",
    "normal-mips": "bakery normal-mips", "normal-fix": "bakery normal-fix", "roughness": "bakery roughness",
    "antialias": "bakery antialias", "env-convert": "bakery env convert", "env-diffuse": "bakery env diffuse",
    "env-specular": "bakery env specular", "env-lut": "bakery env lut", "env-lights": "bakery env lights",
    "occlusion": "bakery occlusion", "curvature": "bakery curvature", "mips": "bakery mips",
    "pack": "bakery pack",
}


def _value_text(value: Any) -> str:
    if value is None:
        return "(unset)"
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return f'"{value}"'
    if isinstance(value, tuple):
        return "[" + ", ".join(_value_text(v) for v in value) + "]"
    return f"{value:g}" if isinstance(value, float) else str(value)


def _accepts(spec) -> str:
    choices = spec.choices
    if choices is not None and spec.parse is None:
        return " | ".join(_value_text(c) for c in choices)
    base = spec.base
    name = {int: "whole number", float: "number", bool: "true | false", str: "text"}.get(base)
    if name is None:
        name = "list of numbers" if "tuple" in str(base) else "text or list of numbers"
    rng = []
    if spec.low is not None:
        rng.append(f"> {spec.low:g}" if spec.low_open else f">= {spec.low:g}")
    if spec.high is not None:
        rng.append(f"<= {spec.high:g}")
    return name + (f" ({', '.join(rng)})" if rng else "")


def describe_bakes() -> list[str]:
    """What a recipe can use: every bake with its input roles and parameters (recipe key = command option)."""
    from bakery.bakes import all_bakes
    from bakery.bakes.params import specs

    lines = []
    for bake in all_bakes().values():
        lines.append(f"{bake.name}: {bake.summary}")
        roles = ", ".join(f"{r[:-1]} (optional)" if r.endswith("?") else r for r in bake.inputs)
        lines.append(f"  inputs: {roles or 'none (a rule without match makes one job)'}")
        for spec in specs(bake.params):
            lines.append(f"  {spec.option} = {_value_text(spec.default)}  ({_accepts(spec)})")
    return lines


def reference_markdown() -> str:
    """The text of ``docs/reference.md``."""
    from bakery.bakes import all_bakes
    from bakery.bakes.params import specs

    out = ["# Bake parameters", "",
           "Generated from the parameter declarations in `bakery/bakes/` (`python -m bakery.bakes.reference "
           "docs/reference.md`); do not edit by hand.", "",
           "Every parameter is a command option (`--name`) and a recipe key (`name = ...` in `params`, "
           "`[defaults.BAKE]` or a folder file) of the same name; `-` and `_` are alike in recipes. Every command "
           "also takes its inputs and `-o/--output` (a file, or a folder ending in `/`).", ""]
    for bake in all_bakes().values():
        if not bake.run.__module__.startswith("bakery.bakes."):
            continue
        out += [f"## `{bake.name}`: {bake.summary}", ""]
        roles = ", ".join(f"`{r[:-1]}` (optional)" if r.endswith("?") else f"`{r}`" for r in bake.inputs)
        out += [f"Command: `{BAKE_COMMANDS.get(bake.name, '(none)')}`. Inputs: {roles or 'none'}.", ""]
        out += ["| parameter | default | accepts | unit | meaning |", "|---|---|---|---|---|"]
        for spec in specs(bake.params):
            help_text = spec.help.replace("|", "\\|")
            out.append(f"| `{spec.option}` | `{_value_text(spec.default)}` | {_accepts(spec).replace('|', '/')} | "
                       f"{spec.unit or ''} | {help_text} |")
        out.append("")
    return "\n".join(out)


if __name__ == "__main__":
    target = Path(sys.argv[1]) if len(sys.argv) > 1 else Path("docs/reference.md")
    target.write_text(reference_markdown(), encoding="utf-8")
    print(f"wrote {target}")
