"""Recipes: patterns, templates and validation messages that name the file, the key and what is expected."""

from __future__ import annotations

import pytest

import tests.batch.bakes_for_tests  # noqa: F401
from bakery.batch.recipe import compile_pattern, compile_template, load_recipe
from bakery.errors import BakeryError
from tests.batch.conftest import RECIPE


@pytest.mark.parametrize("pattern,path,fields", [
    ("**/*_height.png", "a_height.png", {}),
    ("**/*_height.png", "x/y/a_height.png", {}),
    ("**/*_height.png", "x/a_height.exr", None),
    ("**/*_height.png", ".hidden/a_height.png", None),
    ("**/*_height.png", "x/.a_height.png", None),
    ("*/*_height.png", "a_height.png", None),
    ("*/*_height.png", "x/a_height.png", {}),
    ("{m}/{m}_height.png", "oak/oak_height.png", {"m": "oak"}),
    ("{m}/{m}_height.png", "oak/pine_height.png", None),
    ("**/{m}_{kind}.png", "w/oak_big_height.png", {"m": "oak", "kind": "big_height"}),
    ("tile_[0-9]?.png", "tile_3a.png", {}),
    ("tile_[!0-9]?.png", "tile_3a.png", None),
    ("a+b.png", "a+b.png", {}),
])
def test_patterns(pattern, path, fields):
    assert compile_pattern(pattern, "t").match(path) == fields


@pytest.mark.parametrize("pattern,message", [
    ("/abs/*.png", "must be relative"),
    ("a/../*.png", "'..'"),
    ("a**/x.png", "whole folder part"),
    ("{dir}/x.png", "reserved"),
    ("x[.png", "unclosed"),
    ("", "expected a file pattern"),
])
def test_bad_patterns(pattern, message):
    with pytest.raises(BakeryError, match=message):
        compile_pattern(pattern, "r.toml: rule 'a': key 'match'")


def test_template_rendering_drops_empty_folders():
    t = compile_template("{dir}/{stem}_n.{ext}", ("dir", "stem", "ext"), "t")
    assert t.render({"dir": "", "stem": "a", "ext": "png"}) == "a_n.png"
    assert t.render({"dir": "w/o", "stem": "a", "ext": "png"}) == "w/o/a_n.png"


@pytest.mark.parametrize("template,message", [
    ("../x.png", "'..'"),
    ("a/../../x.png", "'..'"),
    ("/tmp/x.png", "absolute paths are refused"),
    ("C:/x.png", "absolute paths are refused"),
    ("a\\x.png", "relative path"),
    ("{nope}.png", r"unknown field \{nope\}"),
    ("{stem.__class__}.png", "stray brace"),
    ("{stem:>9}.png", "stray brace"),
])
def test_unsafe_or_bad_templates_are_refused(template, message):
    with pytest.raises(BakeryError, match=message):
        compile_template(template, ("stem",), "r.toml: rule 'a': key 'output'")


def _recipe(tmp_path, text):
    (tmp_path / "lib").mkdir(exist_ok=True)
    p = tmp_path / "r.toml"
    p.write_text(text, encoding="utf-8")
    return p


@pytest.mark.parametrize("change,message", [
    (("gain = 0.9", "gain = 'x'"), r"\[defaults.test-invert\]: gain must be a number"),
    (("[defaults.test-invert]", "[defaults.nope]"), r"\[defaults.nope\]: unknown bake 'nope'"),
    (('bake = "test-invert"', 'bake = "nope"'), r"rule 'inv': key 'bake': unknown bake 'nope'"),
    (('output = "{dir}/{m}_inv.png"', 'output = "../{m}_inv.png"'), r"rule 'inv': key 'output': .*'\.\.'"),
    (('output = "{dir}/{m}_inv.png"', 'output = "/tmp/{m}.png"'), r"rule 'inv': key 'output': .*absolute"),
    (('output = "{dir}/{m}_inv.png"', 'output = "{d}/{m}.png"'), r"rule 'inv': key 'output': unknown field \{d\}"),
    (("params = { weight = 0.25 }", "params = { wieght = 0.25 }"),
     r"rule 'mix': params: bake 'test-mix' has no parameter 'wieght'; it takes: weight"),
    (('inputs.detail = "{dir}/{m}_detail.png"', ""), r"rule 'mix': bake 'test-mix' needs input 'detail'"),
    (('inputs.detail = "{dir}/{m}_detail.png"', 'inputs.texture = "x.png"'),
     r"rule 'mix': key 'inputs.texture': bake 'test-mix' has no input 'texture'"),
    (('name = "mix"', 'name = "inv"'), r"rule 'inv': another rule has the name 'inv'"),
    (('name = "mix"', 'name = "mix"\ncolour = 1'), r"rule 'mix': unknown key 'colour'"),
    (('output = "out"', 'output = "lib/out"'), r"key 'output': the output root .* must not contain each other"),
    (('source = "lib"', 'source = "nowhere"'), r"key 'source': folder .*nowhere does not exist"),
    (('source = "lib"', 'sources = "lib"'), r"unknown key 'sources'"),
    (('name = "inv"', 'name = "inv"\nunpaired = "maybe"'), r"key 'unpaired': expected \"skip\" or \"fail\""),
    (("gain = 0.9", "gain = 0.9\n[[rule"), r"TOML syntax error: .*line 6"),
    (('match = "**/{m}_height.png"\noutput = "{dir}/{m}_inv.png"', 'output = "{dir}/{m}_inv.png"'),
     r"rule 'inv': missing key 'match' \(the pattern of the files for input 'source'\)"),
])
def test_validation_names_file_key_and_expectation(tmp_path, change, message):
    p = _recipe(tmp_path, RECIPE.replace(*change))
    with pytest.raises(BakeryError, match=message) as info:
        load_recipe(p)
    assert str(info.value).startswith(str(p))


def test_output_root_that_is_a_file(tmp_path):
    p = _recipe(tmp_path, RECIPE)
    (tmp_path / "out").write_text("x")
    with pytest.raises(BakeryError, match=r"key 'output': .*out is a file; the output root must be a folder"):
        load_recipe(p)


def test_no_rules(tmp_path):
    with pytest.raises(BakeryError, match=r"no rules; add at least one \[\[rule\]\]"):
        load_recipe(_recipe(tmp_path, 'source = "lib"\noutput = "out"\n'))


def test_missing_recipe(tmp_path):
    with pytest.raises(BakeryError, match="nope.toml: file not found"):
        load_recipe(tmp_path / "nope.toml")


def test_good_recipe(tmp_path):
    r = load_recipe(_recipe(tmp_path, RECIPE))
    assert [rule.name for rule in r.rules] == ["inv", "mix"]
    assert r.source == (tmp_path / "lib").resolve() and r.output == (tmp_path / "out").resolve()
    assert r.defaults == {"test-invert": {"gain": 0.9}}
