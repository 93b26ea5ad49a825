"""Chained rules: the plan is a graph of jobs; refusals before any job runs; failures, --only, stale outputs,
findings of skipped jobs and forwarded progress."""

from __future__ import annotations

import json
import os
from pathlib import Path

import numpy as np
import pytest

from bakery.batch import run
from bakery.batch.plan import make_plan
from bakery.batch.recipe import load_recipe
from bakery.errors import BakeryError
from bakery.io import read_image, write_image
from tests.batch.conftest import RECIPE

#: inv (sources) -> twice (@inv) -> mixed (@twice + a partner from @inv): three chained steps.
CHAIN = RECIPE + '''
[[rule]]
name = "twice"
bake = "test-invert"
match = "@inv"
output = "{dir}/{stem}_twice.png"

[[rule]]
name = "mixed"
bake = "test-mix"
match = "@twice/**/{m}_inv_twice.png"
inputs.detail = "@inv/{dir}/{m}_inv.png"
output = "{dir}/{m}_mixed.png"
'''


@pytest.fixture
def chain(library: Path) -> Path:
    library.write_text(CHAIN, encoding="utf-8")
    return library


def _ran(rep) -> list[str]:
    return sorted(j.output for j in rep.jobs if j.status == "ran")


def test_plan_is_a_graph_and_a_changed_source_reruns_exactly_its_downstream(chain, tmp_path):
    plan = make_plan(load_recipe(chain))
    order = [j.output for j in plan.jobs]
    for job in plan.jobs:  # every job after the jobs that make its inputs
        assert all(order.index(up) < order.index(job.output) for up in job.upstream.values())
    mixed = next(j for j in plan.jobs if j.output == "stone/stone_mixed.png")
    assert mixed.inputs == {"base": "stone/stone_inv_twice.png", "detail": "stone/stone_inv.png"}
    assert mixed.upstream == {"base": "stone/stone_inv_twice.png", "detail": "stone/stone_inv.png"}
    assert [j.shown(r) for r, j in (("base", mixed), ("detail", mixed))] == [
        "@twice/stone/stone_inv_twice.png", "@inv/stone/stone_inv.png"]
    assert mixed.digests["base"] == "job:" + next(j.key for j in plan.jobs if j.output == "stone/stone_inv_twice.png")

    rep = run(chain, jobs=2)
    assert (rep.ran, rep.failed) == (15, 0)
    out, lib = tmp_path / "out", tmp_path / "lib"
    # byte-identical to the same bakes run by hand in order: twice = 0.9 (1 - 0.9 (1 - h)); mixed = its mix
    h = read_image(lib / "stone/stone_height.png").pixels
    inv = read_image(out / "stone/stone_inv.png").pixels
    twice = read_image(out / "stone/stone_inv_twice.png").pixels
    # 16-bit outputs: within half a step (7.6e-6) of the exact value, plus float32 rounding
    assert np.abs(twice - 0.9 * (1 - inv.astype(np.float64))).max() < 8e-6
    assert np.abs(inv - 0.9 * (1 - h.astype(np.float64))).max() < 8e-6
    assert np.abs(read_image(out / "stone/stone_mixed.png").pixels - (0.5 * twice + 0.5 * inv)).max() < 2e-5
    assert run(chain, jobs=2).ran == 0

    write_image(lib / "stone/stone_height.png", np.full((16, 16), 0.25, np.float32), bits="16")
    rep = run(chain, jobs=2)
    assert _ran(rep) == ["stone/stone_inv.png", "stone/stone_inv_twice.png", "stone/stone_mix.png",
                         "stone/stone_mixed.png"]
    assert {j.output: j.reason for j in rep.jobs if j.status == "ran"}["stone/stone_mixed.png"] == (
        "base input @twice/stone/stone_inv_twice.png changed upstream; detail input @inv/stone/stone_inv.png "
        "changed upstream")
    # an upstream output deleted: its job runs again, the same key makes the same bytes, downstream stays
    (out / "wood/oak/oak_inv.png").unlink()
    assert _ran(run(chain, jobs=1)) == ["wood/oak/oak_inv.png"]


