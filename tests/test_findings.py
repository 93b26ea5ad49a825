"""Every ``bakery inspect`` finding: the codes in the source are the codes of the table in docs/inspect.md, and
each one has a map that produces it and a close map that does not, judged through the command line
(``bakery inspect FILE --json --strict``) with the exit codes docs/inspect.md gives.

The maps are built here from independent facts, not from bakery's helpers, and written with OpenCV (PNG) or
``bakery.io.write_image`` (OpenEXR, which OpenCV 5 cannot write):

- normal maps of analytic surfaces: sphere caps, whose exact normal at (x, y) on a sphere of radius R centred at
  (cx, cy, -d) is (x - cx, y - cy, z) / R (analytic; the perturbed normal n = normalize(-dh/dx, -dh/dy, 1) of
  Blinn 1978, "Simulation of Wrinkled Surfaces", SIGGRAPH '78), and separable waves h = f(x) + g(y);
  encoded rgb = n * 0.5 + 0.5 with +Y up the texture (glTF 2.0, Khronos, ``material.normalTexture``), the
  Y-down (DirectX-style) file storing g' = 1 - g (common practice, no standard);
- the sRGB encoding curve of IEC 61966-2-1:1999 (written out below);
- environment panoramas laid out by the equirectangular mapping of DEVELOPERS.md (direction
  d = (sin phi cos theta, sin theta, -cos phi cos theta)).
"""

from __future__ import annotations

import ast
import json
import re
from pathlib import Path

import cv2
import numpy as np
import pytest

from bakery.cli import run
from bakery.io import write_image

ROOT = Path(__file__).resolve().parents[1]
SOURCES = [ROOT / "bakery" / "inspect.py", ROOT / "bakery" / "inspect_files.py"]
DOC = ROOT / "docs" / "inspect.md"


# ------------------------------------------------------------------------------------------ codes


def source_codes() -> set[str]:
    """Every finding code the source can give, read from its syntax tree: the first argument of each
    ``Finding(...)`` call is a code literal, the variable ``code`` (whose values are the literals that every
    ``code = ...`` assignment can take, through ``a if test else b``) or ``f.code`` (a finding given again
    with the place it was seen). Anything else fails, so a new way of choosing a code needs a rule here."""

    def values(node: ast.expr) -> set[str]:
        if isinstance(node, ast.Constant) and isinstance(node.value, str):
            return {node.value}
        assert isinstance(node, ast.IfExp), ast.unparse(node)
        return values(node.body) | values(node.orelse)

    codes: set[str] = set()
    for path in SOURCES:
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, ast.Call) and isinstance(node.func, ast.Name) and node.func.id == "Finding":
                first = node.args[0]
                if isinstance(first, ast.Constant):
                    codes.add(first.value)
                else:
                    assert ast.unparse(first) in ("code", "f.code"), f"{path.name}: {ast.unparse(node)}"
            elif isinstance(node, ast.Assign) and any(isinstance(t, ast.Name) and t.id == "code"
                                                      for t in node.targets):
                codes |= values(node.value)
    return codes


def doc_table() -> dict[str, str]:
    """Code -> severity from the table of docs/inspect.md (a row may list several codes: ``a`` / ``b``)."""
    table: dict[str, str] = {}
    for line in DOC.read_text(encoding="utf-8").splitlines():
        cells = [c.strip() for c in line.strip().strip("|").split("|")]
        if len(cells) < 3 or not cells[0].startswith("`"):
            continue
        codes = re.findall(r"`([^`]+)`", cells[0])
        severities = [s.strip() for s in cells[1].split("/")]
        assert len(severities) == len(codes), line
        table.update(zip(codes, severities, strict=True))
    return table


def test_the_codes_in_the_source_are_the_codes_of_the_table():
    table = doc_table()
    assert source_codes() == set(table)
    assert set(table.values()) <= {"error", "warning", "info"}


def test_every_code_has_a_case():
    assert set(CASES) == source_codes()


# ------------------------------------------------------------------------------------------ writing maps


