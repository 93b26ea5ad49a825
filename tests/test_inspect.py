"""``inspect``: every finding has a case that produces it and one that does not.

Normal maps for these checks are made independently of bakery's normal baker: slopes by numpy.gradient
(central differences) and n = normalize(-dh/dx, -dh/dy, 1) (Blinn 1978, "Simulation of Wrinkled Surfaces").
"""

import contextlib
import io
import json
from pathlib import Path

import numpy as np
import pytest
from typer.testing import CliRunner

from bakery import samples
from bakery.cli import app, run
from bakery.inspect import green_convention, inspect_pixels, seam_score
from bakery.io import write_image

runner = CliRunner()


def _normals(h, strength=1.0, y_down=False):
    """Encoded normal map (values in [0, 1]) of a height field; rows top to bottom, +y up."""
    dy_rows, dx = np.gradient(h.astype(np.float64))
    dy = -dy_rows
    n = np.stack([-strength * dx, -strength * dy, np.ones_like(h)], axis=-1)
    n /= np.linalg.norm(n, axis=-1, keepdims=True)
    if y_down:
        n[..., 1] = -n[..., 1]
    return (n * 0.5 + 0.5).astype(np.float32)


def _heights():
    y, x = np.mgrid[0:128, 0:128] / 128.0
    yield "bumps", (np.sin(2 * np.pi * 3 * x) * np.sin(2 * np.pi * 2 * y) * 6).astype(np.float32)
    yield "ridge", (np.sin(2 * np.pi * (2 * x + 3 * y)) * 4 + np.cos(2 * np.pi * (x - y)) * 5).astype(np.float32)
    yield "paving", samples.paving_height(128) * 40
    r = np.hypot(x - 0.5, y - 0.4)
    yield "dome", (np.exp(-(r / 0.2) ** 2) * 30).astype(np.float32)


def _codes(findings):
    return {f.code for f in findings}


@pytest.mark.parametrize("name,h", list(_heights()))
@pytest.mark.parametrize("y_down", [False, True])
def test_green_convention_guess(name, h, y_down):
    px = _normals(h, y_down=y_down)
    conv, conf = green_convention(px * 2 - 1)
    assert conv == ("y-down" if y_down else "y-up"), (name, conv, conf)
    assert conf > 0.5
    kind, findings = inspect_pixels(px, bits="16")
    assert kind == "normal"
    assert ("green-y-down" in _codes(findings)) == y_down


def test_green_convention_unsure_on_a_flat_map():
    flat = np.broadcast_to(np.array([0.5, 0.5, 1.0], np.float32), (32, 32, 3)).copy()
    assert green_convention(flat * 2 - 1) == ("unsure", 0.0)
    assert "green-unsure" in _codes(inspect_pixels(flat, bits="8")[1])


def test_normal_not_unit_length():
    px = _normals(samples.paving_height(64) * 8)
    assert inspect_pixels(px, bits="16")[0] == "normal"
    assert "normal-not-unit" not in _codes(inspect_pixels(px, bits="16")[1])
    short = (px * 2 - 1) * 0.7 * 0.5 + 0.5
    assert "normal-not-unit" in _codes(inspect_pixels(short, bits="16", kind="normal")[1])


def test_normal_saved_with_srgb_curve():
    """A linear normal map written through the sRGB encode curve (IEC 61966-2-1)."""
    from bakery.color import linear_to_srgb, srgb_to_linear

    px = _normals(samples.paving_height(64) * 8)
    as_srgb = linear_to_srgb(px)
    assert np.allclose(srgb_to_linear(as_srgb), px, atol=1e-5)
    codes = _codes(inspect_pixels(as_srgb, bits="8", kind="normal")[1])
    assert "normal-srgb" in codes and "normal-not-unit" not in codes
    assert "normal-srgb" not in _codes(inspect_pixels(px, bits="8")[1])