def test_dry_run_shows_the_graph(chain):
    from typer.testing import CliRunner

    from bakery.cli import app

    r = CliRunner().invoke(app, ["batch", str(chain), "--dry-run"])
    assert r.exit_code == 0, r.output
    assert ("run   mixed: base=@twice/stone/stone_inv_twice.png + detail=@inv/stone/stone_inv.png -> "
            "stone/stone_mixed.png  (new output)") in r.output
    assert "      after: stone/stone_inv.png, stone/stone_inv_twice.png" in r.output
    assert "      also writes: stone/stone_mixed.png.bakery.json" in r.output
    assert "plan: 15 to run, 1 skipped, 0 failing (16 jobs)" in r.output


@pytest.mark.parametrize("change,message", [
    # a cycle: twice reads mixed, mixed reads twice
    (('match = "@inv"', 'match = "@mixed"'), r"rule 'twice': the rules form a cycle: twice -> mixed -> twice"),
    (('match = "@inv"', 'match = "@twice"'), r"rule 'twice': key 'match': the rule reads its own outputs"),
    (('match = "@inv"', 'match = "@nope"'), r"key 'match': no rule is named 'nope'; the rules are: inv, mix, "),
    # a rule consuming an upstream output that is never made: rule and file named
    (('"@inv/{dir}/{m}_inv.png"', '"@inv/{dir}/{m}_other.png"'),
     r"rule 'mixed': key 'inputs.detail': rule 'inv' writes no file metal/metal_other.png, which the job for "
     r"metal/metal_inv_twice.png needs"),
    (('"@inv/{dir}/{m}_inv.png"', '"@twice/{dir}/{m}_inv.png"'),
     r"rule 'twice' writes no file metal/metal_inv.png \(job metal/metal_inv.png of rule 'inv' writes it\)"),
    # two writers of one file: a chained rule writing its upstream's file
    (('output = "{dir}/{stem}_twice.png"', 'output = "{dir}/{stem}.png"'),
     r"two jobs write metal/metal_inv.png: rule 'inv' from metal/metal_height.png and rule 'twice' from "
     r"@inv/metal/metal_inv.png"),
    # ... or another job's manifest
    (('output = "{dir}/{stem}_twice.png"', 'output = "{dir}/{stem}.png.bakery.json"'),
     r"two jobs write metal/metal_inv.png.bakery.json: rule 'inv' from metal/metal_height.png \(beside its "
     r"output metal/metal_inv.png\) and rule 'twice'"),
])
def test_refused_before_any_job_runs(chain, tmp_path, change, message):
    chain.write_text(chain.read_text().replace(*change), encoding="utf-8")
    with pytest.raises(BakeryError, match=message):
        run(chain, jobs=1)
    assert not (tmp_path / "out").exists()


def test_a_side_output_of_one_job_on_another_jobs_output_is_refused(tmp_path):
    """env-diffuse writing sky.json also writes sky.ktx2 (its cubemap): an env-specular job writing sky.ktx2
    is a second writer of that file."""
    (tmp_path / "lib").mkdir()
    write_image(tmp_path / "lib" / "sky.hdr", np.ones((16, 32, 3), np.float32))
    recipe = tmp_path / "r.toml"
    recipe.write_text('source = "lib"\noutput = "out"\n\n[[rule]]\nname = "diffuse"\nbake = "env-diffuse"\n'
                      'match = "{s}.hdr"\noutput = "{s}.json"\n\n[[rule]]\nname = "specular"\nbake = "env-specular"\n'
                      'match = "{s}.hdr"\noutput = "{s}.ktx2"\n', encoding="utf-8")
    with pytest.raises(BakeryError, match=r"two jobs write sky.ktx2: rule 'diffuse' from sky.hdr \(beside its "
                                          r"output sky.json\) and rule 'specular' from sky.hdr; make the output"):
        run(recipe, jobs=1)
    assert not (tmp_path / "out").exists()


