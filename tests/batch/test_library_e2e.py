"""End to end on the sample library (bakery.samples.library + samples/library.toml) with the real bakes and
chained rules: the batch writes exactly the planned files, byte-identical to the same commands run by hand in
the plan's order; a changed source re-runs exactly the jobs downstream of it."""

from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
from pathlib import Path

from typer.testing import CliRunner

from bakery.batch import run
from bakery.cli import app
from bakery.io import write_image
from bakery.samples import library
from tests.batch.conftest import outputs

ROOT = Path(__file__).resolve().parents[2]


COMMANDS = {"normal": ["normal"], "normal-mips": ["normal-mips"],
            "roughness": ["roughness"], "blend": ["blend"], "antialias": ["antialias"],
            "env-convert": ["env", "convert"], "env-diffuse": ["env", "diffuse"], "env-specular": ["env", "specular"],
            "env-lut": ["env", "lut"], "occlusion": ["occlusion"], "pack": ["pack"]}


def _cli_args(job, src: Path, out: Path) -> list[str]:
    """The command line that makes the same output as one batch job of samples/library.toml: the job's
    parameters, each as the option of the same name (one declaration per parameter); an input made by another
    job is that job's file in ``out`` (the commands run in the plan's order)."""
    from bakery.bakes import get_bake
    from bakery.bakes.params import specs

    bake = get_bake(job.bake)

    def where(role: str) -> str:
        v = job.inputs[role]
        return str((out if v.get("made_by") else src) / v["path"])

    args = list(COMMANDS[job.bake])
    args += [where(r) for r in bake.required_inputs]
    if bake.required_inputs:
        args += [where(r) for r in bake.optional_inputs if r in job.inputs]
    else:  # a bake with only optional inputs takes each as the option of its role (bakery pack --r FILE)
        args += [a for r in bake.optional_inputs if r in job.inputs for a in (f"--{r}", where(r))]
    args += ["-o", str(out / job.output)]
    for spec in specs(bake.params):
        v = job.params[spec.name]
        if v == spec.default or (v is None and spec.default is None):
            continue
        if isinstance(v, bool):
            args.append(f"--{spec.option}" if v else f"--no-{spec.option}")
        elif isinstance(v, list):
            args += [f"--{spec.option}", ",".join(map(str, v))]
        else:
            args += [f"--{spec.option}", str(v)]
    return args