def test_negative_z():
    px = _normals(samples.paving_height(64) * 8)
    assert "normal-negative-z" not in _codes(inspect_pixels(px, bits="16")[1])
    flipped = px.copy()
    flipped[..., 2] = 1 - flipped[..., 2]
    assert "normal-negative-z" in _codes(inspect_pixels(flipped, bits="16", kind="normal")[1])


def test_height_terracing_in_8_bit():
    y, x = np.mgrid[0:128, 0:128] / 128.0
    smooth = (0.3 + 0.05 * np.sin(2 * np.pi * x) + 0.05 * np.cos(2 * np.pi * y)).astype(np.float32)
    stepped = np.round(smooth[..., None] * 255) / 255
    assert "height-terraced" in _codes(inspect_pixels(stepped, bits="8", kind="height")[1])
    assert "height-terraced" not in _codes(inspect_pixels(smooth[..., None], bits="16", kind="height")[1])
    noisy = samples.paving_height(128)[..., None]
    assert "height-terraced" not in _codes(inspect_pixels(np.round(noisy * 255) / 255, bits="8",
                                                          kind="height")[1])


def test_height_clipped_and_low_range():
    h = samples.paving_height(64)[..., None]
    codes = _codes(inspect_pixels(h, bits="16", kind="height")[1])
    assert not codes & {"height-clipped", "height-low-range"}
    assert "height-clipped" in _codes(inspect_pixels(np.clip(h * 1.6, 0, 1), bits="16", kind="height")[1])
    assert "height-low-range" in _codes(inspect_pixels(0.5 + h * 0.05, bits="16", kind="height")[1])


def test_tiling_score_separates_a_tiling_map_from_an_off_grid_crop():
    h = samples.paving_height(256)
    assert seam_score(h) < 2.0
    crop = h[37:37 + 160, 91:91 + 160]
    assert seam_score(crop) > 2.0
    assert "not-tiling" not in _codes(inspect_pixels(h[..., None], bits="16", kind="height")[1])
    assert "not-tiling" in _codes(inspect_pixels(crop[..., None], bits="16", kind="height")[1])


def test_non_power_of_two():
    assert "non-power-of-two" in _codes(inspect_pixels(np.zeros((48, 64, 1), np.float32) + 0.5,
                                                       bits="8", kind="height")[1])
    assert "non-power-of-two" not in _codes(inspect_pixels(np.zeros((32, 64, 1), np.float32) + 0.5,
                                                           bits="8", kind="height")[1])


def test_environment_checks():
    sky = samples.sky_panorama(128)
    assert inspect_pixels(sky, bits="float") == ("environment", [])
    neg = sky.copy()
    neg[3, 3, 0] = -1
    assert "env-negative" in _codes(inspect_pixels(neg, bits="float")[1])
    ldr = np.clip(sky, 0, 1)
    assert "env-ldr" in _codes(inspect_pixels(ldr, bits="float", kind="environment")[1])
    clipped = np.minimum(sky, 1.05)  # a capture whose bright horizon clipped
    assert "env-clipped" in _codes(inspect_pixels(clipped, bits="float", kind="environment")[1])
    wide = samples.sky_panorama(128)[:, :100]
    assert "env-aspect" in _codes(inspect_pixels(wide, bits="float", kind="environment")[1])


def test_non_finite_and_colour_height():
    d = np.ones((8, 8, 3), np.float32) * 2
    d[0, 0] = np.nan
    assert "non-finite" in _codes(inspect_pixels(d, bits="float")[1])
    rgb = np.random.default_rng(0).random((8, 8, 3)).astype(np.float32)
    assert "height-colour" in _codes(inspect_pixels(rgb, bits="8", kind="height")[1])
    gray = np.repeat(rgb[..., :1], 3, axis=2)
    assert "height-colour" not in _codes(inspect_pixels(gray, bits="8", kind="height")[1])


