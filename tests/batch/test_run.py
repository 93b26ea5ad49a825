"""Running batches: byte-identical to one-by-one bakes, incremental, isolated failures, lock, report, CLI."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from typer.testing import CliRunner

import bakery
from bakery.bakes import run_bake
from bakery.batch import run
from bakery.batch.cache import run_lock
from bakery.cli import app
from bakery.errors import BakeryError
from bakery.io import write_image
from tests.batch.bakes_for_tests import InvertParams, MixParams
from tests.batch.conftest import outputs

ROOT = Path(__file__).resolve().parents[2]


def test_batch_equals_one_by_one_and_is_incremental(library, tmp_path, monkeypatch):
    rep = run(library, jobs=2)
    assert (rep.ran, rep.skipped, rep.failed, rep.exit_code) == (7, 1, 0, 0)
    out = tmp_path / "out"
    got = outputs(out)
    # the plan's outputs (plus their manifests) are exactly the files written
    planned = {j.output for j in rep.jobs if j.status == "ran"}
    assert set(got) == planned | {p + ".bakery.json" for p in planned}
    # byte-identical to the same bakes called one at a time (what the command line calls)
    lib, ref = tmp_path / "lib", tmp_path / "ref"
    for job in rep.jobs:
        if job.status != "ran":
            continue
        (ref / job.output).parent.mkdir(parents=True, exist_ok=True)
        params = InvertParams(**job.params) if job.bake == "test-invert" else MixParams(**job.params)
        run_bake(job.bake, {r: lib / v["path"] for r, v in job.inputs.items()}, ref / job.output, params)
    assert outputs(ref) == got
    # the report: inputs with digests, outputs, params, timings; timings never in manifests
    data = json.loads((out / ".bakery" / "report.json").read_text())
    j0 = data["jobs"][1]
    assert j0["inputs"]["source"]["digest"].startswith("sha256:") and j0["seconds"] > 0
    assert j0["outputs"] == ["stone/stone_inv.png", "stone/stone_inv.png.bakery.json"]
    assert data["counts"] == {"ran": 7, "skipped": 1, "failed": 0, "planned": 0}
    assert "seconds" not in (out / "stone/stone_inv.png.bakery.json").read_text()

    # no change: nothing runs
    rep = run(library, jobs=1)
    assert (rep.ran, rep.skipped) == (0, 8)
    # same bytes rewritten (new mtime): re-hashed, still nothing runs
    src = lib / "stone/stone_height.png"
    src.write_bytes(src.read_bytes())
    os.utime(src, ns=(1, 1))
    assert run(library, jobs=1).ran == 0
    # touch one source: only its jobs run
    write_image(src, np.full((16, 16), 0.25, np.float32), bits="16")
    rep = run(library, jobs=1)
    ran = sorted(j.output for j in rep.jobs if j.status == "ran")
    assert ran == ["stone/stone_inv.png", "stone/stone_mix.png"]
    assert {j.reason for j in rep.jobs if j.status == "ran"} == {
        "source input stone/stone_height.png changed", "base input stone/stone_height.png changed"}
    # change one rule parameter: only that rule's jobs run
    library.write_text(library.read_text().replace("weight = 0.25", "weight = 0.5"))
    rep = run(library, jobs=1)
    assert sorted(j.output for j in rep.jobs if j.status == "ran") == [
        "stone/stone_mix.png", "wood/oak/oak_mix.png", "wood/pine/pine_mix.png"]
    assert {j.reason for j in rep.jobs if j.status == "ran"} == {"parameters changed: weight"}
    # a folder file: only that folder's jobs
    (lib / "wood" / "oak" / "bakery-folder.toml").write_text("[rule.inv]\ngain = 0.7\n")
    assert [j.output for j in run(library, jobs=1).jobs if j.status == "ran"] == ["wood/oak/oak_inv.png"]
    # an output deleted or edited by hand: that job runs again
    (out / "metal/metal_inv.png").unlink()
    (out / "stone/stone_inv.png").write_bytes(b"edited")
    rep = run(library, jobs=1)
    assert {j.output: j.reason for j in rep.jobs if j.status == "ran"} == {
        "metal/metal_inv.png": "output metal/metal_inv.png is missing",
        "stone/stone_inv.png": "output stone/stone_inv.png changed since bakery wrote it"}
    # a new bakery version: everything runs; --force too
    monkeypatch.setattr(bakery, "__version__", "99.0")
    rep = run(library, jobs=1, dry_run=True)
    assert rep.planned == 7 and "bakery version changed from 0.1.0" in rep.jobs[0].reason
    assert run(library, dry_run=True, force=True, only=["inv"]).planned == 4


def test_corrupt_input_fails_its_job_alone(library, tmp_path):
    bad = tmp_path / "lib" / "stone" / "stone_height.png"
    bad.write_bytes(bad.read_bytes()[:200])
    r = CliRunner().invoke(app, ["batch", str(library), "--jobs", "2"])
    assert r.exit_code == 1, r.output
    assert "FAILED inv: stone/stone_height.png -> stone/stone_inv.png: " in r.output
    assert "stone_height.png: PNG file is truncated" in r.output
    assert "batch: 5 ran, 1 skipped, 2 failed" in r.output
    data = json.loads((tmp_path / "out" / ".bakery" / "report.json").read_text())
    failed = [j for j in data["jobs"] if j["status"] == "failed"]
    assert len(failed) == 2 and all(str(bad) in j["error"] for j in failed)
    assert not (tmp_path / "out" / "stone").exists() or not list((tmp_path / "out" / "stone").glob("*.png"))
    # the failed jobs run again next time, the others do not
    rep = run(library, jobs=1, dry_run=True)
    assert sorted(j.output for j in rep.jobs if j.status != "skipped") == ["stone/stone_inv.png",
                                                                           "stone/stone_mix.png"]


def test_second_run_on_the_same_output_root_is_refused(library, tmp_path):
    with run_lock(tmp_path / "out"):
        with pytest.raises(BakeryError, match=r"another batch run \(pid \d+ on .*\) is writing to this output root"):
            run(library, jobs=1)
        r = CliRunner().invoke(app, ["batch", str(library)])
        assert r.exit_code == 2 and "error: " in r.output and "another batch run" in r.output
    assert not list((tmp_path / "out").glob("*/*.png"))


def test_cli(library, tmp_path):
    runner = CliRunner()
    r = runner.invoke(app, ["batch", "--help"])
    assert r.exit_code == 0 and "--dry-run" in r.output and "--cluster" in r.output
    r = runner.invoke(app, ["batch", str(library), "--dry-run"])
    assert r.exit_code == 0, r.output
    assert "run   inv: stone/stone_height.png -> stone/stone_inv.png  (new output)" in r.output
    assert "params: gain=0.9 (recipe [defaults.test-invert])" in r.output
    assert "skip  mix: metal/metal_height.png -> metal/metal_mix.png  (no detail input" in r.output
    assert "plan: 7 to run, 1 skipped, 0 failing (8 jobs)" in r.output
    assert not (tmp_path / "out").exists()  # a dry run writes nothing
    r = runner.invoke(app, ["batch", str(library), "--jobs", "2", "--cluster", "tcp://127.0.0.1:1"])
    assert r.exit_code == 2 and "--jobs and --cluster exclude each other" in r.output
    r = runner.invoke(app, ["batch", "--list-bakes"])
    assert r.exit_code == 0 and "test-mix: weighted mix" in r.output
    assert "  inputs: base, detail, mask (optional)" in r.output and "  weight = 0.5  (number)" in r.output
    r = runner.invoke(app, ["batch"])
    assert r.exit_code == 2 and "give a RECIPE file" in r.output
    r = runner.invoke(app, ["batch", str(tmp_path / "missing.toml")])
    assert r.exit_code == 2 and "missing.toml: file not found" in r.output
    r = runner.invoke(app, ["batch", str(library), "--only", "inv", "-j", "1"])
    assert r.exit_code == 0, r.output
    # not a terminal: plain progress lines
    assert "batch: 4 job(s) to run, 0 up to date (local, 1 worker)" in r.output
    assert "[4/4] ran inv: wood/pine/pine_height.png -> wood/pine/pine_inv.png" in r.output
    assert "batch: 4 ran, 0 skipped, 0 failed" in r.output and "4 not selected by --only" in r.output


def test_no_change_run_imports_nothing_heavy(library):
    run(library, jobs=1)
    code = (
        "import sys\n"
        "import tests.batch.bakes_for_tests\n"
        "from bakery.cli import run\n"
        f"run(['batch', {str(library)!r}])\n"
        "heavy = ['numpy', 'cv2', 'OpenEXR', 'scipy', 'skimage', 'tifffile', 'imageio', 'dask', 'distributed',\n"
        "         'numba', 'rich', 'PIL']\n"
        "print('HEAVY', [m for m in heavy if m in sys.modules])\n"
    )
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=env, cwd=ROOT,
                       timeout=60)
    assert "batch: 0 ran, 8 skipped" in r.stdout, r.stdout + r.stderr
    assert "HEAVY []" in r.stdout


def test_bad_jobs_value(library):
    with pytest.raises(BakeryError, match="jobs must be a whole number of at least 1; got 0"):
        run(library, jobs=0)


def test_a_dying_worker_fails_its_job_and_the_rest_finishes(library, tmp_path):
    (tmp_path / "lib" / "stone" / "bakery-folder.toml").write_text("[rule.inv]\ncrash = 3\n")
    rep = run(library, jobs=1)
    failed = [j for j in rep.jobs if j.status == "failed"]
    assert [j.output for j in failed] == ["stone/stone_inv.png"]
    assert "a worker process died" in failed[0].error
    assert (rep.ran, rep.exit_code) == (6, 1)


def test_progress_displays(library):
    import io

    from bakery.batch.report import BarProgress, PlainProgress

    rep = run(library, dry_run=True)
    job = rep.jobs[0]
    job.status, job.seconds, job.warnings = "ran", 0.5, ["values clipped"]
    bad = rep.jobs[1]
    bad.status, bad.error = "failed", "x.png: file not found"
    for cls in (PlainProgress, BarProgress):
        stream = io.StringIO()
        p = cls(stream)
        p.start(2, 6, "local", 2)
        p.update(job)
        p.update(bad)
        p.stop()
        text = stream.getvalue()
        assert "batch: 2 job(s) to run, 6 up to date (local, 2 workers)" in text
        assert "FAILED inv: stone/stone_height.png -> stone/stone_inv.png: x.png: file not found" in text
        assert "warning: metal/metal_inv.png: values clipped" in text


def test_workers_are_single_threaded(library, tmp_path):
    library.write_text(library.read_text() + '\n[[rule]]\nname = "probe"\nbake = "test-probe"\noutput = "probe.json"\n')
    before = dict(os.environ)
    run(library, jobs=2, only=["probe"])
    assert dict(os.environ) == before  # the thread settings were for the workers only
    data = json.loads((tmp_path / "out" / "probe.json").read_text())
    assert data == {"cv2": 1, "openexr": 1, "bakery": 1, "env": dict.fromkeys(
        ["OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "NUMBA_NUM_THREADS"], "1")}


def test_report_carries_the_inspect_findings_of_the_outputs(library, tmp_path):
    """Each job that ran lists what `bakery inspect` finds in the images it wrote (the same findings as
    inspecting the files directly), in the report and its JSON."""
    from bakery.inspect import inspect_pixels
    from bakery.io import read_image

    # a height map whose output is not a power of two in size: inspect says so (an info finding)
    (tmp_path / "lib" / "odd").mkdir()
    write_image(tmp_path / "lib" / "odd" / "odd_height.png",
                np.random.default_rng(5).random((24, 40), dtype=np.float32), bits="16")
    rep = run(library, jobs=1)
    out = tmp_path / "out"
    seen = 0
    for job in rep.jobs:
        if job.status != "ran":
            continue
        expected = []
        for rel in job.outputs:
            if rel.endswith(".png"):
                img = read_image(out / rel)
                kind, found = inspect_pixels(img.pixels, bits=img.bits)
                expected += [{"file": rel, "kind": kind, **f.as_dict()} for f in found]
        assert job.findings == expected
        seen += len(expected)
    assert seen > 0
    odd = next(j for j in rep.jobs if j.output == "odd/odd_inv.png")
    assert "non-power-of-two" in {f["code"] for f in odd.findings}
    data = json.loads((out / ".bakery" / "report.json").read_text())
    assert sum(len(j["findings"]) for j in data["jobs"]) == seen


def test_no_inspect_leaves_findings_out(library, tmp_path):
    rep = run(library, jobs=1, inspect=False)
    assert rep.ran and all(j.findings == [] for j in rep.jobs)
    r = CliRunner().invoke(app, ["batch", str(library), "--force", "--no-inspect", "--jobs", "1"])
    assert r.exit_code == 0, r.output