def png(path: Path, values: np.ndarray, bits: int = 16) -> Path:
    """Write values in [0, 1] (H, W[, C], RGB(A)) as a PNG with OpenCV, rounding to nearest."""
    top = 65535 if bits == 16 else 255
    q = np.rint(np.clip(values, 0.0, 1.0) * top).astype(np.uint16 if bits == 16 else np.uint8)
    if q.ndim == 3 and q.shape[2] >= 3:
        q = q[..., [2, 1, 0, 3][: q.shape[2]]]  # OpenCV stores BGR(A)
    assert cv2.imwrite(str(path), q)
    return path


def exr(path: Path, values: np.ndarray) -> Path:
    return write_image(path, values.astype(np.float32), bits="float")


def srgb_encode(v: np.ndarray) -> np.ndarray:
    """IEC 61966-2-1:1999, the encoding (linear -> sRGB) curve: 12.92 v below 0.0031308, else
    1.055 v^(1/2.4) - 0.055."""
    v = np.clip(v, 0.0, 1.0)
    return np.where(v <= 0.0031308, 12.92 * v, 1.055 * np.power(v, 1 / 2.4) - 0.055)


#: Sphere caps (centre x, centre y, radius R, depth d of the centre below the surface) on a 128-texel square;
#: each cap's rim has radius sqrt(R^2 - d^2), and no cap touches another or an edge.
CAPS = [(40.0, 44.0, 30.0, 18.0), (92.3, 84.1, 26.0, 14.0), (88.7, 30.2, 16.0, 8.0), (34.2, 98.4, 20.0, 10.0)]


def cap_normals(size: int = 128) -> np.ndarray:
    """Exact unit normals (+Y up the texture) of raised sphere caps on a flat square, rows top to bottom."""
    rows, cols = np.mgrid[0:size, 0:size].astype(np.float64)
    x, y = cols + 0.5, size - (rows + 0.5)  # texel centres, y up
    n = np.zeros((size, size, 3))
    n[..., 2] = 1.0
    for cx, cy, r, d in CAPS:
        dx, dy = x - cx, y - cy
        inside = dx * dx + dy * dy < r * r - d * d
        z = np.sqrt(np.maximum(r * r - dx * dx - dy * dy, 0.0))
        n[inside] = np.stack([dx, dy, z], axis=-1)[inside] / r
    return n


def wave_normals(size: int = 128) -> np.ndarray:
    """Exact normals of h = 6 sin(2 pi 2 x / size) + 4 sin(2 pi 3 y / size): no cross terms, so the slopes are
    integrable read in either green convention."""
    rows, cols = np.mgrid[0:size, 0:size].astype(np.float64)
    x, y = cols + 0.5, size - (rows + 0.5)
    w = 2 * np.pi / size
    hx = 6 * 2 * w * np.cos(2 * w * x)
    hy = 4 * 3 * w * np.cos(3 * w * y)
    n = np.stack([-hx, -hy, np.ones_like(hx)], axis=-1)
    return n / np.linalg.norm(n, axis=-1, keepdims=True)


def encode(n: np.ndarray, *, y_down: bool = False) -> np.ndarray:
    """rgb = n * 0.5 + 0.5 (glTF 2.0); Y-down files store 1 - g."""
    rgb = n * 0.5 + 0.5
    if y_down:
        rgb[..., 1] = 1.0 - rgb[..., 1]
    return rgb


def field(size=(128, 128), periods=(1.0, 1.0), phase=(0.0, 0.0)) -> np.ndarray:
    """s(x) * c(y) in [-1, 1] with the given periods across the width and height; whole periods tile."""
    h, w = size
    rows, cols = np.mgrid[0:h, 0:w].astype(np.float64)
    return np.sin(2 * np.pi * periods[0] * cols / w + phase[0]) * np.cos(2 * np.pi * periods[1] * rows / h + phase[1])


def panorama(width: int = 128, height: int = 64) -> np.ndarray:
    """An HDR sky, linear RGB: a blue-grey dome brighter towards the zenith and a sun of peak 40 whose centre
    lies between texel centres (so one texel holds the maximum), laid out equirectangularly (DEVELOPERS.md)."""
    rows, cols = np.mgrid[0:height, 0:width].astype(np.float64)
    phi = 2 * np.pi * ((cols + 0.5) / width - 0.5)
    theta = np.pi * (0.5 - (rows + 0.5) / height)
    d = np.stack([np.sin(phi) * np.cos(theta), np.sin(theta), -np.cos(phi) * np.cos(theta)], axis=-1)
    sun = np.array([0.37, 0.55, -0.61])
    sun /= np.linalg.norm(sun)
    lobe = 40.0 * np.exp((d @ sun - 1.0) / 0.01)
    sky = 0.2 + 0.6 * np.clip(d[..., 1], 0, 1)
    return (sky[..., None] * np.array([0.8, 0.9, 1.0]) + lobe[..., None] * np.array([1.0, 0.95, 0.85]))