def test_cli_text_and_json(tmp_path):
    good = write_image(tmp_path / "n.png", _normals(samples.paving_height(64) * 8), bits="16")
    bad = write_image(tmp_path / "flip.png", _normals(samples.paving_height(64) * 8, y_down=True), bits="16")
    r = runner.invoke(app, ["inspect", str(good), str(bad)])
    assert r.exit_code == 0, r.output
    assert "green-y-down" in r.output and "hint:" in r.output
    r = runner.invoke(app, ["inspect", "--json", str(bad)])
    data = json.loads(r.output)
    assert data[0]["kind"] == "normal" and "green-y-down" in {f["code"] for f in data[0]["findings"]}
    assert runner.invoke(app, ["inspect", "--strict", str(bad)]).exit_code == 1
    assert runner.invoke(app, ["inspect", str(tmp_path / "missing.png")]).exit_code == 2


def test_smooth_irradiance_face_is_neither_clipped_nor_misshapen():
    """A 32x32 cube face of a smooth HDR field (max 3): no clipping (a smooth peak has no plateau), and a
    square float image is a cube face, not a panorama of the wrong aspect."""
    from bakery.sphere import cube_directions

    d = cube_directions(32)[4]
    face = (1.5 + 1.5 * np.clip(d @ np.array([0.3, 0.8, -0.5]) / np.linalg.norm([0.3, 0.8, -0.5]), 0, 1))
    face = (face[..., None] * np.array([1.0, 0.9, 0.8])).astype(np.float16).astype(np.float32)
    kind, findings = inspect_pixels(face, bits="half")
    assert kind == "environment"
    assert not _codes(findings) & {"env-clipped", "env-aspect"}


def test_tiny_mip_levels_are_not_judged_for_range_or_tiling():
    level = np.full((4, 4, 1), 0.5, np.float32)
    level[0, 0] = 0.52
    assert inspect_pixels(level, bits="8", kind="height")[1] == []


@pytest.mark.parametrize("y_down", [False, True])
def test_large_maps_are_judged_on_a_stride_with_the_same_answers(y_down):
    """Maps over 1024 texels a side are sampled every 2nd texel for vector and seam statistics."""
    h = samples.paving_height(1024) * 40
    px = _normals(h, y_down=y_down)
    codes = _codes(inspect_pixels(px, bits="16")[1])
    if y_down:  # with no target convention a Y-down map is named; a Y-up one gives no green finding
        assert "green-y-down" in codes
    else:
        assert not {"green-y-up", "green-y-down"} & codes
    assert "not-tiling" not in codes
    crop = px[37:37 + 1024 - 100, 91:91 + 1024 - 60]
    assert "not-tiling" in _codes(inspect_pixels(crop, bits="16", kind="normal")[1])


@pytest.mark.parametrize("profile, flagged", [("y-up-16bit-uncompressed", "down.png"),
                                              ("y-down-8bit-block-compressed", "up.png")])
def test_a_profile_sets_the_expected_green_convention(tmp_path, profile, flagged):
    """Normals from numpy gradients of a height field (Blinn 1978, the perturbed normal), written in both
    conventions: with a target profile only the map in the other convention is the finding."""
    root = Path(__file__).resolve().parents[1]
    h = samples.paving_height(256) * 40
    write_image(tmp_path / "up.png", _normals(h), bits="16")
    write_image(tmp_path / "down.png", _normals(h, y_down=True), bits="16")
    prof = root / "samples" / "profiles" / f"{profile}.toml"
    buf = io.StringIO()
    with contextlib.redirect_stdout(buf):
        code = run(["inspect", "--json", "--profile", str(prof), str(tmp_path / "up.png"),
                    str(tmp_path / "down.png")])
    assert code == 0
    reports = {Path(r["file"]).name: {f["code"] for f in r["findings"]} for r in json.loads(buf.getvalue())}
    green = {name for name, codes in reports.items() if codes & {"green-y-up", "green-y-down"}}
    assert green == {flagged}
