"""The demo: generate the sample scene into a folder and run every capability on it.

Each capability adds one step function to :data:`STEPS`; a step takes the inputs dict and the output folder
and returns a list of ``(description, path)`` pairs for the summary.
"""

from __future__ import annotations

import json
import os
from collections.abc import Callable
from pathlib import Path

from bakery.errors import BakeryError

Step = Callable[[dict[str, Path], Path], list[tuple[str, Path]]]


def _step_info(inputs: dict[str, Path], out: Path) -> list[tuple[str, Path]]:
    from bakery.info import describe

    report = out / "info.txt"
    lines = []
    for p in inputs.values():
        lines += describe(p) + [""]
    from bakery.io.atomic import atomic_output

    with atomic_output(report) as tmp:
        tmp.write_text("\n".join(lines), encoding="utf-8")
    return [("what each input holds (bakery info)", report)]


def _step_normals(inputs: dict[str, Path], out: Path) -> list[tuple[str, Path]]:
    """Normal map from the demo height, its Y-down twin, its mip chain, the height integrated back, and a
    detail normal map blended over it."""
    from bakery.bakes import run_bake
    from bakery.bakes.normals import BlendParams, FixParams, HeightParams, MipsParams, NormalParams
    from bakery.io.images import write_image
    from bakery.samples import stone_grain_height

    folder = out / "normals"
    (folder / "mips").mkdir(parents=True, exist_ok=True)
    height = inputs["height"]
    normal = folder / "paving_normal.png"
    run_bake("normal", {"height": height}, normal, NormalParams())
    down = folder / "paving_normal_ydown.png"
    run_bake("normal-fix", {"normal": normal}, down, FixParams(flip_y=True))
    mips = folder / "mips" / "paving_normal.png"
    written = run_bake("normal-mips", {"normal": normal}, mips, MipsParams())
    back = folder / "paving_height_from_normal.png"
    run_bake("height", {"normal": normal}, back, HeightParams())
    from bakery.io.images import read_image

    size = read_image(height).pixels.shape[0]
    grain = write_image(folder / "grain_height.png", stone_grain_height(size), bits="16")
    grain_n = folder / "grain_normal.png"
    run_bake("normal", {"height": grain}, grain_n, NormalParams(strength=2.0, blur=0.5))
    blended = folder / "paving_normal_with_grain.png"
    run_bake("blend", {"base": normal, "detail": grain_n}, blended, BlendParams(method="reoriented"))
    return [("normal map (Y up, OpenGL/glTF)", normal), ("normal map (Y down, DirectX-style)", down),
            (f"normal-map mip chain ({sum(1 for p in written if '.length.' not in p.name) - 1} levels) "
             "and averaged-normal lengths", mips),
            ("height integrated back from the normal map (Frankot-Chellappa)", back),
            ("detail normal map from a stone-grain height", grain_n),
            ("detail blended over the paving normals (reoriented normal mapping)", blended)]