# ------------------------------------------------------------------------------------------ the cases
# Each case writes (positive, negative, extra arguments) into a folder: the positive map produces the code,
# the negative (a close map) does not.


def case_non_finite(tmp):
    sky = panorama()
    bad = sky.copy()
    bad[10, 20, 1] = np.nan
    bad[30, 70, 0] = np.inf
    return exr(tmp / "nan.exr", bad), exr(tmp / "sky.exr", sky), ["--kind", "environment"]


def case_normal_srgb(tmp):
    # the linear encoding saved through the sRGB curve: lengths are off (0.5 -> 0.735), and decoding the
    # file by IEC 61966-2-1 gives unit vectors back
    rgb = encode(cap_normals())
    return png(tmp / "srgb.png", srgb_encode(rgb), 8), png(tmp / "linear.png", rgb, 8), ["--kind", "normal"]


def case_normal_not_unit(tmp):
    # vectors of length 0.8 (a mip level averaged without renormalising); the limits (off by over 0.03 in
    # more than 1% of texels) are common practice
    n = cap_normals()
    return png(tmp / "short.png", encode(0.8 * n)), png(tmp / "unit.png", encode(n)), ["--kind", "normal"]


def case_normal_negative_z(tmp):
    n = cap_normals()
    into = n.copy()
    into[:16, :, 2] *= -1  # the top 16 rows (12.5% of the map, flat there) point into the surface
    # (tangent-space z >= 0, glTF 2.0; the 0.1% limit is common practice)
    return png(tmp / "into.png", encode(into)), png(tmp / "out.png", encode(n)), ["--kind", "normal"]


def case_green_y_up(tmp):
    # a Y-up map judged against a Y-down target; the negative is the same surface stored Y-down. The guess
    # rests on integrability (Frankot & Chellappa 1988, section II): the exact normals of a height field are
    # integrable only when read in the convention they were stored in
    n = cap_normals()
    return (png(tmp / "up.png", encode(n)), png(tmp / "down.png", encode(n, y_down=True)),
            ["--kind", "normal", "--expect-y", "down"])


def case_green_y_down(tmp):
    # raised caps stored Y-down (g' = 1 - g): integrable read Y-down, and the relief comes out raised, so it is
    # the green channel (not the red one) that differs from the Y-up default (glTF 2.0)
    n = cap_normals()
    return png(tmp / "down.png", encode(n, y_down=True)), png(tmp / "up.png", encode(n)), ["--kind", "normal"]


def case_green_unsure(tmp):
    # h = f(x) + g(y) has no cross terms: both readings are integrable (Frankot & Chellappa 1988)
    return png(tmp / "waves.png", encode(wave_normals())), png(tmp / "caps.png", encode(cap_normals())), \
        ["--kind", "normal"]


def case_normal_x_flipped(tmp):
    # red inverted (x -> -x): integrable only read with green flipped too, and then the caps come out as pits
    # (the relief sign, docs/references.md section 19)
    n = cap_normals()
    flipped = n.copy()
    flipped[..., 0] *= -1
    return png(tmp / "xflip.png", encode(flipped)), png(tmp / "caps.png", encode(n)), ["--kind", "normal"]


def case_normal_alpha(tmp):
    # an alpha below 1 beside the normals (a packed height or a mask the engine may not expect)
    rgb = encode(cap_normals())
    alpha = np.ones(rgb.shape[:2] + (1,))
    opaque = np.concatenate([rgb, alpha], axis=-1)
    cut = opaque.copy()
    cut[40:80, 40:80, 3] = 0.5
    return png(tmp / "cut.png", cut), png(tmp / "opaque.png", opaque), ["--kind", "normal"]


