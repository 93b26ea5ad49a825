"""End to end on the sample library (bakery.samples.library + samples/library.toml) with the real bakes:
the batch writes exactly the planned files, byte-identical to the same bakes run one by one from the CLI."""

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


def _cli_args(job, src: Path, out: Path) -> list[str]:
    """The command line that makes the same output as one batch job of samples/library.toml."""
    i = {role: str(src / v["path"]) for role, v in job.inputs.items()}
    o = str(out / job.output)
    p = job.params
    if job.bake == "normal":
        return ["normal", i["height"], "-o", o, "--strength", str(p["strength"]), "--kernel", p["kernel"]]
    if job.bake == "roughness":
        bits = {"u8": "8", "u16": "16", "f16": "half", "f32": "float"}[p["depth"]]
        return ["roughness", i["map"], "-o", o, "--bits", bits]
    if job.bake == "blend":
        return ["blend", i["base"], i["detail"], "-o", o, "--detail-strength", str(p["detail_strength"])]
    if job.bake == "antialias":
        if "roughness" in i:
            return ["antialias", i["normal"], i["roughness"], "-o", o]
        return ["antialias", i["normal"], "-o", o, "--roughness", str(p["roughness"])]
    if job.bake == "env-convert":
        return ["env", "convert", i["source"], "-o", o, "--size", str(p["size"])]
    if job.bake == "env-diffuse":
        return ["env", "diffuse", i["source"], "-o", o, "--size", str(p["size"]), "--method", p["method"]]
    if job.bake == "env-specular":
        return ["env", "specular", i["env"], "-o", o, "--size", str(p["size"])]
    if job.bake == "env-lut":
        return ["env", "lut", "-o", o, "--size", str(p["size"])]
    raise AssertionError(f"no command line for {job.bake}")


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
    # exactly the planned files: each job's output (or, for mip chains, its NAME.mipNN levels) and manifest
    written = set()
    for job in report["jobs"]:
        written |= set(job["outputs"])
    assert written == set(got)
    for job in plan.jobs:
        stem = job.output.rsplit(".", 1)[0]
        assert job.output + ".json" in got
        assert job.output in got or any(k.startswith(stem + ".mip") for k in got)
    # byte-identical to the bakes run one by one from the command line
    cli_out = tmp_path / "cli"
    runner = CliRunner()
    for job in plan.jobs:
        (cli_out / job.output).parent.mkdir(parents=True, exist_ok=True)
        res = runner.invoke(app, _cli_args(job, tmp_path / "library", cli_out))
        assert res.exit_code == 0, res.output
    assert outputs(cli_out) == got

    # no change: nothing runs; touch one source: only its jobs run
    assert run(recipe, jobs=1).skipped == n
    src = tmp_path / "library" / "stone" / "cobble_height.png"
    from bakery.io import read_image

    write_image(src, 1.0 - read_image(src).pixels, depth="u16")
    rep = run(recipe, jobs=1)
    assert [j.output for j in rep.jobs if j.status == "ran"] == ["stone/cobble_normal.png"]
    # change one rule parameter: only that rule's jobs
    recipe.write_text(recipe.read_text().replace("detail-strength = 0.5", "detail-strength = 0.75"))
    rep = run(recipe, jobs=1)
    assert {j.rule for j in rep.jobs if j.status == "ran"} == {"crackle"} and rep.ran == 3
    assert run(recipe, jobs=1, dry_run=True).planned == 0
