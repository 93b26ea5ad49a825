"""Checking parameters and profiles loads no array stack: a no-change batch run decides from names and
hashes alone, so everything it checks must stay plain Python."""

import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def test_profile_and_specular_checks_import_no_numpy():
    code = (
        "import sys\n"
        "from bakery.profiles import load_profile\n"
        "from bakery.bakes.glossy import SpecularParams\n"
        "for name in ('y-down-8bit-block-compressed', 'y-up-16bit-uncompressed'):\n"
        "    load_profile(f'samples/profiles/{name}.toml')\n"
        "SpecularParams(face_size=64, levels=4, level_roughness=[0, 0.25, 0.5, 1])\n"
        "SpecularParams(face_size=64, level_roughness='quadratic')\n"
        "try:\n"
        "    SpecularParams(face_size=64, levels=3, level_roughness=[0, 0.5, 0.25])\n"
        "except ValueError as exc:\n"
        "    print('REFUSED', exc)\n"
        "print('HEAVY', [m for m in ('numpy', 'cv2', 'scipy') if m in sys.modules])\n"
    )
    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=ROOT, timeout=60,
                       env={"PYTHONPATH": str(ROOT), "PATH": "/usr/bin:/bin"})
    assert "HEAVY []" in r.stdout, r.stdout + r.stderr
    assert "REFUSED" in r.stdout and "must not decrease" in r.stdout, r.stdout


def test_level_roughness_values_agree_with_the_named_formulas():
    # linear r_k = k/(n-1), quadratic r_k = (k/(n-1))^2 (common practice), as floats
    from bakery.envmap.specular import level_roughness

    assert level_roughness(5).tolist() == [0.0, 0.25, 0.5, 0.75, 1.0]
    assert level_roughness(3, "quadratic").tolist() == [0.0, 0.25, 1.0]
    assert level_roughness(1).tolist() == [0.0]