def case_height_terraced(tmp):
    # a gentle smooth field (under one 8-bit level per texel) stored as 8-bit integers: runs of equal texels
    # and single-level steps; the same field in 16 bits is smooth (the 30% / 60% limits are common practice)
    h = 0.3 + 0.1 * field(periods=(1, 1))
    return png(tmp / "h8.png", h, 8), png(tmp / "h16.png", h, 16), ["--kind", "height"]


def case_height_clipped(tmp):
    # 0.5 + 0.6 s clipped to [0, 1]: where |s| > 5/6 the texels sit at pure white or black (common practice:
    # over 1% of the texels)
    s = field(periods=(2, 1))
    return png(tmp / "clip.png", 0.5 + 0.6 * s), png(tmp / "room.png", 0.5 + 0.4 * s), ["--kind", "height"]


def case_height_low_range(tmp):
    # used range 0.08 against 0.12 of the file's range; the limit 10% is common practice
    s = field(periods=(2, 1))
    return png(tmp / "low.png", 0.5 + 0.04 * s), png(tmp / "wide.png", 0.5 + 0.06 * s), ["--kind", "height"]


def case_height_colour(tmp):
    # heights are one value per texel: an RGB file judged as heights must hold it in all three channels
    h = 0.5 + 0.3 * field(periods=(2, 1))
    grey = np.stack([h, h, h], axis=-1)
    tinted = np.stack([h, h, 1.0 - h], axis=-1)
    return png(tmp / "tinted.png", tinted), png(tmp / "grey.png", grey), ["--kind", "height"]


def case_not_tiling(tmp):
    # whole periods across the map wrap smoothly; 2.6 x 1.7 periods jump at the wrap edges (seam score over
    # 1.5: common practice)
    return (png(tmp / "crop.png", 0.5 + 0.3 * field(periods=(2.6, 1.7), phase=(0.4, 0.9))),
            png(tmp / "tile.png", 0.5 + 0.3 * field(periods=(3, 2), phase=(0.4, 0.9))), ["--kind", "height"])


def case_non_power_of_two(tmp):
    # 300 x 200: neither axis halves down to 1 (mip chains, Williams 1983, "Pyramidal Parametrics")
    def colour(h, w):
        return np.stack([0.5 + 0.3 * field((h, w), (2, 1)), 0.4 + 0.2 * field((h, w), (1, 3)),
                         np.full((h, w), 0.3)], axis=-1)

    return png(tmp / "odd.png", colour(200, 300), 8), png(tmp / "even.png", colour(128, 256), 8), \
        ["--kind", "color"]


def case_env_negative(tmp):
    # radiance is never negative (a physical quantity); one texel of -0.25
    sky = panorama()
    bad = sky.copy()
    bad[40, 10, 2] = -0.25
    return exr(tmp / "neg.exr", bad), exr(tmp / "sky.exr", sky), ["--kind", "environment"]


def case_env_ldr(tmp):
    # the HDR sky clipped to 1, as a low dynamic range capture stores it (a sun of 40 held as 1: common
    # practice to call this LDR)
    sky = panorama()
    return exr(tmp / "ldr.exr", np.minimum(sky, 1.0)), exr(tmp / "sky.exr", sky), ["--kind", "environment"]


def case_env_clipped(tmp):
    # a capture saturating at 8: the sun's core is a plateau of equal texels (common practice: at least 4
    # texels and 0.1%); the unclipped sun has one brightest texel
    sky = panorama()
    return exr(tmp / "sat.exr", np.minimum(sky, 8.0)), exr(tmp / "sky.exr", sky), ["--kind", "environment"]


def case_env_aspect(tmp):
    # an equirectangular panorama spans 360 x 180 degrees: 2:1 (DEVELOPERS.md, equirectangular orientation)
    # 3:2 is neither 2:1 (equirectangular), a cube layout (4:3, 3:4, 6:1, 1:6) nor a square face
    return exr(tmp / "wide.exr", panorama(96, 64)), exr(tmp / "sky.exr", panorama(128, 64)), \
        ["--kind", "environment"]