def test_a_failed_job_fails_its_dependents_and_independent_branches_run(chain, tmp_path):
    bad = tmp_path / "lib" / "stone" / "stone_height.png"
    bad.write_bytes(bad.read_bytes()[:200])
    rep = run(chain, jobs=2)
    failed = {j.output: j.error for j in rep.jobs if j.status == "failed"}
    assert set(failed) == {"stone/stone_inv.png", "stone/stone_mix.png", "stone/stone_inv_twice.png",
                           "stone/stone_mixed.png"}
    assert "PNG file is truncated" in failed["stone/stone_inv.png"]
    cause = "stone/stone_inv.png: " + failed["stone/stone_inv.png"]
    for dependent in ("stone/stone_inv_twice.png", "stone/stone_mixed.png"):  # the root cause, named
        assert failed[dependent] == f"not run: an input comes from a job that failed ({cause})"
    assert (rep.ran, rep.exit_code) == (11, 1)  # every other branch ran
    assert not (tmp_path / "out" / "stone" / "stone_inv_twice.png").exists()
    # fixed: the failed jobs and their dependents run, nothing else
    write_image(bad, np.full((16, 16), 0.5, np.float32), bits="16")
    assert _ran(run(chain, jobs=2)) == sorted(failed)


def test_only_pulls_in_what_the_chosen_jobs_need(chain):
    plan = make_plan(load_recipe(chain), only=("stone/stone_mixed.png",))
    assert [j.output for j in plan.jobs] == ["stone/stone_inv.png", "stone/stone_inv_twice.png",
                                             "stone/stone_mixed.png"]
    assert plan.unselected == 13


def test_stale_outputs_are_listed_and_removed_only_when_asked(chain, tmp_path):
    run(chain, jobs=2)
    out = tmp_path / "out"
    (out / "keep.txt").write_text("mine")  # not bakery's: never stale, never removed
    text = chain.read_text()
    chain.write_text(text[:text.index('[[rule]]\nname = "mixed"')], encoding="utf-8")  # drop rule "mixed"
    rep = run(chain, jobs=1)
    stale = [f"{m}/{Path(m).name}_mixed.png{x}" for m in ("metal", "stone", "wood/oak", "wood/pine")
             for x in ("", ".bakery.json")]
    assert rep.stale == sorted(stale) and rep.ran == 0
    assert any("made by no rule now and were left in place" in n for n in rep.notes)
    assert all((out / f).exists() for f in stale)
    assert json.loads((out / ".bakery" / "report.json").read_text())["stale"] == sorted(stale)
    assert run(chain, dry_run=True).stale == sorted(stale)  # still known to the next run
    # edited since bakery wrote it: kept even with --remove-stale
    (out / "stone/stone_mixed.png").write_bytes(b"edited by hand")
    rep = run(chain, jobs=1, remove_stale=True)
    assert rep.removed == sorted(s for s in stale if s != "stone/stone_mixed.png")
    assert rep.stale == ["stone/stone_mixed.png"]
    assert [p.relative_to(out).as_posix() for p in out.rglob("*mixed*")] == ["stone/stone_mixed.png"]
    assert (out / "keep.txt").read_text() == "mine"
    assert any("changed since bakery wrote them and were kept" in n for n in rep.notes)
    assert run(chain, jobs=1).removed == []


