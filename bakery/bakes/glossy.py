"""Bakes ``env-specular`` (prefiltered specular mip chain) and ``env-lut`` (split-sum BRDF table).

Both are registered in :mod:`bakery.bakes`, so ``bakery env specular`` / ``bakery env lut`` and a batch recipe
run the same code and write byte-identical outputs. Heavy libraries are imported inside functions only.
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from pathlib import Path
from typing import Literal

from bakery.bakes import Bake, Progress, level_path, params_to_dict, register, within
from bakery.bakes.envmaps import INPUT_LAYOUT, ImageLayout
from bakery.bakes.params import Params, effort_param, ktx2_format_param, loose_param, param, parse_numbers, zstd_param
from bakery.errors import BakeryError

#: KTX2 formats offered for the specular chain (float formats only: radiance is HDR).
SPECULAR_FORMATS = ("rgba16f", "rgba32f", "b10g11r11-ufloat", "e5b9g9r9-ufloat", "bc6h", "compressed")
#: KTX2 key/value entry holding the roughness of every level (JSON text).
KTX_ROUGHNESS_KEY = "bakery.roughness-per-level"


def _parse_level_roughness(text: str) -> str | tuple[float, ...]:
    t = text.strip()
    return t if not any(ch.isdigit() for ch in t) else parse_numbers(t)


@dataclass(frozen=True)
class SpecularParams(Params):
    """Parameters of ``env-specular``."""

    face_size: int = param(256, "Face edge of level 0 in texels (a power of two).", unit="texels", low=1,
                           high=4096)
    levels: int = param(0, "Mip levels; 0 = all, down to 1 x 1.", low=0, high=13)
    lobe: Literal["ggx", "blinn-phong"] = param("ggx", "Lobe: ggx or blinn-phong (normalized, exponent per "
                                                "level).")
    level_roughness: str | tuple[float, ...] = param(
        "linear", "Roughness per level: linear (r = k/(levels-1)), quadratic (r = (k/(levels-1))^2), or a list "
        "of values such as 0,0.2,0.45,0.7,1.", parse=_parse_level_roughness, metavar="MAPPING|LIST")
    quality: Literal["draft", "final", "high"] = param("final", "draft, final or high (errors in "
                                                       "docs/envlight.md).")
    ktx2_format: str = ktx2_format_param("rgba16f", "Texel format of the KTX2 chain: rgba16f, rgba32f, "
                                         "b10g11r11-ufloat, e5b9g9r9-ufloat, bc6h or compressed (= bc6h).")
    effort: Literal["fast", "balanced", "best"] = effort_param()
    zstd: int | None = zstd_param()
    loose: bool = loose_param("every level's six faces as OpenEXR files (NAME.mip00.x+.exr ... NAME.mip08.z-.exr)")
    input_layout: ImageLayout | None = INPUT_LAYOUT

    def check(self) -> None:
        check_specular_params(self)


@dataclass(frozen=True)
class LutParams(Params):
    """Parameters of ``env-lut``."""

    size: int = param(128, "Texels along each axis (n.v across, roughness down).", unit="texels", low=2,
                      high=4096)
    roughness_grows: Literal["down", "up"] = param("down", "down: the first stored row is roughness 0; up: the "
                                                   "last row is.")
    ktx2_format: str = ktx2_format_param("rg16f", "Texel format of a .ktx2 table: rg16f, rgba32f, bc5 or "
                                         "compressed (= bc5).")
    effort: Literal["fast", "balanced", "best"] = effort_param()
    zstd: int | None = zstd_param()


def check_specular_params(p: SpecularParams) -> None:
    """Refuse bad parameters before any work, with one-line messages."""
    from bakery.envmap.levels import MAPPING_NAMES, roughness_values

    if p.face_size & (p.face_size - 1):
        raise BakeryError(f"face-size must be a power of two (cube faces halve at every level); got {p.face_size}")
    full = p.face_size.bit_length()
    if p.levels > full:
        raise BakeryError(f"a {p.face_size} x {p.face_size} chain has at most {full} levels; got levels {p.levels}")
    if p.ktx2_format not in SPECULAR_FORMATS:
        raise BakeryError(f"ktx2-format must be one of {', '.join(SPECULAR_FORMATS)}; got {p.ktx2_format!r}")
    rough = p.level_roughness
    if isinstance(rough, str) and rough not in MAPPING_NAMES:
        raise BakeryError(f"level-roughness must be one of {', '.join(MAPPING_NAMES)} or a list of numbers; "
                          f"got {rough!r}")
    try:
        roughness_values(p.levels or full, rough if isinstance(rough, str) else list(rough))
    except (ValueError, BakeryError) as exc:
        raise BakeryError(f"level-roughness: {exc}") from None


def read_source(path: Path, layout: str | None, progress: Progress | None = None):
    """Read the environment in any layout (:func:`bakery.io.envfiles.read_environment`) as float32 RGB."""
    import numpy as np

    from bakery.io.envfiles import read_environment

    env = read_environment(path, layout=layout or None, progress=progress)
    px = env.pixels
    c = px.shape[-1]
    if c == 4:
        px = px[..., :3]
    elif c in (1, 2):
        px = np.repeat(px[..., :1], 3, axis=-1)
    if env.kind == "equirect" and px.shape[0] % 2:
        raise BakeryError(f"the panorama height must be even; got {px.shape[0]}", path)
    return np.ascontiguousarray(px, dtype=np.float32)


def specular_outputs(inputs: dict[str, Path], output: Path, params: SpecularParams) -> list[Path]:
    from bakery.io.manifest import manifest_path

    if output.suffix.lower() != ".ktx2":
        raise BakeryError("output must end in .ktx2 (add --loose for OpenEXR files per level and face)",
                          output)
    from bakery.io.layouts import FACE_TOKENS

    files = [output]
    if params.loose:
        levels = params.levels or params.face_size.bit_length()
        files += [level_path(output.with_suffix(".exr"), k, face=tag) for k in range(levels) for tag in FACE_TOKENS]
    return files + [manifest_path(output)]


#: Where each step of an ``env-specular`` bake starts on the progress scale (common practice: shares of the time
#: at the default quality from a 4096 x 2048 panorama).
SPECULAR_STEPS = {"prefilter": 0.15, "writing": 0.93, "manifest": 0.99}


def _run_specular(inputs: dict[str, Path], output: Path, params: SpecularParams, progress: Progress) -> list[Path]:
    import numpy as np

    from bakery.envmap.specular import level_roughness, prefilter_specular
    from bakery.io.images import write_image
    from bakery.io.layouts import FACE_TOKENS
    from bakery.io.manifest import write_manifest

    if output.suffix.lower() != ".ktx2":
        raise BakeryError("output must end in .ktx2 (add --loose for OpenEXR files per level and face)",
                          output)
    progress(0.0, "reading")
    env = read_source(inputs["environment"], params.input_layout,
                      within(progress, 0.0, SPECULAR_STEPS["prefilter"]))
    rough = params.level_roughness if isinstance(params.level_roughness, str) else list(params.level_roughness)
    levels = params.levels or params.face_size.bit_length()
    r = level_roughness(levels, rough)
    lights = []
    if inputs.get("lights") is not None:
        from bakery.bakes.envmaps import read_lights

        lights = read_lights(inputs["lights"])
    res = prefilter_specular(env, params.face_size, levels=levels, roughness=r.tolist(), lobe=params.lobe,
                             quality=params.quality,
                             progress=within(progress, SPECULAR_STEPS["prefilter"], SPECULAR_STEPS["writing"]))
    if lights:  # directional lights taken out of the environment by env-lights go back in, per level
        from bakery.envmap.sunlight import add_light_to_level

        for light in lights:
            res.levels[:] = [add_light_to_level(lv, light, float(rk), lobe=params.lobe)
                             for lv, rk in zip(res.levels, res.roughness, strict=True)]
    progress(SPECULAR_STEPS["writing"], "writing")
    mapping = rough if isinstance(rough, str) else "list"
    table = {
        "lobe": params.lobe,
        "mapping": mapping,
        "roughness": [round(float(v), 6) for v in res.roughness],
        "lobe_parameter": [None if not np.isfinite(v) else round(float(v), 6) for v in res.params],
        "lobe_parameter_name": "alpha" if params.lobe == "ggx" else "exponent",
        "level_from_roughness": _level_formula(mapping, levels),
    }
    from bakery.bakes import bake_threads
    from bakery.io.texcompress import resolve_format, write_texture

    fmt = resolve_format(params.ktx2_format, "hdr")
    from bakery.bakes.envmaps import KTX_KEYS

    kv = {**KTX_KEYS, KTX_ROUGHNESS_KEY: json.dumps(table, sort_keys=True, separators=(",", ":"), ensure_ascii=False)}
    loose_share = 0.5 if params.loose else 0.0  # the loose faces: as long as the KTX2 file (common practice)
    end = SPECULAR_STEPS["manifest"]
    split = end - (end - SPECULAR_STEPS["writing"]) * loose_share
    _, quality = write_texture(output, res.levels, fmt, kind="hdr", cubemap=True, key_values=kv,
                               effort=params.effort, zstd=params.zstd, threads=bake_threads(),
                               progress=within(progress, SPECULAR_STEPS["writing"], split))
    written = [output]
    if params.loose:
        texels = np.cumsum([0] + [lv[f].size for lv in res.levels for f in range(6)], dtype=np.float64)
        texels /= texels[-1]
        for k, lv in enumerate(res.levels):
            for f, tag in enumerate(FACE_TOKENS):
                p = level_path(output.with_suffix(".exr"), k, face=tag)
                written.append(write_image(p, lv[f], bits="float" if params.ktx2_format == "rgba32f" else "half",
                                           progress=within(progress, split + (end - split) * texels[6 * k + f],
                                                           split + (end - split) * texels[6 * k + f + 1])))
    extra = {
        "roughness_per_level": table,
        "method": {"quality": params.quality, "sh_band_limit_per_level": res.band_limits,
                   "exact_window_degrees_per_level": [round(float(v), 6) for v in res.window_degrees],
                   "lights_added": len(lights),
                   "bright_texels_summed_exactly": res.bright_texels},
        "conventions": {"faces": "+X,-X,+Y,-Y,+Z,-Z (Vulkan face selection table; bakery z = -table z)",
                        "quantity": "P(n) = ∫L w / ∫w, w = max(n·l,0) D(normalize(n+l)), v = r = n",
                        "roughness": "perceptual r; GGX alpha = r^2"},
    }
    if quality:
        extra["quality"] = {output.name: quality}
    from bakery.bakes.envmaps import manifest_inputs
    from bakery.io.envfiles import face_paths, is_face_pattern

    src = inputs["environment"]
    files = face_paths(src) if is_face_pattern(src) else [src]
    recorded = manifest_inputs(files, "environment")
    if inputs.get("lights") is not None:
        recorded["lights"] = inputs["lights"]
    progress(SPECULAR_STEPS["manifest"], "manifest")
    written.append(write_manifest(output, bake="env-specular", inputs=recorded,
                                  params=params_to_dict(params),
                                  outputs=written, extra=extra))
    progress(1.0, "done")
    return written


def _level_formula(mapping: str, levels: int) -> str:
    n = levels - 1
    if mapping == "linear":
        return f"level = r * {n}"
    if mapping == "quadratic":
        return f"level = sqrt(r) * {n}"
    return "interpolate the roughness list"


def lut_outputs(inputs: dict[str, Path], output: Path, params: LutParams) -> list[Path]:
    from bakery.io.manifest import manifest_path

    if output.suffix.lower() not in (".png", ".exr", ".ktx2"):
        raise BakeryError("output must end in .png (16-bit), .exr or .ktx2 (R16G16_SFLOAT)", output)
    return [output, manifest_path(output)]


def _run_lut(inputs: dict[str, Path], output: Path, params: LutParams, progress: Progress) -> list[Path]:
    import numpy as np

    from bakery.envmap.brdf_lut import brdf_lut
    from bakery.io.images import write_image
    from bakery.io.manifest import write_manifest

    suffix = output.suffix.lower()
    if suffix not in (".png", ".exr", ".ktx2"):
        raise BakeryError("output must end in .png (16-bit), .exr or .ktx2 (R16G16_SFLOAT)", output)
    progress(0.0, "table")
    lut = brdf_lut(params.size, roughness_grows=params.roughness_grows, progress=within(progress, 0.0, 0.9))
    writing = within(progress, 0.9, 0.99)
    if suffix == ".png":  # png / exr; ktx2 below
        rgb = np.concatenate([lut, np.zeros(lut.shape[:2] + (1,), np.float32)], axis=2)
        path = write_image(output, rgb, bits="16", progress=writing)
    elif suffix == ".exr":
        path = write_image(output, lut, bits="float", progress=writing)
    quality = None
    if suffix == ".ktx2":
        from bakery.io.texcompress import resolve_format, write_texture

        fmt = resolve_format(params.ktx2_format, "data", 2)
        path, quality = write_texture(output, [lut], fmt, kind="data", effort=params.effort, zstd=params.zstd,
                                      key_values={"bakery.brdf-lut": _lut_layout(params)}, progress=writing)
    extra = {"layout": json.loads(_lut_layout(params))}
    if quality:
        extra["quality"] = {output.name: quality}
    man = write_manifest(output, bake="env-lut", inputs={}, params=params_to_dict(params), outputs=[path],
                         extra=extra)
    progress(1.0, "done")
    return [path, man]


def _lut_layout(params: LutParams) -> str:
    rows = "roughness grows down the rows (first row r = 0.5/H)" if params.roughness_grows == "down" else \
        "roughness grows up the rows (last row r = 0.5/H)"
    return json.dumps({
        "channels": {"R": "A (scale of F0)", "G": "B (bias)"},
        "columns": "n·v = (j + 0.5)/W",
        "rows": rows,
        "model": "GGX, height-correlated Smith G2 (Heitz 2014), Schlick Fresnel; alpha = r^2",
        "use": "specular = prefiltered * (F0 * A + B)",
    }, sort_keys=True, separators=(",", ":"), ensure_ascii=False)


register(Bake("env-specular", "specular prefiltered cubemap mip chain (split sum) from an HDR environment",
              ("environment", "lights?"), SpecularParams, specular_outputs, _run_specular, output_suffix=".ktx2"))
register(Bake("env-lut", "split-sum BRDF lookup table (scale and bias of F0 over n·v and roughness)",
              (), LutParams, lut_outputs, _run_lut))