def baked_normal(tmp: Path, name: str, suffix: str = ".png", *options: str) -> Path:
    """`bakery normal` (a 16-bit PNG, or a float EXR) on a height of sphere caps, its manifest beside it."""
    rows, cols = np.mgrid[0:128, 0:128].astype(np.float64)
    h = np.zeros((128, 128))
    for cx, cy, r, d in CAPS:
        h = np.maximum(h, np.sqrt(np.maximum(r * r - (cols - cx) ** 2 - (rows - cy) ** 2, 0)) - d)
    src = png(tmp / f"{name}_height.png", h / h.max())
    out = tmp / f"{name}{suffix}"
    bits = ["--bits", "float"] if suffix == ".exr" else []
    assert run(["normal", str(src), "-o", str(out), "--quiet", *bits, *options]) == 0
    assert (tmp / f"{name}{suffix}.bakery.json").is_file()
    return out


def case_manifest_stale(tmp):
    stale, kept = baked_normal(tmp, "changed"), baked_normal(tmp, "kept")
    # the same pixels encoded again at another compression level: other bytes, so the recorded hash no
    # longer matches
    pixels = cv2.imread(str(stale), cv2.IMREAD_UNCHANGED)
    assert cv2.imwrite(str(stale), pixels, [cv2.IMWRITE_PNG_COMPRESSION, 9])
    return stale, kept, []