def test_files_a_job_no_longer_writes_are_stale(tmp_path):
    """A job that writes fewer files than before (fewer mip levels) leaves its old extra files stale."""
    (tmp_path / "lib").mkdir()
    write_image(tmp_path / "lib" / "a_height.png", np.random.default_rng(1).random((16, 16), dtype=np.float32),
                bits="16")
    recipe = tmp_path / "r.toml"
    body = ('source = "lib"\noutput = "out"\n\n[[rule]]\nname = "n"\nbake = "normal"\nmatch = "{m}_height.png"\n'
            'output = "{m}_normal.png"\n\n[[rule]]\nname = "chain"\nbake = "normal-mips"\nmatch = "@n"\n'
            'output = "{stem}_mips.png"\nparams = { levels = LEVELS, lengths = false }\n')
    recipe.write_text(body.replace("LEVELS", "5"), encoding="utf-8")
    rep = run(recipe, jobs=1)
    chain = next(j for j in rep.jobs if j.rule == "chain")
    assert chain.files == ["a_normal_mips.mip01.png", "a_normal_mips.mip02.png", "a_normal_mips.mip03.png",
                           "a_normal_mips.mip04.png", "a_normal_mips.png", "a_normal_mips.png.bakery.json"]
    assert sorted(chain.files) == chain.outputs  # named before the upstream normal map existed
    recipe.write_text(body.replace("LEVELS", "3"), encoding="utf-8")
    rep = run(recipe, jobs=1)
    assert rep.stale == ["a_normal_mips.mip03.png", "a_normal_mips.mip04.png"]
    assert run(recipe, jobs=1, remove_stale=True).removed == rep.stale
    assert not (tmp_path / "out" / "a_normal_mips.mip03.png").exists()


def test_skipped_jobs_keep_their_findings(library, tmp_path):
    (tmp_path / "lib" / "odd").mkdir()
    write_image(tmp_path / "lib" / "odd" / "odd_height.png",
                np.random.default_rng(5).random((24, 40), dtype=np.float32), bits="16")
    first = run(library, jobs=1)
    found = {j.output: j.findings for j in first.jobs if j.findings}
    assert "odd/odd_inv.png" in found
    again = run(library, jobs=1)
    assert again.ran == 0
    assert {j.output: j.findings for j in again.jobs if j.findings} == found


class _Recorder:
    def __init__(self):
        self.calls: dict[str, list[tuple[float, str]]] = {}

    def start(self, total, skipped, executor, workers):
        pass

    def update(self, job):
        pass

    def job_progress(self, job, fraction, label):
        self.calls.setdefault(job.output, []).append((fraction, label))

    def stop(self):
        pass


def test_workers_forward_bake_progress(library, tmp_path):
    (tmp_path / "lib" / "stone" / "bakery-folder.toml").write_text("[rule.inv]\ndelay = 0.5\n")
    rec = _Recorder()
    run(library, jobs=2, progress=rec)
    inv = [o for o in rec.calls if o.endswith("_inv.png")]
    assert sorted(inv) == ["metal/metal_inv.png", "stone/stone_inv.png", "wood/oak/oak_inv.png",
                           "wood/pine/pine_inv.png"]
    for output in inv:  # (the test-mix bake reports no progress of its own: only its start comes through)
        fractions = [f for f, _ in rec.calls[output]]
        assert fractions == sorted(fractions) and fractions[0] == 0.0 and fractions[-1] == 1.0
    # the slow job: its steps came through while it ran (at most one line every 0.2 s, always the end): the
    # step after the 0.5 s sleep always, the read only when it came 0.2 s after the start (a worker's first job
    # imports the image libraries; a busy machine)
    calls = rec.calls["stone/stone_inv.png"]
    assert calls in ([(0.0, "started"), (0.75, "inverted"), (1.0, "written")],
                     [(0.0, "started"), (0.25, "read"), (0.75, "inverted"), (1.0, "written")])


def test_plain_command_line_matches_the_option_parser(chain, tmp_path, capfd):
    from bakery.cli import run as cli

    assert cli(["batch", str(chain), "--only", "stone/stone_mixed.png", "-j1", "--no-inspect"]) == 0
    text = capfd.readouterr().err + capfd.readouterr().out
    assert sorted(p.relative_to(tmp_path / "out").as_posix() for p in (tmp_path / "out").rglob("*.png")) == [
        "stone/stone_inv.png", "stone/stone_inv_twice.png", "stone/stone_mixed.png"]
    assert cli(["batch", str(chain), "--dry-run", "--only", "stone/**"]) == 0
    out = capfd.readouterr().out
    assert "skip  mixed: base=@twice/stone/stone_inv_twice.png" in out
    assert "plan: 1 to run, 3 skipped, 0 failing (4 jobs)" in out
    # what the plain reader does not take on trust goes to the option parser, with its messages
    assert cli(["batch", str(chain), "--jobs", "0"]) == 2
    assert "error: --jobs:" in capfd.readouterr().err
    assert cli(["batch", str(chain), "--bogus"]) == 2
    assert "error: " in capfd.readouterr().err
    assert cli(["batch", "--help"]) == 0 and "--remove-stale" in capfd.readouterr().out
    assert text is not None and os.path.isdir(tmp_path / "out")