def _step_roughness(inputs: dict[str, Path], out: Path) -> list[tuple[str, Path]]:
    """The exponent map and its 8-bit gloss copy (exponent = 2 * 1500^g) -> perceptual roughness by both rules;
    then the paving normal map and that roughness -> an anti-aliased roughness mip chain."""
    from bakery.bakes import run_bake
    from bakery.bakes.normals import NormalParams
    from bakery.bakes.roughness import AntialiasParams, RoughnessParams
    from bakery.samples import GLOSS_EXPONENT_RANGE

    folder = out / "roughness"
    (folder / "antialias").mkdir(parents=True, exist_ok=True)
    peak = run_bake("roughness", {"specular": inputs["exponent"]}, folder / "paving_roughness.png",
                    RoughnessParams(bits="16"))[0]
    width = run_bake("roughness", {"specular": inputs["exponent"]}, folder / "paving_roughness_width.png",
                     RoughnessParams(bits="16", rule="width"))[0]
    gloss = run_bake("roughness", {"specular": inputs["gloss"]}, folder / "paving_roughness_from_gloss.png",
                     RoughnessParams(source="gloss-exp", exponent_range=GLOSS_EXPONENT_RANGE))[0]
    normal = run_bake("normal", {"height": inputs["height"]}, folder / "antialias" / "paving_normal.png",
                      NormalParams())[0]
    written = run_bake("antialias", {"normal": normal, "roughness": peak},
                       folder / "antialias" / "paving_roughness.png", AntialiasParams())
    levels = [p for p in written if p.suffix == ".png"]
    ktx2 = run_bake("antialias", {"normal": normal, "roughness": peak},
                    folder / "antialias" / "paving_roughness.ktx2", AntialiasParams())[0]
    return [("roughness from the exponent map, peak rule (bakery roughness)", peak),
            ("roughness from the exponent map, width rule (bakery roughness --rule width)", width),
            ("roughness from the 8-bit gloss map, exponent = 2 * 1500^g (bakery roughness --source gloss-exp)", gloss),
            (f"anti-aliased roughness mip chain, {len(levels)} levels (bakery antialias)", levels[0]),
            ("the same chain in one KTX 2.0 file", ktx2)]


def _step_derived(inputs: dict[str, Path], out: Path) -> list[tuple[str, Path]]:
    """Ambient occlusion and cavity of the paving stones (the relief of the demo's normal map), and the mip
    chain of a procedural leaf card with and without alpha-coverage preservation."""
    from bakery.bakes import run_bake
    from bakery.bakes.relief import ColorMipsParams, CurvatureParams, OcclusionParams
    from bakery.io.images import image_size, write_image
    from bakery.relief.examples import leaf_card

    folder = out / "derived"
    for sub in ("plain", "coverage"):
        (folder / "leaf_mips" / sub).mkdir(parents=True, exist_ok=True)
    height = inputs["height"]
    ao = run_bake("occlusion", {"height": height}, folder / "paving_occlusion.png",
                  OcclusionParams(bent_normals=True))
    cavity = run_bake("curvature", {"height": height}, folder / "paving_cavity.png",
                      CurvatureParams(map="cavity", scale=1.0))[0]
    size = image_size(height)[0]
    card = write_image(out / "inputs" / "leaf_card.png", leaf_card(size), bits="8")
    plain = run_bake("mips", {"color": card}, folder / "leaf_mips" / "plain" / "leaf_card.png",
                     ColorMipsParams(alpha_cutoff=0.75))
    kept = run_bake("mips", {"color": card}, folder / "leaf_mips" / "coverage" / "leaf_card.png",
                    ColorMipsParams(coverage=True, alpha_cutoff=0.75))
    ktx2 = run_bake("mips", {"color": card}, folder / "leaf_mips" / "leaf_card.ktx2",
                    ColorMipsParams(coverage=True, alpha_cutoff=0.75))[0]
    return [("ambient occlusion of the paving stones, same relief as the normal map (bakery occlusion)", ao[0]),
            ("bent normals beside it (bakery occlusion --bent-normals)", ao[1]),
            ("cavity mask, 1 open, darker in the joints (bakery curvature --map cavity)", cavity),
            ("leaf card, 8-bit sRGB with alpha (procedural)", card),
            (f"leaf-card mips, {len(plain) - 1} levels, plain (bakery mips)", plain[0]),
            ("leaf-card mips keeping alpha-tested coverage at 0.75 (bakery mips --coverage)", kept[0]),
            ("the coverage-kept chain in one KTX 2.0 file (rgba8-srgb)", ktx2)]