def case_unreadable(tmp):
    whole = png(tmp / "whole.png", encode(cap_normals()))
    cut = tmp / "cut.png"
    # a PNG truncated half-way: it lacks its IEND chunk and part of its image data (W3C, "Portable Network
    # Graphics (PNG) Specification", 2003, section 5.6, chunk ordering: IEND comes last; section from memory)
    cut.write_bytes(whole.read_bytes()[: whole.stat().st_size // 2])
    return cut, whole, []


CASES = {code: globals()["case_" + code.replace("-", "_")] for code in doc_table()
         if "case_" + code.replace("-", "_") in globals()}


# ------------------------------------------------------------------------------------------ the checks


def inspect_json(capfd, paths: list[Path], extra: list[str]) -> tuple[int, list[dict], str]:
    capfd.readouterr()
    code = run(["inspect", "--json", "--strict", *extra, *map(str, paths)])
    out, err = capfd.readouterr()
    return code, (json.loads(out) if out.strip() else []), err


@pytest.mark.parametrize("code", sorted(source_codes()))
def test_each_finding_has_a_map_that_gives_it_and_one_that_does_not(code, tmp_path, capfd):
    """The positive map gives this code and no other, with the severity of the table; the negative, a close
    map, gives no finding at all. ``--strict`` exits 1 exactly when a finding is a warning or an error, and an
    unreadable file beside readable ones makes the exit code 1 (docs/inspect.md)."""
    severity = doc_table()
    positive, negative, extra = CASES[code](tmp_path)
    if code == "unreadable":  # judged beside a readable map: one report each
        rc, reports, _ = inspect_json(capfd, [positive, negative], extra)
        assert rc == 1
        bad, good = reports
        assert bad["kind"] == "unreadable" and [f["code"] for f in bad["findings"]] == ["unreadable"]
        assert bad["findings"][0]["severity"] == severity[code]
        assert good["kind"] == "normal" and good["findings"] == []
        rc, reports, err = inspect_json(capfd, [positive], extra)  # alone: one error line naming it, exit 2
        assert rc == 2 and reports == []
        assert err.startswith("error:") and positive.name in err and len(err.strip().splitlines()) == 1
        return
    rc, (report,), _ = inspect_json(capfd, [positive], extra)
    assert {f["code"] for f in report["findings"]} == {code}, report
    assert {f["severity"] for f in report["findings"]} == {severity[code]}, report
    assert rc == (0 if severity[code] == "info" else 1)
    rc, (report,), _ = inspect_json(capfd, [negative], extra)
    assert report["findings"] == [] and rc == 0, report


def test_warnings_exit_0_without_strict(tmp_path, capfd):
    down = png(tmp_path / "down.png", encode(cap_normals(), y_down=True))
    capfd.readouterr()
    assert run(["inspect", "--json", str(down)]) == 0
    (report,) = json.loads(capfd.readouterr().out)
    assert [f["code"] for f in report["findings"]] == ["green-y-down"]


# ------------------------------------------------------------------------------------------ stale manifests
# A map bakery baked, then replaced by a broken file while its manifest stayed: the manifest is stale
# (its recorded hash no longer matches), so inspect says so and judges the map on its own pixels.


def _flip_green(path: Path) -> None:
    bgr = cv2.imread(str(path), cv2.IMREAD_UNCHANGED)
    bgr[..., 1] = np.iinfo(bgr.dtype).max - bgr[..., 1]
    assert cv2.imwrite(str(path), bgr)


def _srgb_encoded(path: Path) -> None:
    bgr = cv2.imread(str(path), cv2.IMREAD_UNCHANGED)
    top = np.iinfo(bgr.dtype).max
    assert cv2.imwrite(str(path), np.rint(srgb_encode(bgr / top) * top).astype(bgr.dtype))


def _nan_texels(path: Path) -> None:
    from bakery.io import read_image

    px = read_image(path).pixels.copy()
    px[5, 7] = np.nan
    px[60, 90, 2] = np.nan
    exr(path, px)


@pytest.mark.parametrize("plant, suffix, planted", [(_flip_green, ".png", "green-y-down"),
                                                    (_srgb_encoded, ".png", "normal-srgb"),
                                                    (_nan_texels, ".exr", "non-finite")])
def test_a_planted_mistake_under_a_stale_manifest_is_found(plant, suffix, planted, tmp_path, capfd):
    baked = baked_normal(tmp_path, "kept", suffix)
    broken = baked_normal(tmp_path, "broken", suffix)
    manifest = (tmp_path / f"broken{suffix}.bakery.json").read_bytes()
    plant(broken)
    assert (tmp_path / f"broken{suffix}.bakery.json").read_bytes() == manifest  # left as the bake wrote it
    _, (kept, judged), _ = inspect_json(capfd, [baked, broken], [])
    assert kept["from"] == "manifest" and kept["kind"] == "normal" and kept["findings"] == [], kept
    assert judged["from"] == "pixels" and judged["kind"] == "normal", judged
    assert {f["code"] for f in judged["findings"]} == {"manifest-stale", planted}, judged


def test_a_stale_manifest_does_not_give_its_convention(tmp_path, capfd):
    """Baked Y-down, then replaced by the same normals stored Y-up: judged on the pixels against the default
    Y-up there is nothing wrong but the stale manifest; trusted, the manifest's Y-down would have made the
    Y-up pixels the finding."""
    down = baked_normal(tmp_path, "down", ".png", "--y", "down")
    _, (report,), _ = inspect_json(capfd, [down], [])
    assert report["y"] == "down" and report["findings"] == [], report
    _flip_green(down)
    _, (report,), _ = inspect_json(capfd, [down], [])
    assert "y" not in report and [f["code"] for f in report["findings"]] == ["manifest-stale"], report


def test_a_picture_is_judged_only_for_being_finite():
    """A picture bakery wrote for people (its manifest says ``"picture": true``): a 300x200 size is no
    finding, NaN still is."""
    from bakery.inspect import facts_from_manifest, inspect_pixels

    facts = facts_from_manifest({"bake": "preview", "picture": True}, "shot.png")
    assert facts.kind == "picture" and facts.source == "manifest"
    px = np.full((200, 300, 3), 0.5, np.float32)
    assert inspect_pixels(px, bits="8", facts=facts) == ("picture", [])
    px[3, 4, 0] = np.nan
    assert [f.code for f in inspect_pixels(px, bits="half", facts=facts)[1]] == ["non-finite"]


@pytest.mark.parametrize("fmt, found", [("R8G8B8A8_SRGB", ["normal-srgb"]), ("R8G8B8A8_UNORM", [])])
def test_a_normal_map_in_an_srgb_texel_format_is_the_srgb_finding(fmt, found, tmp_path, capfd):
    """The other way a normal map gets an sRGB encoding: a KTX2 file whose texel format is an ``*_SRGB`` one,
    which the GPU decodes through the sRGB curve on sampling (KTX 2.0 and Vulkan, VK_FORMAT_R8G8B8A8_SRGB)."""
    from bakery.io.ktx2 import write_ktx2

    rgba = np.concatenate([encode(cap_normals()), np.ones((128, 128, 1))], axis=-1).astype(np.float32)
    path = write_ktx2(tmp_path / "n.ktx2", [rgba], fmt, cubemap=False)
    rc, (report,), _ = inspect_json(capfd, [path], ["--kind", "normal"])
    assert [f["code"] for f in report["findings"]] == found, report
    assert rc == (1 if found else 0)
