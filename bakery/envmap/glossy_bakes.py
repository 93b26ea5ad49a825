"""Bakes ``env-specular`` (prefiltered specular mip chain) and ``env-lut`` (split-sum BRDF table).

Both are registered in :mod:`bakery.bakes`, so ``bakery env specular`` / ``bakery env lut`` and a batch recipe
run the same code and write byte-identical outputs. Heavy libraries are imported inside functions only.
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from pathlib import Path

from bakery.bakes import Bake, bake_progress, params_to_dict, register
from bakery.errors import BakeryError

#: KTX2 formats offered for the specular chain (float formats only: radiance is HDR).
SPECULAR_FORMATS = ("rgba16f", "rgba32f", "rg11b10f", "rgb9e5")
#: Face names used in loose file names, in storage order +X, -X, +Y, -Y, +Z, -Z.
FACE_TAGS = ("px", "nx", "py", "ny", "pz", "nz")
#: KTX2 key/value entry holding the roughness of every level (JSON text).
KTX_ROUGHNESS_KEY = "bakery.roughness-per-level"


@dataclass(frozen=True)
class SpecularParams:
    """Parameters of ``env-specular``.

    Attributes
    ----------
    size : int
        Face size of level 0 (power of two).
    levels : int
        Number of mip levels; 0 = all, down to 1 x 1.
    lobe : str
        "ggx" or "blinn-phong".
    roughness : str
        "linear", "quadratic", or comma-separated roughness values, one per level, the first 0.
    quality : str
        "draft", "final" or "high".
    format : str
        KTX2 texel format: "rgba16f", "rgba32f", "rg11b10f" or "rgb9e5".
    loose : bool
        Also write each level's faces as OpenEXR files beside the KTX2 file.
    layout : str
        Layout of the input (see ``bakery env convert``); empty = detect from the file.
    """

    size: int = 256
    levels: int = 0
    lobe: str = "ggx"
    roughness: str = "linear"
    quality: str = "final"
    format: str = "rgba16f"
    loose: bool = False
    layout: str = ""


@dataclass(frozen=True)
class LutParams:
    """Parameters of ``env-lut``.

    Attributes
    ----------
    size : int
        Texels along each axis (n·v across, roughness down).
    roughness_grows : str
        "down" (first stored row is roughness 0) or "up".
    """

    size: int = 128
    roughness_grows: str = "down"


def parse_roughness(text: str) -> str | list[float]:
    """A mapping name, or a list of numbers from ``"0, 0.25, 0.5"``."""
    t = text.strip()
    if not any(ch.isdigit() for ch in t):
        return t
    try:
        return [float(v) for v in t.replace(";", ",").split(",") if v.strip()]
    except ValueError:
        raise BakeryError(f"roughness must be a mapping name (linear, quadratic) or numbers separated by "
                          f"commas; got {text!r}") from None


def check_specular_params(p: SpecularParams) -> None:
    """Refuse bad parameters before any work, with one-line messages."""
    from bakery.envmap.specular import MAPPINGS, PREFILTER_LOBES, QUALITY, level_roughness

    if p.size < 1 or p.size & (p.size - 1):
        raise BakeryError(f"--size must be a power of two (cube faces halve at every level); got {p.size}")
    if p.size > 4096:
        raise BakeryError(f"--size must be at most 4096; got {p.size}")
    full = p.size.bit_length()
    if p.levels < 0 or p.levels > full:
        raise BakeryError(f"a {p.size} x {p.size} chain has at most {full} levels; got --levels {p.levels}")
    if p.lobe not in PREFILTER_LOBES:
        raise BakeryError(f"--lobe must be one of {', '.join(PREFILTER_LOBES)}; got {p.lobe!r}")
    if p.quality not in QUALITY:
        raise BakeryError(f"--quality must be one of {', '.join(QUALITY)}; got {p.quality!r}")
    if p.format not in SPECULAR_FORMATS:
        raise BakeryError(f"--format must be one of {', '.join(SPECULAR_FORMATS)}; got {p.format!r}")
    rough = parse_roughness(p.roughness)
    if isinstance(rough, str) and rough not in MAPPINGS:
        raise BakeryError(f"--roughness must be one of {', '.join(MAPPINGS)} or a list of numbers; "
                          f"got {rough!r}")
    try:
        level_roughness(p.levels or full, rough)
    except ValueError as exc:
        raise BakeryError(f"--roughness: {exc}") from None


def read_source(path: Path, layout: str | None):
    """Read the environment in any layout (:func:`bakery.io.envfiles.read_environment`) as float32 RGB."""
    import numpy as np

    from bakery.io.envfiles import read_environment

    env = read_environment(path, layout=layout or None)
    px = env.pixels
    c = px.shape[-1]
    if c == 4:
        px = px[..., :3]
    elif c in (1, 2):
        px = np.repeat(px[..., :1], 3, axis=-1)
    if env.kind == "equirect" and px.shape[0] % 2:
        raise BakeryError(f"the panorama height must be even; got {px.shape[0]}", path)
    return np.ascontiguousarray(px, dtype=np.float32)


def _run_specular(inputs: dict[str, Path], output: Path, params: SpecularParams) -> list[Path]:
    import numpy as np

    from bakery.envmap.specular import level_roughness, prefilter_specular
    from bakery.io.images import write_image
    from bakery.io.ktx2 import get_format, write_ktx2
    from bakery.io.manifest import write_manifest

    if output.suffix.lower() != ".ktx2":
        raise BakeryError("output must end in .ktx2 (add --loose for OpenEXR files per level and face)",
                          output)
    check_specular_params(params)
    env = read_source(inputs["env"], params.layout)
    rough = parse_roughness(params.roughness)
    levels = params.levels or params.size.bit_length()
    r = level_roughness(levels, rough)
    res = prefilter_specular(env, params.size, levels=levels, roughness=r.tolist(), lobe=params.lobe,
                             quality=params.quality, progress=bake_progress)
    mapping = rough if isinstance(rough, str) else "list"
    table = {
        "lobe": params.lobe,
        "mapping": mapping,
        "roughness": [round(float(v), 6) for v in res.roughness],
        "lobe_parameter": [None if not np.isfinite(v) else round(float(v), 6) for v in res.params],
        "lobe_parameter_name": "alpha" if params.lobe == "ggx" else "exponent",
        "level_from_roughness": _level_formula(mapping, levels),
    }
    fmt = get_format(params.format)
    kv = {KTX_ROUGHNESS_KEY: json.dumps(table, sort_keys=True, separators=(",", ":"), ensure_ascii=False)}
    written = [write_ktx2(output, res.levels, fmt, cubemap=True, key_values=kv)]
    if params.loose:
        for k, lv in enumerate(res.levels):
            for f, tag in enumerate(FACE_TAGS):
                p = output.with_name(f"{output.stem}_m{k}_{tag}.exr")
                written.append(write_image(p, lv[f], depth="f32" if params.format == "rgba32f" else "f16"))
    extra = {
        "roughness_per_level": table,
        "method": {"quality": params.quality, "sh_band_limit_per_level": res.band_limits,
                   "bright_texels_summed_exactly": res.bright_texels},
        "conventions": {"faces": "+X,-X,+Y,-Y,+Z,-Z (Vulkan face selection table; bakery z = -table z)",
                        "quantity": "P(n) = ∫L w / ∫w, w = max(n·l,0) D(normalize(n+l)), v = r = n",
                        "roughness": "perceptual r; GGX alpha = r^2"},
    }
    written.append(write_manifest(output, bake="env-specular", inputs=inputs, params=params_to_dict(params),
                                  outputs=written, extra=extra))
    return written


def _level_formula(mapping: str, levels: int) -> str:
    n = levels - 1
    if mapping == "linear":
        return f"level = r * {n}"
    if mapping == "quadratic":
        return f"level = sqrt(r) * {n}"
    return "interpolate the roughness list"


def _run_lut(inputs: dict[str, Path], output: Path, params: LutParams) -> list[Path]:
    import numpy as np

    from bakery.envmap.brdf_lut import brdf_lut
    from bakery.io.images import write_image
    from bakery.io.ktx2 import write_ktx2
    from bakery.io.manifest import write_manifest

    if not 2 <= params.size <= 4096:
        raise BakeryError(f"--size must be between 2 and 4096; got {params.size}")
    if params.roughness_grows not in ("down", "up"):
        raise BakeryError(f"--roughness-grows must be 'down' or 'up'; got {params.roughness_grows!r}")
    suffix = output.suffix.lower()
    if suffix not in (".png", ".exr", ".ktx2"):
        raise BakeryError("output must end in .png (16-bit), .exr or .ktx2 (R16G16_SFLOAT)", output)
    lut = brdf_lut(params.size, roughness_grows=params.roughness_grows)
    if suffix == ".png":
        rgb = np.concatenate([lut, np.zeros(lut.shape[:2] + (1,), np.float32)], axis=2)
        path = write_image(output, rgb, depth="u16")
    elif suffix == ".exr":
        path = write_image(output, lut, depth="f32")
    else:
        path = write_ktx2(output, [lut], "R16G16_SFLOAT", cubemap=False,
                          key_values={"bakery.brdf-lut": _lut_layout(params)})
    extra = {"layout": json.loads(_lut_layout(params))}
    man = write_manifest(output, bake="env-lut", inputs={}, params=params_to_dict(params), outputs=[path],
                         extra=extra)
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


register(Bake("env-specular", "Specular prefiltered cubemap mip chain (split sum) from an HDR panorama",
              ("env",), SpecularParams, _run_specular))
register(Bake("env-lut", "Split-sum BRDF lookup table (scale and bias of F0 over n·v and roughness)",
              (), LutParams, _run_lut))