def _step_envmaps(inputs: dict[str, Path], out: Path) -> list[tuple[str, Path]]:
    """Environment maps: the sky panorama as a KTX2 cubemap with mips, a cross, a preview, and its diffuse
    irradiance (SH9 JSON + a small cubemap)."""
    import warnings

    from bakery.bakes import run_bake
    from bakery.bakes.envmaps import ConvertParams, DiffuseParams
    from bakery.errors import BakeryWarning
    from bakery.io.images import read_image

    sky = inputs["sky"]
    folder = out / "envmaps"
    folder.mkdir(exist_ok=True)
    face = max(8, read_image(sky).pixels.shape[1] // 4)
    made = []
    run_bake("env-convert", {"environment": sky}, folder / "sky.ktx2", ConvertParams(face_size=face))
    made.append(("sky as a KTX2 cubemap, RGBA16F with mips (bakery env convert)", folder / "sky.ktx2"))
    run_bake("env-convert", {"environment": sky}, folder / "sky_cross.exr", ConvertParams(output_layout="cross-wide",
                                                                                     face_size=face))
    made.append(("sky as a horizontal cross, half-float EXR", folder / "sky_cross.exr"))
    with warnings.catch_warnings():  # the sun is far brighter than an 8-bit preview holds: expected
        warnings.simplefilter("ignore", BakeryWarning)
        run_bake("env-convert", {"environment": sky}, folder / "sky_cross_preview.png",
                 ConvertParams(output_layout="cross-wide", face_size=face, exposure=-1.0))
    made.append(("sky cross preview, 8-bit sRGB, -1 EV (the sun clips)", folder / "sky_cross_preview.png"))
    run_bake("env-diffuse", {"environment": sky}, folder / "sky_diffuse.json", DiffuseParams(method="exact"))
    made.append(("diffuse irradiance: SH9 coefficients (bakery env diffuse)", folder / "sky_diffuse.json"))
    made.append(("diffuse irradiance cubemap (E/pi), 32 x 32 per face, exact cosine convolution (the sky holds a "
                 "sun)", folder / "sky_diffuse.ktx2"))
    return made


def specular_levels_sheet(levels: list, *, roughness: list | None = None, exposure: float = 1.0):
    """A contact sheet of a prefiltered chain for viewing: each level as a horizontal cross, enlarged to the
    size of level 0 (nearest texel), side by side in two rows, each captioned with its level and (when
    ``roughness`` gives one per level) its roughness; tone-mapped x/(1 + x) after ``exposure`` and sRGB-encoded
    by the writer. Returns float32 (H, W, 3) in [0, 1]."""
    import cv2
    import numpy as np

    from bakery.io.layouts import assemble

    n0 = levels[0].shape[1]
    tiles = []
    for lv in levels:
        f = np.asarray(lv, dtype=np.float32)[..., :3] * exposure
        rep = n0 // f.shape[1]
        f = np.repeat(np.repeat(f, rep, axis=1), rep, axis=2)
        cross = assemble(f, "cross-wide")
        cross = np.ascontiguousarray(cross / (1 + cross))
        k = len(tiles)
        text = f"level {k}" + (f"  r = {roughness[k]:.2f}" if roughness is not None else "")
        band = np.zeros((20, cross.shape[1]), np.uint8)  # OpenCV draws text into 8-bit images only
        cv2.putText(band, text, (4, 14), cv2.FONT_HERSHEY_SIMPLEX, 0.42, 255, 1, cv2.LINE_AA)
        band = np.repeat(band[..., None] / np.float32(255), 3, axis=2)
        tiles.append(np.concatenate([band, cross], axis=0))
    h, w, _ = tiles[0].shape
    pad = max(2, n0 // 16)
    cols = (len(tiles) + 1) // 2
    sheet = np.ones((2 * h + 3 * pad, cols * w + (cols + 1) * pad, 3), np.float32)
    for i, t in enumerate(tiles):
        r, c = divmod(i, cols)
        y, x = pad + r * (h + pad), pad + c * (w + pad)
        sheet[y:y + h, x:x + w] = t
    return sheet


def _step_specular(inputs: dict[str, Path], out: Path) -> list[tuple[str, Path]]:
    """Prefiltered specular chain of the demo sky (bakery env specular), a picture of its levels, and the
    split-sum BRDF table (bakery env lut)."""
    from bakery.bakes import run_bake
    from bakery.bakes.glossy import LutParams, SpecularParams
    from bakery.io.images import write_image
    from bakery.io.ktx2 import read_ktx2
    from bakery.io.manifest import manifest_path
    from bakery.preview.picture import picture_manifest

    folder = out / "envlight"
    folder.mkdir(parents=True, exist_ok=True)
    size = 64
    spec = folder / "sky_specular.ktx2"
    run_bake("env-specular", {"environment": inputs["sky"]}, spec, SpecularParams(face_size=size))
    sheet = folder / "sky_specular_levels.png"
    rough = json.loads(manifest_path(spec).read_text())["roughness_per_level"]["roughness"]
    write_image(sheet, specular_levels_sheet(read_ktx2(spec).levels, roughness=rough), color="srgb")
    picture_manifest(sheet, made_by="demo", inputs={"specular": spec}, params={"roughness": rough})
    lut = folder / "brdf_lut.png"
    run_bake("env-lut", {}, lut, LutParams(size=128))
    return [("specular prefiltered chain, GGX, roughness linear in mip (bakery env specular)", spec),
            ("picture of the specular levels (tone-mapped crosses)", sheet),
            ("split-sum BRDF table, 16-bit PNG: R = scale, G = bias of F0 (bakery env lut)", lut)]


def _step_batch(inputs: dict[str, Path], out: Path) -> list[tuple[str, Path]]:
    """The sample library (a dozen invented materials) baked by its batch recipe, then re-run: the second run
    finds nothing to do. ``batch.txt`` holds the plan of the first run and both summaries."""
    from bakery.batch import run
    from bakery.batch.report import format_plan
    from bakery.io.atomic import atomic_output
    from bakery.samples import library, write_library_recipe

    lib = out / "library"
    library(lib, size=64, sky_width=128)
    recipe = write_library_recipe(lib)
    lines = format_plan(run(recipe, dry_run=True))
    first = run(recipe)
    second = run(recipe)
    lines += ["", first.summary(), second.summary()]
    text = out / "batch.txt"
    with atomic_output(text) as tmp:
        tmp.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return [("batch recipe over a procedural texture library", recipe),
            (f"batch outputs ({first.ran} jobs; the re-run skipped {second.skipped})", out / "library-baked"),
            ("batch plan and summaries", text), ("batch report (JSON)", first.path)]


def _step_preview(inputs: dict[str, Path], out: Path) -> list[tuple[str, Path]]:
    """Lit previews of the paving stones, baked from their sources in memory, under the demo sky."""
    from bakery.io.animation import write_animation
    from bakery.io.images import write_image
    from bakery.preview.inputs import load_material
    from bakery.preview.lighting import lighting_from_file
    from bakery.preview.picture import picture_manifest
    from bakery.preview.render import preview_image, turntable_frames

    folder = out / "preview"
    folder.mkdir(exist_ok=True)
    material = load_material(height=inputs["height"], exponent=inputs["exponent"], base_color=(0.45, 0.41, 0.36))
    light = lighting_from_file(inputs["sky"])
    size = int(min(384, max(96, 1.5 * material.normals.shape[1])))  # follows the demo's map size
    img, _ = preview_image(material, light, size=size, env_rotation=85.0)
    shown = {"height": inputs["height"], "exponent": inputs["exponent"], "environment": inputs["sky"]}
    still = write_image(folder / "paving.png", img, bits="8")
    picture_manifest(still, made_by="preview", inputs=shown, params={"size": size, "rotation": 85.0})
    frames, _ = turntable_frames(material, light, 24, size=size // 2, env_rotation=85.0)
    spin = write_animation(folder / "paving_turntable.webp", frames, fps=12)
    picture_manifest(spin, made_by="preview", inputs=shown, params={"size": size // 2, "rotation": 85.0,
                                                                    "turntable": 24, "fps": 12})
    return [("the paving stones lit by the sky, ball and tile (bakery preview)", still),
            ("the ball turning under the sky (bakery preview --turntable 24)", spin)]


def _step_sheet(inputs: dict[str, Path], out: Path) -> list[tuple[str, Path]]:
    """A contact sheet of every map the demo made so far, preview pictures aside (keep this step last)."""
    from bakery.preview.sheet import collect_maps, make_sheet

    page = out / "sheet.html"
    previews = (out / "preview").resolve()
    maps = [(p, root) for p, root in collect_maps([out], page) if previews not in p.resolve().parents]
    make_sheet(maps, page, source="the demo", env=inputs["sky"], title="bakery demo")
    return [("every map with its preview and findings (bakery sheet)", page)]


#: Demo steps in order: (name, function). The contact sheet stays last: it shows what the others made.
def _step_engine(inputs: dict[str, Path], out: Path) -> list[tuple[str, Path]]:
    """Engine-ready KTX2: the paving normal map as BC5, its roughness as BC4, the sky's specular chain as BC6H
    (each with its quality report in the manifest); the sun taken out of the sky as a light."""
    from bakery.bakes import run_bake
    from bakery.bakes.envmaps import LightsParams
    from bakery.bakes.glossy import SpecularParams
    from bakery.bakes.normals import NormalParams
    from bakery.bakes.roughness import RoughnessParams

    folder = out / "engine"
    folder.mkdir(parents=True, exist_ok=True)
    normal = folder / "paving_normal.ktx2"
    run_bake("normal", {"height": inputs["height"]}, normal, NormalParams(ktx2_format="compressed", zstd=5))
    rough = folder / "paving_roughness.ktx2"
    run_bake("roughness", {"specular": inputs["exponent"]}, rough, RoughnessParams(ktx2_format="bc4"))
    spec = folder / "sky_specular.ktx2"
    run_bake("env-specular", {"environment": inputs["sky"]}, spec, SpecularParams(face_size=64, ktx2_format="bc6h"))
    lights = folder / "sky_sun.json"
    run_bake("env-lights", {"environment": inputs["sky"]}, lights, LightsParams())
    return [("normal map as a BC5 KTX2 mip chain, Zstandard (bakery normal --ktx2-format compressed)", normal),
            ("roughness as a BC4 KTX2 mip chain (bakery roughness --ktx2-format bc4)", rough),
            ("specular chain as BC6H (bakery env specular --ktx2-format bc6h)", spec),
            ("the sun as a directional light (bakery env lights)", lights),
            ("the sky without its sun", folder / "sky_sun.rest.exr")]


STEPS: list[tuple[str, Step]] = [("info", _step_info), ("normals", _step_normals), ("roughness", _step_roughness),
                                 ("derived", _step_derived), ("envmaps", _step_envmaps),
                                 ("specular", _step_specular), ("engine", _step_engine), ("batch", _step_batch),
                                 ("preview", _step_preview), ("sheet", _step_sheet)]


def run_demo(out: str | Path, *, size: int = 256, log: Callable[[str], None] = print) -> Path:
    """Write the demo inputs to ``out/inputs`` and each step's outputs under ``out``; return the summary."""
    from bakery.io.atomic import atomic_output
    from bakery.samples import write_samples

    out = Path(out)
    if out.exists() and not out.is_dir():
        raise BakeryError("demo output must be a folder", out)
    out.mkdir(parents=True, exist_ok=True)
    log(f"generating demo inputs ({size}x{size} maps) in {out / 'inputs'}")
    inputs = write_samples(out / "inputs", size=size, sky_width=max(64, 2 * size))
    made: list[tuple[str, Path]] = [(f"demo input: {k}", p) for k, p in inputs.items()]
    for name, step in STEPS:
        log(f"{name} ...")
        made += step(inputs, out)
    summary = out / "SUMMARY.md"
    lines = ["# bakery demo", "", "Scene: worn paving stones under an open sky (procedural, bakery.samples).", ""]
    lines += [f"- {desc}: `{Path(os.path.relpath(Path(p).absolute(), out.absolute())).as_posix()}`"
              for desc, p in made]
    with atomic_output(summary) as tmp:
        tmp.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return summary
