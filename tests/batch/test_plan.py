"""Planning: pairing, parameter precedence, output safety, --only, and decisions against the cache."""

from __future__ import annotations

import os

import pytest

from bakery.batch import run
from bakery.batch.plan import make_plan
from bakery.batch.recipe import load_recipe
from bakery.errors import BakeryError


def _plan(recipe, **kw):
    return make_plan(load_recipe(recipe), **kw)


def test_jobs_and_pairing(library):
    plan = _plan(library)
    got = [(j.rule, j.inputs, j.output, j.action) for j in plan.jobs]
    assert got == [
        ("inv", {"source": "metal/metal_height.png"}, "metal/metal_inv.png", "run"),
        ("inv", {"source": "stone/stone_height.png"}, "stone/stone_inv.png", "run"),
        ("inv", {"source": "wood/oak/oak_height.png"}, "wood/oak/oak_inv.png", "run"),
        ("inv", {"source": "wood/pine/pine_height.png"}, "wood/pine/pine_inv.png", "run"),
        ("mix", {"base": "metal/metal_height.png"}, "metal/metal_mix.png", "skip"),
        ("mix", {"base": "stone/stone_height.png", "detail": "stone/stone_detail.png"}, "stone/stone_mix.png",
         "run"),
        ("mix", {"base": "wood/oak/oak_height.png", "detail": "wood/oak/oak_detail.png"}, "wood/oak/oak_mix.png",
         "run"),
        ("mix", {"base": "wood/pine/pine_height.png", "detail": "wood/pine/pine_detail.png"},
         "wood/pine/pine_mix.png", "run"),
    ]
    assert plan.jobs[4].reason == "no detail input metal/metal_detail.png"
    assert all(j.key.startswith("sha256:") for j in plan.jobs if j.action == "run")


def test_unpaired_fail(library):
    library.write_text(library.read_text().replace('name = "mix"', 'name = "mix"\nunpaired = "fail"'))
    rep = run(library, dry_run=True)
    assert rep.failed == 1 and rep.exit_code == 1
    assert rep.jobs[4].error == "no detail input metal/metal_detail.png"
    from typer.testing import CliRunner

    from bakery.cli import app

    r = CliRunner().invoke(app, ["batch", str(library), "--dry-run"])
    assert r.exit_code == 1 and "FAIL  mix: metal/metal_height.png -> metal/metal_mix.png  (no detail" in r.output


def test_parameter_precedence(library):
    lib = library.parent / "lib"
    (lib / "bakery-folder.toml").write_text("[bake.test-invert]\ngain = 0.5\n")
    (lib / "wood" / "bakery-folder.toml").write_text("[bake.test-invert]\ngain = 0.4\n[rule.inv]\ngain = 0.3\n"
                                                    "[rule.mix]\nweight = 0.75\n")
    (lib / "wood" / "oak" / "bakery-folder.toml").write_text("[bake.test-invert]\ngain = 0.2\n")
    plan = _plan(library)
    by_out = {j.output: j for j in plan.jobs}
    # recipe defaults < rule < folder files from the root down, [bake.*] then [rule.*] in each folder
    assert by_out["stone/stone_inv.png"].params["gain"] == 0.5
    assert by_out["stone/stone_inv.png"].origins == {"gain": "lib/bakery-folder.toml"}
    assert by_out["wood/pine/pine_inv.png"].params["gain"] == 0.3
    assert by_out["wood/oak/oak_inv.png"].params["gain"] == 0.2
    assert by_out["wood/oak/oak_mix.png"].params == {"weight": 0.75}
    assert by_out["stone/stone_mix.png"].params == {"weight": 0.25}
    assert by_out["stone/stone_mix.png"].origins == {"weight": "rule 'mix'"}
    # a folder file is never a source, and its own mistakes name it
    assert all("bakery-folder" not in rel for j in plan.jobs for rel in j.inputs.values())
    (lib / "wood" / "bakery-folder.toml").write_text("[rule.inv]\ngain = 'high'\n")
    with pytest.raises(BakeryError, match=r"lib/wood/bakery-folder.toml: \[rule.inv\]: gain must be a number"):
        _plan(library)
    (lib / "wood" / "bakery-folder.toml").write_text("[rule.nope]\ngain = 1\n")
    with pytest.raises(BakeryError, match=r"\[rule.nope\]: the recipe has no rule 'nope'; its rules are: inv, mix"):
        _plan(library)
    (lib / "wood" / "bakery-folder.toml").write_text("gain = 1\n")
    with pytest.raises(BakeryError, match=r"bakery-folder.toml: unknown key 'gain'"):
        _plan(library)


