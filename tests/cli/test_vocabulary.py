"""One declaration per parameter: command options, recipe keys and the reference page come from the bakes'
parameter dataclasses, so they cannot disagree."""

from pathlib import Path

import pytest
import typer.main

from bakery.bakes import all_bakes
from bakery.bakes.params import specs
from bakery.bakes.reference import BAKE_COMMANDS, reference_markdown
from bakery.cli import app

ROOT = Path(__file__).resolve().parents[2]


@pytest.fixture(autouse=True)
def product_bakes_only(monkeypatch):
    """The product's bakes only: the batch tests register test bakes (tests/batch/bakes_for_tests.py) in the
    same registry when they run first."""
    import bakery.bakes as bakes

    bakes.all_bakes()
    monkeypatch.setattr(bakes, "_REGISTRY", {k: v for k, v in bakes._REGISTRY.items()
                                             if v.run.__module__.startswith("bakery.")})


def _command(words: list[str]):
    cmd = typer.main.get_command(app)
    for w in words:
        cmd = cmd.commands[w]
    return cmd


def _product_bakes():
    """The bakes of bakery itself (tests register bakes of their own)."""
    return {n: b for n, b in all_bakes().items() if b.run.__module__.startswith("bakery.bakes.")}


def test_every_bake_has_a_command_and_every_command_option_is_a_parameter():
    assert set(BAKE_COMMANDS) == set(_product_bakes())
    for name, bake in _product_bakes().items():
        cmd = _command(BAKE_COMMANDS[name].split()[1:])
        options = {}
        for p in cmd.params:
            if p.param_type_name == "option" and not (p.name or "").startswith("in_"):  # in_*: input files
                long = [o for o in p.opts if o.startswith("--")][0]
                options[long] = p
        command_only = {"--output", "--help", "--profile", "--jobs"}
        declared = {f"--{s.option}" for s in specs(bake.params)}
        assert set(options) - command_only == declared, name
        for s in specs(bake.params):  # the same help text, from the one declaration
            assert options[f"--{s.option}"].help.startswith(s.help), (name, s.name)


def test_shared_words_mean_one_thing():
    # A word used by several bakes has one kind of value everywhere (bits is always the sample type, y always
    # the green convention, ...); choice lists may differ where the bakes offer different methods.
    import typing

    def kind(s):
        return "choice" if s.choices is not None else str(s.base)

    seen: dict[str, tuple[str, object]] = {}
    for name, bake in _product_bakes().items():
        for s in specs(bake.params):
            if s.name in seen:
                other, first = seen[s.name]
                assert kind(first) == kind(s), f"{s.name}: {other} and {name} differ"
                if s.name in ("bits", "y", "edges", "input_layout"):
                    assert first.choices == s.choices, s.name
            seen.setdefault(s.name, (name, s))
    assert typing.get_args(seen["bits"][1].base) == ("8", "16", "half", "float")
    assert "depth" not in seen and "size" not in {s.name for s in specs(all_bakes()["normal"].params)}


def test_reference_page_is_current():
    page = (ROOT / "docs" / "reference.md").read_text(encoding="utf-8")
    assert page == reference_markdown(), "run: python -m bakery.bakes.reference docs/reference.md"