def test_sample_library_batch_equals_the_cli(tmp_path):
    shutil.copy(ROOT / "samples" / "library.toml", tmp_path / "library.toml")
    library(tmp_path / "library", size=64, sky_width=64)
    shutil.copy(ROOT / "samples" / "library" / "stone" / "bakery-folder.toml", tmp_path / "library" / "stone")
    recipe = tmp_path / "library.toml"
    plan = run(recipe, dry_run=True)
    n = len(plan.jobs)
    assert n >= 12 and (plan.planned, plan.skipped, plan.failed) == (n, 0, 0)
    # the installed way: python -m bakery batch (workers are spawned processes)
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    r = subprocess.run([sys.executable, "-m", "bakery", "batch", str(recipe), "--jobs", "2"], env=env,
                       capture_output=True, text=True, timeout=300)
    assert r.returncode == 0, r.stdout + r.stderr
    assert f"batch: {n} ran, 0 skipped, 0 failed" in r.stdout
    baked = tmp_path / "library-baked"
    got = outputs(baked)
    report = json.loads((baked / ".bakery" / "report.json").read_text())
    # exactly the planned files, known before anything ran: each job's output, manifest, mip levels, side files
    written = set()
    for job in report["jobs"]:
        written |= set(job["outputs"])
    assert written == set(got)
    assert {f for job in plan.jobs for f in job.files} == set(got)
    for job in plan.jobs:
        assert job.output + ".bakery.json" in job.files
    # a clean library is clean: no finding in the batch report, none from inspect over the whole output
    assert [f for job in report["jobs"] for f in job["findings"]] == []
    res = CliRunner().invoke(app, ["inspect", "-r", str(baked), "--json"])
    assert res.exit_code == 0, res.output
    maps = json.loads(res.output)
    assert len(maps) >= 100 and [f for m in maps for f in m["findings"]] == []
    chained = [j for j in plan.jobs if any(v.get("made_by") for v in j.inputs.values())]
    assert {j.rule for j in chained} == {"normal-chains", "roughness-chains", "orm"} and len(chained) == 27
    ktx = next(j for j in plan.jobs if j.output == "stone/cobble_normal.ktx2")
    assert ktx.files == ["stone/cobble_normal.ktx2", "stone/cobble_normal.ktx2.bakery.json",
                         "stone/cobble_normal.length.ktx2"]
    aa = next(j for j in plan.jobs if j.output == "stone/cobble_roughness_aa.png")
    assert len([f for f in aa.files if ".mip" in f]) == 6  # 64² -> 1²: levels 1-6 beside level 0
    # byte-identical to the commands run by hand, in the plan's order (every job after those it needs)
    cli_out = tmp_path / "cli"
    runner = CliRunner()
    for job in plan.jobs:
        (cli_out / job.output).parent.mkdir(parents=True, exist_ok=True)
        res = runner.invoke(app, _cli_args(job, tmp_path / "library", cli_out))
        assert res.exit_code == 0, res.output
    assert outputs(cli_out) == got

    # no change: nothing runs; touch one source: only its jobs run
    assert run(recipe, jobs=1).skipped == n
    # finding that nothing changed (KTX2 outputs, cubes, tables included) by the installed command's entry point
    # loads no array library, nor the validation library that the option parser loads for typed options
    code = ("import sys\nfrom bakery.cli import main\ntry:\n    main(['batch', sys.argv[1]])\nexcept SystemExit as e:\n"
            "    print('EXIT', e.code)\n"
            "print('HEAVY', [m for m in ('numpy', 'cv2', 'scipy', 'pydantic') if m in sys.modules])\n")
    r = subprocess.run([sys.executable, "-c", code, str(recipe)], env=env, capture_output=True, text=True,
                       timeout=120)
    assert "EXIT 0" in r.stdout and "HEAVY []" in r.stdout and f"{n} job(s) up to date" in r.stderr, r.stdout + r.stderr
    src = tmp_path / "library" / "stone" / "cobble_height.png"
    from bakery.io import read_image

    write_image(src, 1.0 - read_image(src).pixels, bits="16")
    rep = run(recipe, jobs=2)
    assert sorted(j.output for j in rep.jobs if j.status == "ran") == sorted([
        "stone/cobble_normal.png", "stone/cobble_normal.ktx2", "stone/cobble_roughness_aa.png",
        "stone/cobble_occlusion.png", "stone/cobble_orm.png"])
    reasons = {j.output: j.reason for j in rep.jobs if j.status == "ran"}
    for out in ("stone/cobble_normal.ktx2", "stone/cobble_roughness_aa.png"):
        assert reasons[out] == "normal input @normals/stone/cobble_normal.png changed upstream"
    assert reasons["stone/cobble_occlusion.png"] == "height input stone/cobble_height.png changed"
    assert "changed upstream" in reasons["stone/cobble_orm.png"]
    # the skipped jobs keep the findings of their last run: the report describes the whole library
    assert sum(len(j.findings) for j in rep.jobs) == sum(len(j["findings"]) for j in report["jobs"])
    # change one rule parameter: only that rule's jobs
    recipe.write_text(recipe.read_text().replace("detail-strength = 0.5", "detail-strength = 0.75"))
    rep = run(recipe, jobs=1)
    assert {j.rule for j in rep.jobs if j.status == "ran"} == {"crackle"} and rep.ran == 3
    assert run(recipe, jobs=1, dry_run=True).planned == 0
