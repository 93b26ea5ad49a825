"""Environment-map bakes for the registry (:mod:`bakery.bakes`): ``env-convert`` and ``env-diffuse``.

Each bake reads with :mod:`bakery.io.envfiles`, calls the pure functions of :mod:`bakery.envmap`, writes its
outputs atomically and a JSON manifest. The CLI (``bakery env ...``) and the batch runner both run them
through :func:`bakery.bakes.run_bake`, so a command line and a recipe give identical outputs.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path
from typing import Literal

from bakery.bakes import Bake, bake_threads, params_to_dict, register
from bakery.errors import BakeryError

Layout = Literal["equirect", "hcross", "vcross", "strip", "column", "faces", "ktx2"]
Filter = Literal["auto", "area", "bilinear"]
Depth = Literal["u8", "u16", "f16", "f32"]

CONVENTIONS = {
    "directions": "right-handed, +Y up",
    "equirect": "centre of the image looks along -Z, top row +Y, +X a quarter width right of the centre",
    "cube_faces": "+X, -X, +Y, -Y, +Z, -Z; Vulkan cube map face selection table; table z = -(bakery z)",
    "values": "linear radiance",
}


#: Key/value entries bakery adds to KTX2 environment maps (besides KTXorientation and KTXwriter).
KTX_KEYS = {"bakery.cubemap": "faces +X,-X,+Y,-Y,+Z,-Z by the Vulkan face selection table; right-handed "
                              "+Y-up directions map to it with z negated, so face +Z looks toward -Z (the "
                              "panorama centre)"}


@dataclass(frozen=True)
class ConvertParams:
    """Parameters of ``env-convert``.

    layout_in: force the layout of a single input image (default: from its aspect ratio).
    layout: layout of a single output image (default: the input's single-image layout, else hcross); an
    output pattern holding {face} writes six files, a .ktx2 output writes a cubemap.
    size: output face edge in texels (default: the input face size, or panorama width / 4).
    width: output panorama width (default: the input width, or 4 x the face size).
    rotate: degrees about the vertical axis; positive moves the panorama content to the right.
    exposure: exposure change in EV (values x 2^EV).
    filter: "auto" (area-weighted when shrinking, bilinear otherwise), "area" or "bilinear".
    depth: image sample type (default follows the input; float -> half-float EXR).
    ktx_format: KTX2 format name or alias (default R16G16B16A16_SFLOAT).
    mips: write the mip chain into KTX2 outputs.
    repair: set NaN/Inf and negative input samples to 0 (with a count) instead of refusing the input.
    """

    layout_in: Layout | None = None
    layout: Layout | None = None
    size: int | None = None
    width: int | None = None
    rotate: float = 0.0
    exposure: float = 0.0
    filter: Filter = "auto"
    depth: Depth | None = None
    ktx_format: str | None = None
    mips: bool = True
    repair: bool = False

    def __post_init__(self) -> None:
        if self.size is not None and not 1 <= self.size <= 16384:
            raise BakeryError(f"size must be 1..16384; got {self.size}")
        if self.width is not None and (not 2 <= self.width <= 32768 or self.width % 2):
            raise BakeryError(f"width must be even and 2..32768; got {self.width}")
        if not math.isfinite(self.rotate) or not math.isfinite(self.exposure) or abs(self.exposure) > 64:
            raise BakeryError("rotate and exposure must be finite numbers (exposure within +-64 EV)")


def manifest_target(output: Path) -> Path:
    """The file whose manifest describes a bake: a face pattern's {face}/{index} becomes 'cube'."""
    text = str(output).replace("{face}", "cube").replace("{index}", "cube")
    return Path(text)


def _input_files(env_paths: list[Path], role: str) -> dict[str, Path]:
    if len(env_paths) == 1:
        return {role: env_paths[0]}
    from bakery.envmap.layouts import FACE_TOKENS

    return {f"{role}:{tok}": p for tok, p in zip(FACE_TOKENS, env_paths, strict=True)}


def output_kind(output: Path, layout: str | None, input_layout: str) -> tuple[str, str | None]:
    """("cube" | "equirect", layout for write_environment) of an output path."""
    from bakery.io.envfiles import layout_of_path

    pl = layout_of_path(output)
    if pl == "faces":
        if layout not in (None, "faces"):
            raise BakeryError(f"an output pattern with {{face}} writes six faces, not {layout!r}", output)
        return "cube", None
    if pl == "ktx2":
        if layout in (None, "ktx2"):
            return "cube", None
        if layout == "equirect":
            return "equirect", "equirect"
        raise BakeryError(f"a .ktx2 output holds a cubemap or a panorama (--layout equirect), not {layout!r}",
                          output)
    if layout in ("faces", "ktx2"):
        raise BakeryError(f"layout {layout!r} needs an output path with {{face}} or .ktx2", output)
    lay = layout or (input_layout if input_layout not in ("faces", "ktx2") else "hcross")
    return ("equirect" if lay == "equirect" else "cube"), lay


def run_convert(inputs: dict[str, Path], output: Path, params: ConvertParams) -> list[Path]:
    import numpy as np

    from bakery.envmap.sample import cube_mip_chain, equirect_mip_chain, resample
    from bakery.io.envfiles import read_environment, write_environment
    from bakery.io.manifest import write_manifest

    src = inputs["source"]
    env = read_environment(src, layout=params.layout_in, repair=params.repair)
    kind, lay = output_kind(output, params.layout, env.layout)
    if kind == "cube" and params.width is not None:
        raise BakeryError("--width sets a panorama's width; this output is a cubemap: use --size", output)
    if kind == "equirect" and params.size is not None:
        raise BakeryError("--size sets a cube face; this output is a panorama: use --width", output)
    if env.kind == "cube":
        n_in = env.pixels.shape[1]
        w_in = 4 * n_in
    else:
        w_in = env.pixels.shape[1]
        n_in = max(1, w_in // 4)
    size = params.size or n_in
    width = params.width or w_in
    target = size if kind == "cube" else width
    pixels = resample(env.pixels, env.kind, kind, target, rotation_deg=params.rotate, filter=params.filter)
    if params.exposure:  # colour channels only, never alpha
        pixels = pixels.copy()
        nc = 3 if pixels.shape[-1] >= 3 else 1
        pixels[..., :nc] *= np.float32(2.0 ** params.exposure)
    mips = None
    if output.suffix.lower() == ".ktx2" and params.mips:
        mips = (cube_mip_chain(pixels) if kind == "cube" else equirect_mip_chain(pixels))[1:]
    written = write_environment(output, pixels, kind, layout=lay, depth=params.depth,
                                source_depth=env.depth, ktx_format=params.ktx_format, mips=mips,
                                key_values=KTX_KEYS if output.suffix.lower() == ".ktx2" else None)
    man = write_manifest(manifest_target(output), bake="env-convert",
                         inputs=_input_files(env.paths, "source"),
                         params=params_to_dict(params), outputs=written,
                         extra={"conventions": CONVENTIONS, "output": {
                             "kind": kind, "layout": lay or ("ktx2" if output.suffix.lower() == ".ktx2"
                                                             else "faces"),
                             "size": int(target), "levels": 1 + len(mips or [])}})
    return written + [man]


register(Bake("env-convert", "convert an environment map between panorama, cube layouts and KTX2",
              ("source",), ConvertParams, run_convert))


Method = Literal["sh", "exact"]
Window = Literal["none", "hann"]
Units = Literal["reflected", "irradiance"]


@dataclass(frozen=True)
class DiffuseParams:
    """Parameters of ``env-diffuse``.

    size: face edge of the irradiance cubemap (default 32).
    method: "sh" (cubemap from the 9 SH coefficients) or "exact" (cosine convolution of the environment).
    window: "none" or "hann" (SH band weights 1, 0.75, 0.25 against ringing; the JSON keeps both).
    units: cubemap values: "reflected" = E/pi (radiance reflected by a white Lambertian surface) or
    "irradiance" = E.
    ktx_format: KTX2 format of the cubemap.
    repair: set NaN/Inf and negative input samples to 0 (with a count) instead of refusing the input.
    """

    size: int = 32
    method: Method = "sh"
    window: Window = "none"
    units: Units = "reflected"
    ktx_format: str = "rgba16f"
    repair: bool = False

    def __post_init__(self) -> None:
        if not 1 <= self.size <= 1024:
            raise BakeryError(f"size must be 1..1024; got {self.size}")


def diffuse_outputs(output: Path) -> tuple[Path, Path]:
    """The cubemap outputs beside the JSON: ``<stem>.ktx2`` and the pattern ``<stem>_{face}.exr``."""
    stem = output.with_suffix("")
    return stem.with_name(stem.name + ".ktx2"), stem.with_name(stem.name + "_{face}.exr")


def run_diffuse(inputs: dict[str, Path], output: Path, params: DiffuseParams) -> list[Path]:
    import numpy as np

    from bakery import sphere
    from bakery.envmap import irradiance as irr
    from bakery.io.atomic import check_distinct
    from bakery.io.envfiles import face_paths, read_environment, write_environment
    from bakery.io.manifest import write_json, write_manifest

    if output.suffix.lower() != ".json":
        raise BakeryError("the diffuse output must be a .json file (the cubemap is written beside it)",
                          output)
    ktx_path, faces_pattern = diffuse_outputs(output)
    src = inputs["source"]
    env = read_environment(src, repair=params.repair)
    check_distinct([ktx_path, *face_paths(faces_pattern)], env.paths)
    px = env.pixels[..., :3] if env.pixels.shape[-1] >= 3 else env.pixels
    radiance = irr.project_sh(px, env.kind, threads=bake_threads())
    plain = irr.irradiance_coefficients(radiance)
    windowed = irr.irradiance_coefficients(radiance, window=params.window)
    if params.method == "sh":
        cube = irr.irradiance_cube_sh(windowed, params.size)
    else:
        cube = irr.irradiance_exact(px, env.kind, sphere.cube_directions(params.size, dtype=np.float64)
                                    ).astype(np.float32)
    if params.units == "reflected":
        cube = cube / np.float32(np.pi)
    negative = int(np.count_nonzero(cube < 0))
    cube = np.maximum(cube, np.float32(0))  # SH9 can ring below zero behind strong lights
    names = ["L00", "L1-1", "L10", "L11", "L2-2", "L2-1", "L20", "L21", "L22"]
    data = {
        "basis": "real orthonormal spherical harmonics, l <= 2 (Ramamoorthi & Hanrahan 2001), evaluated on "
                 "bakery directions (x, y, z): right-handed, +Y up; Y00 = 0.282095, Y1-1 = 0.488603 y, "
                 "Y10 = 0.488603 z, Y11 = 0.488603 x, Y2-2 = 1.092548 xy, Y2-1 = 1.092548 yz, "
                 "Y20 = 0.315392 (3z^2 - 1), Y21 = 1.092548 xz, Y22 = 0.546274 (x^2 - y^2)",
        "order": names,
        "channels": ["R", "G", "B"][: px.shape[-1]] if px.shape[-1] > 1 else ["Y"],
        "radiance_sh": radiance.tolist(),
        "irradiance_sh": windowed.tolist(),
        "reflected_sh": (windowed / np.pi).tolist(),
        "irradiance_sh_unwindowed": plain.tolist(),
        "window": params.window,
        "window_weights": irr.window_weights(params.window).tolist(),
        "usage": "E(n) = sum_i irradiance_sh[i] * Y_i(n) is the irradiance on a surface with normal n; "
                 "reflected_sh = irradiance_sh / pi gives the radiance a white Lambertian surface reflects "
                 "(multiply by albedo)",
        "cubemap": {"size": params.size, "method": params.method,
                    "units": "E/pi (reflected radiance)" if params.units == "reflected" else "E (irradiance)",
                    "clamped_negative_texels": negative},
        "conventions": CONVENTIONS,
    }
    json_path = write_json(output, data)
    written = [json_path]
    written += write_environment(ktx_path, cube, "cube", ktx_format=params.ktx_format,
                                 key_values={**KTX_KEYS, "bakery.units": data["cubemap"]["units"]})
    written += write_environment(faces_pattern, cube, "cube", depth="f16")
    man = write_manifest(output, bake="env-diffuse", inputs=_input_files(env.paths, "source"),
                         params=params_to_dict(params), outputs=written, extra={"conventions": CONVENTIONS})
    return written + [man]


register(Bake("env-diffuse", "diffuse irradiance: SH9 coefficients (JSON) and a small irradiance cubemap",
              ("source",), DiffuseParams, run_diffuse))