def test_two_jobs_on_one_output_are_refused(library):
    library.write_text(library.read_text().replace('output = "{dir}/{m}_mix.png"', 'output = "{dir}/{m}_inv.png"'))
    with pytest.raises(BakeryError, match=r"two jobs write metal/metal_inv.png: rule 'inv' from "
                                          r"metal/metal_height.png and rule 'mix'"):
        _plan(library)


def test_link_leading_out_of_the_output_root_is_refused_before_any_job(library, tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    os.symlink(elsewhere, out / "wood")
    with pytest.raises(BakeryError, match=r"rule 'inv': key 'output': 'wood/oak/oak_inv.png' leads outside the "
                                          "output root"):
        run(library, jobs=1)
    assert list(elsewhere.iterdir()) == []
    assert not any(p.suffix == ".png" for p in out.rglob("*"))


def test_output_into_the_state_folder_is_refused(library, tmp_path):
    library.write_text(library.read_text().replace('output = "{dir}/{m}_inv.png"', 'output = ".bakery/{m}.png"'))
    with pytest.raises(BakeryError, match=r"inside the output root's .bakery folder"):
        run(library)
    assert not (tmp_path / "out").exists()  # a refused run leaves nothing behind, not even its lock


@pytest.mark.parametrize("only,outputs", [
    (("inv",), 4),
    (("wood/**",), 4),
    (("stone_height.png",), 2),
    (("**/*_mix.png", "metal/*"), 5),
])
def test_only(library, only, outputs):
    plan = _plan(library, only=only)
    assert len(plan.jobs) == outputs and plan.unselected == 8 - outputs


def test_a_bake_without_inputs_makes_one_job(library):
    library.write_text(library.read_text() + '\n[[rule]]\nname = "ramp"\nbake = "test-ramp"\n'
                       'output = "tables/{rule}.png"\nparams = { size = 4 }\n')
    rep = run(library, jobs=1)
    ramp = [j for j in rep.jobs if j.rule == "ramp"]
    assert [(j.output, j.inputs, j.status, j.params) for j in ramp] == [("tables/ramp.png", {}, "ran", {"size": 4})]
    assert run(library, dry_run=True).planned == 0
    library.write_text(library.read_text().replace("size = 4", "size = 5"))
    assert [j.output for j in run(library, dry_run=True).jobs if j.status == "planned"] == ["tables/ramp.png"]
    library.write_text(library.read_text().replace('bake = "test-ramp"', 'bake = "test-ramp"\nmatch = "*.png"'))
    with pytest.raises(BakeryError, match=r"rule 'ramp': key 'match': bake 'test-ramp' reads no input files"):
        load_recipe(library)


def test_an_unreadable_input_fails_its_jobs_alone(library, monkeypatch):
    import bakery.io.manifest as manifest

    real = manifest.file_digest

    def digest(path, **kw):
        if str(path).endswith("stone_height.png"):
            raise PermissionError(13, "Permission denied")
        return real(path, **kw)

    monkeypatch.setattr(manifest, "file_digest", digest)
    rep = run(library, dry_run=True)
    failed = {j.output: j.error for j in rep.jobs if j.status == "failed"}
    assert failed == {o: f"{library.parent / 'lib' / 'stone' / 'stone_height.png'}: cannot read the file "
                         "(Permission denied)" for o in ("stone/stone_inv.png", "stone/stone_mix.png")}
    assert rep.planned == 5 and rep.exit_code == 1


def test_a_damaged_cache_means_a_cold_start(library, tmp_path):
    state = tmp_path / "out" / ".bakery"
    state.mkdir(parents=True)
    (state / "cache.json").write_text('{"format": 1, "jobs": {"stone/stone_inv.png": 3}, "sources": []}')
    (state / "journal.jsonl").write_text('7\n{"output": "metal/metal_inv.png", "entry": "x"}\n{"outp')
    rep = run(library, jobs=1)
    assert (rep.ran, rep.skipped, rep.failed) == (7, 1, 0)
    assert rep.notes[0].startswith("the previous run was cut off")
    assert run(library, jobs=1, dry_run=True).planned == 0
