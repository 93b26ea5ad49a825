"""The preview's lighting, baked in memory from an HDR panorama by the environment-map bakes.

A thin layer: the specular prefiltered chain comes from :func:`bakery.envmap.specular.prefilter_specular`, the
split-sum table from :func:`bakery.envmap.brdf_lut.brdf_lut`, the SH9 radiance coefficients from
:func:`bakery.envmap.irradiance.project_sh` (Ramamoorthi & Hanrahan 2001); :class:`~bakery.preview.shading.Lighting`
holds them.

The chain is made with fewer levels than a full mip chain (face 128², six levels, perceptual roughness linear
in the level index, r = 0, 0.2, ... 1, smallest face 4², for panoramas 1024 wide or more): a 1² or 2² face
shows its six faces as flat patches on a rough ball, and the preview does not need them.
"""

from __future__ import annotations

import functools
import math
import os
from pathlib import Path

import numpy as np

from bakery.errors import BakeryError

#: Face size of level 0, number of levels and table size of the lighting made for previews.
PREVIEW_FACE = 128
PREVIEW_LEVELS = 6
PREVIEW_LUT = 64
#: Panoramas are shrunk to this width before baking the preview lighting.
MAX_WIDTH = 1024


def lighting_from_panorama(panorama: np.ndarray, *, face: int = PREVIEW_FACE, levels: int = PREVIEW_LEVELS,
                           lut_size: int = PREVIEW_LUT, quality: str = "draft"):
    """Bake the preview lighting of an equirect HDR panorama ``(H, 2H, 3)`` float32 in memory.

    Panoramas wider than :data:`MAX_WIDTH` are first shrunk to it by area averaging (OpenCV ``INTER_AREA``;
    energy is kept up to the small change of texel solid angle within each averaged block); the face size is
    at most ``face`` and at most an eighth of the panorama's width, and the chain has at most ``levels``
    levels, perceptual roughness linear in the level index from 0 to 1.
    """
    from bakery.bakes import bake_threads
    from bakery.envmap.irradiance import project_sh
    from bakery.envmap.specular import prefilter_specular
    from bakery.preview.shading import Lighting

    pano = np.asarray(panorama, dtype=np.float32)
    if pano.ndim != 3 or pano.shape[2] < 3 or pano.shape[1] != 2 * pano.shape[0]:
        raise BakeryError(f"the environment must be an equirectangular RGB panorama (width = 2 x height); got "
                          f"shape {pano.shape}")
    if not np.all(np.isfinite(pano[..., :3])) or float(pano[..., :3].min()) < 0:
        raise BakeryError("the environment holds NaN, Inf or negative radiance")
    pano = np.ascontiguousarray(pano[..., :3])
    if pano.shape[0] % 2:
        raise BakeryError(f"the panorama's height must be even; got {pano.shape[0]}")
    if pano.shape[1] > MAX_WIDTH:  # area average: the preview's faces need no more detail
        import cv2

        w = MAX_WIDTH
        pano = cv2.resize(pano, (w, w // 2), interpolation=cv2.INTER_AREA)
    face = int(min(face, max(8, 2 ** int(math.log2(pano.shape[1] / 8)))))
    levels = min(levels, face.bit_length())
    chain = prefilter_specular(pano, face, levels=levels, roughness="linear", quality=quality)
    return Lighting(tuple(lv[..., :3] for lv in chain.levels), chain.roughness, _table(lut_size),
                    project_sh(pano, "equirect", threads=bake_threads()))


def as_panorama(pixels: np.ndarray) -> np.ndarray | None:
    """An environment's pixels as an equirect panorama for :func:`lighting_from_panorama`, or None when they
    are neither a panorama nor a cube map.

    A panorama ``(H, 2H, C)`` stays as it is; a cube map, as six faces ``(6, N, N, C)`` or as one image holding
    them in a layout of :mod:`bakery.io.layouts` (a horizontal or vertical cross, a row or a stack, told by
    the aspect ratio as the ``env`` commands tell it, :func:`bakery.io.layouts.detect_layout`), is resampled to
    a panorama 4N wide, at least 64 (:func:`bakery.envmap.resample.resample`).
    """
    from bakery.io.layouts import CUBE_IMAGE_LAYOUTS, detect_layout, split

    px = np.asarray(pixels, dtype=np.float32)
    if px.ndim == 3:
        try:
            layout = detect_layout(px.shape[1], px.shape[0])
        except BakeryError:
            return None
        if layout not in CUBE_IMAGE_LAYOUTS:
            return px
        px = split(px, layout)
    if px.ndim != 4 or px.shape[0] != 6 or px.shape[3] < 3:
        return None
    from bakery.envmap.resample import resample

    return resample(px[..., :3], "cube", "equirect", max(64, 4 * px.shape[1]))


@functools.lru_cache(maxsize=2)
def _table(size: int) -> np.ndarray:
    """The split-sum table does not depend on the environment: made once per process."""
    from bakery.envmap.brdf_lut import brdf_lut

    return brdf_lut(size)


def lighting_from_file(path: str | os.PathLike, *, max_pixels: int | None = None):
    """Read an HDR environment image (.hdr, .exr, or any readable image): an equirect panorama, or a cube map
    as a cross, row or stack (:func:`as_panorama`), and bake its preview lighting."""
    from bakery.io.images import read_image

    path = Path(path)
    img = read_image(path, max_pixels=max_pixels)
    h, w = img.pixels.shape[:2]
    pano = as_panorama(img.pixels) if img.channels >= 3 else None
    if pano is None:
        raise BakeryError(f"the environment must be an RGB equirectangular panorama (width = 2 x height) or a cube "
                          f"map as a cross, row or stack (4:3, 3:4, 6:1, 1:6); this one is {w}x{h} with "
                          f"{img.channels} channel(s)", path)
    if not img.is_float:
        import warnings

        from bakery.errors import BakeryWarning

        warnings.warn(f"{path}: the environment is a low-dynamic-range image; highlights will be weak",
                      BakeryWarning, stacklevel=2)
    try:
        return lighting_from_panorama(pano)
    except BakeryError as exc:
        raise BakeryError(str(exc), path) from None


#: KTX2 key/value entries written by the environment bakes (``bakery env specular``, ``bakery env lut``).
ROUGHNESS_KEY = "bakery.roughness-per-level"
LUT_KEY = "bakery.brdf-lut"


def _kv_json(value: bytes, key: str, path: Path) -> dict:
    import json

    try:
        return json.loads(value.rstrip(b"\0").decode("utf-8"))
    except (UnicodeDecodeError, json.JSONDecodeError):
        raise BakeryError(f"key/value entry {key!r} is not valid JSON", path) from None


def read_specular_chain(path: str | os.PathLike) -> tuple[list[np.ndarray], np.ndarray]:
    """The levels (each ``(6, N, N, 3)``) and per-level perceptual roughness of a prefiltered KTX2 cube chain
    as ``bakery env specular`` writes it (roughness in the key ``bakery.roughness-per-level``)."""
    import warnings

    from bakery.errors import BakeryWarning
    from bakery.io.envfiles import read_ktx2_limited

    path = Path(path)
    tex = read_ktx2_limited(path)
    if not tex.cubemap:
        raise BakeryError("is not a cubemap: a prefiltered specular chain has six faces per level", path)
    if ROUGHNESS_KEY not in tex.key_values:
        raise BakeryError(f"does not say the roughness of its levels (no {ROUGHNESS_KEY!r} entry); bake the chain "
                          "with bakery env specular", path)
    table = _kv_json(tex.key_values[ROUGHNESS_KEY], ROUGHNESS_KEY, path)
    rough = _numbers(table.get("roughness") if isinstance(table, dict) else None, 1)
    if rough is None or rough.shape != (len(tex.levels),):
        raise BakeryError(f"its {ROUGHNESS_KEY!r} entry must hold \"roughness\": a list of {len(tex.levels)} "
                          "numbers, one per level", path)
    if not (np.all(np.isfinite(rough)) and np.all((rough >= 0) & (rough <= 1))):
        raise BakeryError(f"its {ROUGHNESS_KEY!r} entry lists roughness values outside [0, 1] (or NaN/Inf)", path)
    rough = rough.astype(np.float32)
    if table.get("lobe", "ggx") != "ggx":
        warnings.warn(f"{path}: the chain was prefiltered with the {table.get('lobe')} lobe; the preview's BRDF "
                      "table is GGX, so highlights will not match exactly", BakeryWarning, stacklevel=2)
    levels = []
    for lv in tex.levels:
        if lv.shape[-1] < 3:
            lv = np.repeat(lv[..., :1], 3, axis=-1)
        levels.append(np.ascontiguousarray(lv[..., :3], dtype=np.float32))
    return levels, rough


def _numbers(value, ndim: int) -> np.ndarray | None:
    """A JSON value as a float64 array of ``ndim`` dimensions, or None when it is not one (text, ragged rows,
    null, a mapping)."""
    if not isinstance(value, list):
        return None
    if any(isinstance(v, bool | str | dict) or v is None for v in np.ravel(np.asarray(value, dtype=object))):
        return None
    try:
        a = np.asarray(value, dtype=np.float64)
    except (TypeError, ValueError):
        return None
    return a if a.ndim == ndim else None


def read_radiance_sh(path: str | os.PathLike) -> np.ndarray:
    """The radiance SH9 coefficients ``(9, 3)`` from the JSON that ``bakery env diffuse`` writes
    (``radiance_sh``, bakery's axes, Ramamoorthi & Hanrahan 2001 basis)."""
    import json

    path = Path(path)
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise BakeryError("file not found", path) from None
    except (UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise BakeryError(f"is not valid JSON ({exc.__class__.__name__})", path) from None
    sh = _numbers(data.get("radiance_sh") if isinstance(data, dict) else None, 2)
    if sh is None or sh.ndim != 2 or sh.shape[0] != 9 or sh.shape[1] not in (1, 3) or not np.all(np.isfinite(sh)):
        raise BakeryError("has no 'radiance_sh' entry of 9 rows (1 or 3 channels); bake it with "
                          "bakery env diffuse", path)
    if sh.shape[1] == 1:
        sh = np.repeat(sh, 3, axis=1)
    return sh.astype(np.float32)


def read_brdf_table(path: str | os.PathLike) -> np.ndarray:
    """A split-sum table as ``bakery env lut`` writes it (16-bit PNG, EXR or KTX2), as ``(H, W, 2)`` with
    roughness growing down the rows. The orientation comes from the KTX2 key ``bakery.brdf-lut`` or, for PNG and
    EXR, from the manifest beside the file (``NAME.ext.bakery.json``); without either, rows are taken to grow down."""
    import json

    path = Path(path)
    layout = None
    if path.suffix.lower() == ".ktx2":
        from bakery.io.envfiles import read_ktx2_limited

        tex = read_ktx2_limited(path)
        if tex.cubemap or len(tex.levels[0].shape) != 3:
            raise BakeryError("is not a 2D texture: a BRDF table is one (H, W, 2) image", path)
        table = tex.levels[0]
        if LUT_KEY in tex.key_values:
            layout = _kv_json(tex.key_values[LUT_KEY], LUT_KEY, path)
    else:
        from bakery.io.images import read_image

        table = read_image(path).pixels
        manifest = path.with_name(path.name + ".bakery.json")
        if manifest.is_file():
            try:
                layout = json.loads(manifest.read_text(encoding="utf-8")).get("layout")
            except (UnicodeDecodeError, json.JSONDecodeError, AttributeError):
                layout = None
    if table.shape[-1] < 2:
        raise BakeryError(f"has {table.shape[-1]} channel(s): a BRDF table holds A and B in two", path)
    if isinstance(layout, dict) and "grows up" in str(layout.get("rows", "")):
        table = table[::-1]
    return np.ascontiguousarray(table[..., :2], dtype=np.float32)


def lighting_from_baked(specular: str | os.PathLike, diffuse: str | os.PathLike,
                        lut: str | os.PathLike | None = None):
    """Lighting from baked files: a prefiltered KTX2 cube chain, the diffuse JSON with radiance SH9
    coefficients, and optionally a BRDF table (default: made in memory, 64²)."""
    from bakery.preview.shading import Lighting

    levels, rough = read_specular_chain(specular)
    sh = read_radiance_sh(diffuse)
    table = read_brdf_table(lut) if lut is not None else _table(PREVIEW_LUT)
    try:
        return Lighting(tuple(levels), rough, table, sh)
    except BakeryError as exc:
        raise BakeryError(str(exc), specular) from None


@functools.lru_cache(maxsize=1)
def default_lighting():
    """The lighting of the built-in procedural sky (:func:`bakery.samples.sky_panorama`, 1024 x 512, its sun 35°
    high over the default camera's right shoulder), baked once per process."""
    from bakery.samples import sky_panorama

    return lighting_from_panorama(sky_panorama(1024, sun_azimuth_deg=145.0))


def read_light_file(path: str | os.PathLike) -> tuple[tuple, Path | None]:
    """The lights of a file written by ``bakery env lights`` as
    :class:`~bakery.preview.shading.DirectionalLight` objects, and the environment without them named in the
    file (``environment_without_lights``, beside it) when that file exists."""
    import json

    from bakery.bakes.envmaps import read_lights
    from bakery.preview.shading import DirectionalLight

    path = Path(path)
    lights = tuple(DirectionalLight(tuple(lt.direction), tuple(lt.irradiance)[:3]) for lt in read_lights(path))
    rest = None
    try:
        name = json.loads(path.read_text(encoding="utf-8")).get("environment_without_lights")
    except (OSError, ValueError, AttributeError):
        name = None
    if isinstance(name, str) and name and (path.parent / name).is_file():
        rest = path.parent / name
    return lights, rest


def _same_environment(env: Path, lights_file: Path) -> bool:
    """True when ``env`` is the very environment the lights were found in (the manifest of the lights file
    records its digest), so the light would be counted twice."""
    from bakery.io.manifest import file_digest, manifest_for

    manifest = manifest_for(lights_file)
    entry = (manifest or {}).get("inputs", {}).get("environment")
    return isinstance(entry, dict) and entry.get("digest") == file_digest(env)


def choose_lighting(env: Path | None, *, specular: Path | None = None, diffuse: Path | None = None,
                    lut: Path | None = None, lights: Path | None = None):
    """The lighting of a preview: baked files (``specular`` + ``diffuse`` [+ ``lut``]), a panorama ``env``, or
    the built-in sky; plus the directional lights of a ``bakery env lights`` file. With ``lights`` and neither
    ``env`` nor baked files, the environment is the one without the lights that the file names."""
    import dataclasses
    import warnings

    from bakery.errors import BakeryWarning

    found = ()
    if lights is not None:
        found, rest = read_light_file(lights)
        if env is None and specular is None and diffuse is None:
            if rest is None:
                raise BakeryError("names no environment without its lights beside it; give --env (the "
                                  "environment the lights were taken out of, NAME.rest.exr)", lights)
            env = rest
        elif env is not None and env.is_file() and _same_environment(env, lights):
            warnings.warn(f"{env}: the lights of {lights.name} were found in this environment and are still in "
                          f"it, so they count twice; use the environment without them", BakeryWarning,
                          stacklevel=2)
    if specular is not None or diffuse is not None:
        if env is not None:
            raise BakeryError("give either a panorama (--env) or baked lighting (--specular, --diffuse), not both")
        if specular is None or diffuse is None:
            raise BakeryError("baked lighting needs both --specular (the KTX2 chain) and --diffuse (the SH JSON)")
        base = lighting_from_baked(specular, diffuse, lut)
    elif lut is not None:
        raise BakeryError("--lut goes with baked lighting (--specular, --diffuse)")
    elif env is None:
        base = default_lighting()
    else:
        base = lighting_from_file(env)
    return dataclasses.replace(base, lights=found) if found else base