#: a plain pattern over another rule's outputs, written before that rule: the plan puts it after.
IMPLICIT = '''source = "lib"
output = "out"

[[rule]]
name = "twice"
bake = "test-invert"
match = "**/{m}_inv.png"
output = "{dir}/{m}_twice.png"
''' + RECIPE[RECIPE.index("[defaults"):]


def test_a_plain_pattern_takes_the_outputs_another_rule_plans(library, tmp_path):
    library.write_text(IMPLICIT, encoding="utf-8")
    plan = make_plan(load_recipe(library))
    order = [j.output for j in plan.jobs]
    twice = [j for j in plan.jobs if j.rule == "twice"]
    assert sorted(j.output for j in twice) == ["metal/metal_twice.png", "stone/stone_twice.png",
                                               "wood/oak/oak_twice.png", "wood/pine/pine_twice.png"]
    for job in twice:  # after the job that makes its input, which it reads from the output root
        (up,) = job.upstream.values()
        assert order.index(up) < order.index(job.output) and job.upstream_rules == {"source": "inv"}
    rep = run(library, jobs=2)
    assert rep.failed == 0 and rep.ran == len(plan.to_run) == 11  # metal has no detail map: one skipped
    out, lib = tmp_path / "out", tmp_path / "lib"
    h = read_image(lib / "stone/stone_height.png").pixels.astype(np.float64)
    # twice = 0.9 (1 - inv), inv = 0.9 (1 - h) (the recipe's default gain); 16-bit: half a step plus rounding
    assert np.abs(read_image(out / "stone/stone_twice.png").pixels - 0.9 * (1 - 0.9 * (1 - h))).max() < 2e-5
    assert run(library, jobs=1).ran == 0
    write_image(lib / "stone/stone_height.png", np.full((16, 16), 0.25, np.float32), bits="16")
    assert _ran(run(library, jobs=2)) == ["stone/stone_inv.png", "stone/stone_mix.png", "stone/stone_twice.png"]


def test_side_outputs_and_a_rules_own_outputs_never_match(tmp_path):
    (tmp_path / "lib").mkdir()
    write_image(tmp_path / "lib" / "a_height.png", np.random.default_rng(2).random((16, 16), dtype=np.float32),
                bits="16")
    recipe = tmp_path / "r.toml"
    recipe.write_text('source = "lib"\noutput = "out"\n\n'
                      '[[rule]]\nname = "level"\nbake = "test-invert"\nmatch = "{m}.mip01.png"\n'
                      'output = "{m}_level.png"\n\n'
                      '[[rule]]\nname = "chain"\nbake = "normal-mips"\nmatch = "{m}_normal.png"\n'
                      'output = "{m}_mips.png"\nparams = { levels = 3, lengths = false }\n\n'
                      '[[rule]]\nname = "n"\nbake = "normal"\nmatch = "{m}_height.png"\noutput = "{m}_normal.png"\n\n'
                      '[[rule]]\nname = "all"\nbake = "test-invert"\nmatch = "*.png"\noutput = "{stem}_all.png"\n'
                      'exclude = ["*_mips.png"]\n', encoding="utf-8")
    plan = make_plan(load_recipe(recipe))
    by_rule = {}
    for job in plan.jobs:
        by_rule.setdefault(job.rule, []).append(job.output)
    # the mip levels (side outputs) and manifests match nothing; "all" takes the source and the normal map,
    # never the files it writes itself
    assert by_rule == {"n": ["a_normal.png"], "chain": ["a_mips.png"],
                       "all": ["a_height_all.png", "a_normal_all.png"]}
    assert [j.output for j in plan.jobs].index("a_normal_all.png") > [j.output for j in plan.jobs].index(
        "a_normal.png")
    rep = run(recipe, jobs=1)
    assert (rep.ran, rep.failed) == (4, 0)


