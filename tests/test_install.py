"""The README's two set-up commands, one after the other in one fresh virtual environment, as a newcomer runs
them: install and run the demo, then the editable install with the test extras; every command still works."""

import os
import re
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


def _readme_commands() -> tuple[str, str]:
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    demo = re.search(r"^pip install \. && bakery demo -o (\S+)$", text, re.M)
    tests = re.search(r"^(pip install -e '\.\[test\]') && pytest$", text, re.M)
    assert demo and tests, "README.md must hold both set-up commands"
    return demo.group(0), tests.group(1)


@pytest.mark.slow
def test_readme_setup_sequence_in_one_fresh_venv(tmp_path):
    demo_cmd, install_cmd = _readme_commands()
    src = tmp_path / "bakery-src"
    shutil.copytree(ROOT, src, ignore=shutil.ignore_patterns(".git", "build", "*.egg-info", "demo-out", "__pycache__",
                                                            ".pytest_cache", "venv", ".venv"))
    venv = tmp_path / "venv"
    subprocess.run([sys.executable, "-m", "venv", str(venv)], check=True)
    env = {k: v for k, v in os.environ.items() if k not in ("PYTHONPATH", "VIRTUAL_ENV", "NUMBA_CACHE_DIR")}
    env["PATH"] = f"{venv / 'bin'}{os.pathsep}{env.get('PATH', '')}"
    env["XDG_CACHE_HOME"] = str(tmp_path / "cache")  # bakery's compiled-code cache goes here, not into the package

    def sh(cmd: str) -> subprocess.CompletedProcess:
        r = subprocess.run(["bash", "-c", cmd], cwd=src, env=env, capture_output=True, text=True, timeout=1500)
        assert r.returncode == 0, f"{cmd}\n{r.stdout[-3000:]}\n{r.stderr[-3000:]}"
        return r

    sh(demo_cmd)
    site = subprocess.run([str(venv / "bin" / "python"), "-c", "import bakery, os; print(os.path.dirname("
                           "bakery.__file__))"], cwd=tmp_path, env=env, capture_output=True, text=True, check=True)
    installed = Path(site.stdout.strip())
    left = [p for p in installed.rglob("*") if p.suffix in (".nbi", ".nbc")]
    assert not left, f"compiled-code cache inside the installed package: {left[:3]}"
    sh(install_cmd)
    sky = src / "samples" / "sky.hdr"
    r = sh(f"bakery env diffuse {sky} -o {tmp_path / 'sky_diffuse.json'} && bakery --version")
    assert "bakery" in r.stdout