def test_a_cycle_made_by_patterns_is_refused_with_the_rules_named(library, tmp_path):
    rule = '[[rule]]\nname = "X"\nbake = "test-invert"\nmatch = "**/*.png"\noutput = "{dir}/{stem}_X.png"\n\n'
    library.write_text('source = "lib"\noutput = "out"\n\n' + rule.replace("X", "a") + rule.replace("X", "b"),
                       encoding="utf-8")
    with pytest.raises(BakeryError, match=r"the rules form a cycle: (a -> b -> a|b -> a -> b) \(each reads the "
                                          r"outputs of the next\); by pattern: '.' matches files '.' writes"):
        run(library, jobs=1)
    assert not (tmp_path / "out").exists()


#: resize (16² -> 32²) -> levels (one file per halving): the levels job is named from the 16² source before
#: the resize runs (4 levels), then again from the real 32² input (5 levels).
RESIZED = '''source = "lib"
output = "out"

[[rule]]
name = "resize"
bake = "test-resize"
match = "**/{m}_height.png"
output = "{dir}/{m}_big.png"

[[rule]]
name = "levels"
bake = "test-levels"
match = "@resize"
output = "{dir}/{stem}_lv.png"
'''

#: ... and a job that writes the fifth level's file, which the levels job learns of only when it starts.
TAKEN = RESIZED + '''
[[rule]]
name = "taken"
bake = "test-invert"
match = "stone/{m}_height.png"
output = "stone/{m}_big_lv.lv5.png"
'''


def test_files_named_from_a_stand_in_are_named_again_before_the_job_starts(library, tmp_path):
    library.write_text(RESIZED, encoding="utf-8")
    plan = make_plan(load_recipe(library))
    stone = next(j for j in plan.jobs if j.output == "stone/stone_big_lv.png")
    assert stone.assumed and [f for f in stone.files if ".lv" in f] == [
        f"stone/stone_big_lv.lv{k}.png" for k in range(1, 5)]
    rep = run(library, jobs=2)
    assert (rep.ran, rep.failed) == (8, 0)
    done = next(j for j in rep.jobs if j.output == "stone/stone_big_lv.png")
    assert [f for f in done.outputs if ".lv" in f] == [f"stone/stone_big_lv.lv{k}.png" for k in range(1, 6)]
    assert read_image(tmp_path / "out" / "stone/stone_big_lv.lv5.png").pixels.shape[:2] == (1, 1)
    # once run, the plan knows the real files (the cache): a job writing one of them is refused before any runs
    library.write_text(TAKEN, encoding="utf-8")
    with pytest.raises(BakeryError, match=r"two jobs write stone/stone_big_lv.lv5.png: rule 'levels' from "
                                          r"@resize/stone/stone_big.png \(beside its output stone/stone_big_lv.png\)"):
        run(library, jobs=1)


def test_a_file_of_another_job_known_only_when_the_job_starts_fails_that_job(library, tmp_path):
    library.write_text(TAKEN, encoding="utf-8")
    rep = run(library, jobs=2)
    failed = {j.output: j.error for j in rep.jobs if j.status == "failed"}
    assert failed == {"stone/stone_big_lv.png": (
        "would write stone/stone_big_lv.lv5.png, which the job for stone/stone_big_lv.lv5.png writes (its files "
        "follow the size of @resize/stone/stone_big.png, known only now)")}
    assert rep.ran == 8 and not (tmp_path / "out" / "stone" / "stone_big_lv.png").exists()
