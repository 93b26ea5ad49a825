"""Environment-map bakes for the registry (:mod:`bakery.bakes`): ``env-convert`` and ``env-diffuse``.

Each bake reads with :mod:`bakery.io.envfiles`, calls the pure functions of :mod:`bakery.envmap`, writes its
outputs atomically and a JSON manifest. The CLI (``bakery env ...``) and the batch runner both run them
through :func:`bakery.bakes.run_bake`, so a command line and a recipe give identical outputs.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from pathlib import Path
from typing import Literal

from bakery.bakes import Bake, Progress, bake_threads, params_to_dict, register, within
from bakery.bakes.params import Bits, Params, bits_param, effort_param, ktx2_format_param, param, zstd_param
from bakery.errors import BakeryError, BakeryWarning

Layout = Literal["equirect", "cross-wide", "cross-tall", "row", "stack", "files", "ktx2"]
ImageLayout = Literal["equirect", "cross-wide", "cross-tall", "row", "stack"]
Filter = Literal["auto", "area", "bilinear"]
Effort = Literal["fast", "balanced", "best"]

#: The help of every input layout option (env convert, diffuse, specular).
INPUT_LAYOUT = param(None, "Layout of a single input image: equirect (2:1), cross-wide (4:3), cross-tall (3:4), "
                     "row (6:1), stack (1:6). Default: from its aspect ratio.")
REPAIR = param(False, "Set NaN/Inf and negative input values to 0 (counted) instead of refusing the input.")

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
class ConvertParams(Params):
    """Parameters of ``env-convert``. An output pattern holding {face} writes six files, a .ktx2 output a
    cubemap (or a panorama with ``output_layout = "equirect"``), any other image the output layout."""

    input_layout: ImageLayout | None = INPUT_LAYOUT
    output_layout: Layout | None = param(
        None, "Layout of the output: equirect, cross-wide, cross-tall, row, stack; files and ktx2 follow from "
        "the output path ({face} pattern, .ktx2). Default: the input's single-image layout, else cross-wide; "
        "equirect with a .ktx2 output writes a 2D panorama.")
    face_size: int | None = param(None, "Output cube face edge in texels. Default: the input face size, or "
                                  "panorama width / 4.", unit="texels", low=1, high=16384)
    width: int | None = param(None, "Output panorama width in texels, even. Default: the input width, or 4 x "
                              "the face size.", unit="texels", low=2, high=32768)
    rotation: float = param(0.0, "Turn the environment about the vertical axis; positive moves the panorama "
                            "content to the right.", unit="degrees", low=-3600.0, high=3600.0)
    exposure: float = param(0.0, "Exposure change (values x 2^EV).", unit="EV", low=-64.0, high=64.0)
    filter: Filter = param("auto", "auto: area-weighted (energy-keeping) when shrinking, bilinear otherwise.")
    bits: Bits | None = bits_param("Image samples: 8, 16 (PNG, TIFF), half, float (EXR; float also TIFF). "
                                   "Default follows the input (float input -> half-float EXR).")
    ktx2_format: str | None = ktx2_format_param(None, "Texel format of a .ktx2 output: rgba16f (default), "
                                                "rgba32f, b10g11r11-ufloat, e5b9g9r9-ufloat, bc6h or compressed "
                                                "(= bc6h), rgba8-srgb ...")
    effort: Effort = effort_param()
    zstd: int | None = zstd_param()
    mips: bool = param(True, "Write the mip chain into .ktx2 outputs.")
    repair: bool = REPAIR

    def check(self) -> None:
        if self.width is not None and self.width % 2:
            raise BakeryError(f"width must be even; got {self.width}")
        if self.ktx2_format is not None:
            from bakery.io.ktx2_formats import get_format

            get_format(self.ktx2_format) if self.ktx2_format.lower() != "compressed" else None


def manifest_inputs(env_paths: list[Path], role: str) -> dict[str, Path]:
    """The manifest's inputs for the files an environment was read from: one role, or one per face."""
    if len(env_paths) == 1:
        return {role: env_paths[0]}
    from bakery.io.layouts import FACE_TOKENS

    return {f"{role}:{tok}": p for tok, p in zip(FACE_TOKENS, env_paths, strict=True)}


def environment_files(path: Path) -> list[Path]:
    """The files one environment output path stands for: six for a {face} pattern, else itself."""
    from bakery.io.envfiles import face_paths, is_face_pattern

    return face_paths(path) if is_face_pattern(path) else [path]


def clamp_for_ktx2(output: Path, levels: list, ktx2_format: str | None) -> list:
    """Colour above 1 (or below 0) cannot be stored in a normalised KTX2 format (``rgba8``, ``rgba8-srgb``,
    ``rgba16``, ``bc7-srgb`` ...): such levels are clamped here, with one warning that counts the clamped
    colour samples and gives their fraction. HDR formats (the default rgba16f) pass unchanged."""
    import numpy as np

    from bakery.io.texcompress import resolve_format

    if ktx2_format is None or output.suffix.lower() != ".ktx2":
        return levels
    fmt = resolve_format(ktx2_format, "hdr")
    if fmt.is_float:
        return levels
    nc = min(3, levels[0].shape[-1])
    over = sum(int(np.count_nonzero((lv[..., :nc] > 1) | (lv[..., :nc] < 0))) for lv in levels)
    if not over:
        return levels
    total = sum(lv[..., :nc].size for lv in levels)
    warnings.warn(f"{output}: {over} of {total} colour samples ({100 * over / total:.3g} %) lie outside [0, 1] "
                  f"and were clamped for {fmt.short_name}; use rgba16f, b10g11r11-ufloat or bc6h to keep HDR "
                  "values, or lower --exposure", BakeryWarning, stacklevel=2)
    out = []
    for lv in levels:
        lv = np.array(lv, dtype=np.float32)
        np.clip(lv[..., :nc], 0.0, 1.0, out=lv[..., :nc])
        out.append(lv)
    return out


def convert_outputs(inputs: dict[str, Path], output: Path, params: ConvertParams) -> list[Path]:
    from bakery.io.manifest import manifest_path

    return environment_files(output) + [manifest_path(output)]


def output_kind(output: Path, layout: str | None, input_layout: str) -> tuple[str, str | None]:
    """("cube" | "equirect", layout for write_environment) of an output path."""
    from bakery.io.envfiles import layout_of_path

    pl = layout_of_path(output)
    if pl == "files":
        if layout not in (None, "files"):
            raise BakeryError(f"an output pattern with {{face}} writes six faces, not {layout!r}", output)
        return "cube", None
    if pl == "ktx2":
        if layout in (None, "ktx2"):
            return "cube", None
        if layout == "equirect":
            return "equirect", "equirect"
        raise BakeryError(f"a .ktx2 output holds a cubemap or a panorama (--output-layout equirect), not {layout!r}",
                          output)
    if layout in ("files", "ktx2"):
        raise BakeryError(f"layout {layout!r} needs an output path with {{face}} or .ktx2", output)
    lay = layout or (input_layout if input_layout not in ("files", "ktx2") else "cross-wide")
    return ("equirect" if lay == "equirect" else "cube"), lay


def run_convert(inputs: dict[str, Path], output: Path, params: ConvertParams, progress: Progress) -> list[Path]:
    import numpy as np

    from bakery.envmap.resample import cube_mip_chain, equirect_mip_chain, resample
    from bakery.io.envfiles import read_environment, write_environment
    from bakery.io.manifest import write_manifest

    src = inputs["environment"]
    progress(0.0, "reading")
    env = read_environment(src, layout=params.input_layout, repair=params.repair, progress=within(progress, 0, 0.1))
    kind, lay = output_kind(output, params.output_layout, env.layout)
    if kind == "cube" and params.width is not None:
        raise BakeryError("--width sets a panorama's width; this output is a cubemap: use --face-size", output)
    if kind == "equirect" and params.face_size is not None:
        raise BakeryError("--face-size sets a cube face; this output is a panorama: use --width", output)
    if env.kind == "cube":
        n_in = env.pixels.shape[1]
        w_in = 4 * n_in
    else:
        w_in = env.pixels.shape[1]
        n_in = max(1, w_in // 4)
    size = params.face_size or n_in
    width = params.width or w_in
    target = size if kind == "cube" else width
    progress(0.1, "resampling")
    pixels = resample(env.pixels, env.kind, kind, target, rotation_deg=params.rotation, filter=params.filter,
                      progress=lambda f: progress(0.1 + 0.7 * f, "resampling"))
    progress(0.8, "mips" if output.suffix.lower() == ".ktx2" and params.mips else "writing")
    if params.exposure:  # colour channels only, never alpha
        pixels = pixels.copy()
        nc = 3 if pixels.shape[-1] >= 3 else 1
        pixels[..., :nc] *= np.float32(2.0 ** params.exposure)
    mips = None
    if output.suffix.lower() == ".ktx2" and params.mips:
        chain = cube_mip_chain if kind == "cube" else equirect_mip_chain
        mips = chain(pixels, progress=within(progress, 0.8, 0.83))[1:]
        progress(0.83, "writing")
    if output.suffix.lower() == ".ktx2":
        pixels, *rest = clamp_for_ktx2(output, [pixels] + list(mips or []), params.ktx2_format)
        mips = rest if mips is not None else None
    quality: dict = {}
    written = write_environment(output, pixels, kind, layout=lay, bits=params.bits,
                                source_bits=env.bits, ktx_format=params.ktx2_format, mips=mips,
                                effort=params.effort, zstd=params.zstd, threads=bake_threads(), quality=quality,
                                key_values=KTX_KEYS if output.suffix.lower() == ".ktx2" else None,
                                progress=within(progress, 0.83, 0.98))
    man = write_manifest(output, bake="env-convert",
                         inputs=manifest_inputs(env.paths, "environment"),
                         params=params_to_dict(params), outputs=written,
                         extra={"conventions": CONVENTIONS, "output": {
                             "kind": kind, "layout": lay or ("ktx2" if output.suffix.lower() == ".ktx2"
                                                             else "files"),
                             "size": int(target), "levels": 1 + len(mips or [])},
                             **({"quality": quality} if quality else {})})
    progress(1.0, "done")
    return written + [man]


register(Bake("env-convert", "convert an environment map between panorama, cube layouts and KTX2",
              ("environment",), ConvertParams, convert_outputs, run_convert, output_suffix=".exr"))


Method = Literal["sh", "exact"]
Window = Literal["none", "hann"]
Units = Literal["reflected", "irradiance"]


@dataclass(frozen=True)
class DiffuseParams(Params):
    """Parameters of ``env-diffuse``: SH9 coefficients (JSON) and an irradiance cubemap beside them."""

    face_size: int = param(32, "Face edge of the irradiance cubemap.", unit="texels", low=1, high=1024)
    method: Method = param("sh", "Cubemap from the 9 SH coefficients (sh) or from the exact cosine convolution "
                           "(exact: right for sharp lights such as a sun).")
    window: Window = param("none", "Window the SH coefficients against ringing (hann: weights 1, 0.75, 0.25 "
                           "for l = 0, 1, 2; Blackman & Tukey 1958). The JSON keeps both.")
    units: Units = param("reflected", "Cubemap values: reflected = E/pi, the radiance a white Lambertian "
                         "surface reflects; irradiance = E.")
    ktx2_format: str = ktx2_format_param("rgba16f", "Texel format of the irradiance cubemap (.ktx2): rgba16f, "
                                         "rgba32f, b10g11r11-ufloat, e5b9g9r9-ufloat, bc6h or compressed (= bc6h).")
    effort: Effort = effort_param()
    zstd: int | None = zstd_param()
    input_layout: ImageLayout | None = INPUT_LAYOUT
    repair: bool = REPAIR

    def check(self) -> None:
        from bakery.io.ktx2_formats import get_format

        if self.ktx2_format.lower() != "compressed":
            get_format(self.ktx2_format)


def diffuse_outputs(output: Path) -> tuple[Path, Path]:
    """The cubemap outputs beside the JSON: ``NAME.ktx2`` and the pattern ``NAME.{face}.exr``."""
    return output.with_suffix(".ktx2"), output.with_name(output.stem + ".{face}.exr")


def diffuse_files(inputs: dict[str, Path], output: Path, params: DiffuseParams) -> list[Path]:
    from bakery.io.envfiles import face_paths
    from bakery.io.manifest import manifest_path

    if output.suffix.lower() != ".json":
        raise BakeryError("the diffuse output must be a .json file (the cubemap is written beside it)",
                          output)
    ktx_path, faces_pattern = diffuse_outputs(output)
    return [output, ktx_path, *face_paths(faces_pattern), manifest_path(output)]


#: The expected worst SH9 error above which ``env-diffuse --method sh`` warns (common practice: SH9 irradiance
#: is called accurate to about 1 % on average, Ramamoorthi & Hanrahan 2001; 5 % at the worst texel is chosen here).
SH9_WARN = 0.05


def run_diffuse(inputs: dict[str, Path], output: Path, params: DiffuseParams, progress: Progress) -> list[Path]:
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
    src = inputs["environment"]
    progress(0.0, "reading")
    env = read_environment(src, layout=params.input_layout, repair=params.repair,
                           progress=within(progress, 0.0, 0.05))
    check_distinct([ktx_path, *face_paths(faces_pattern)], env.paths)
    px = env.pixels[..., :3] if env.pixels.shape[-1] >= 3 else env.pixels
    lights = []
    if inputs.get("lights") is not None:
        lights = read_lights(inputs["lights"])
        if px.shape[-1] != 3:
            raise BakeryError("lights go with an RGB environment", inputs["lights"])
    progress(0.05, "spherical harmonics")
    radiance = irr.project_sh(px, env.kind, threads=bake_threads())
    if lights:  # directional lights taken out by env-lights go back in (their radiance in SH, R&H 2001 basis)
        from bakery.envmap.sunlight import light_irradiance, light_radiance_sh

        radiance = radiance + sum(light_radiance_sh(lt) for lt in lights)
    plain = irr.irradiance_coefficients(radiance)
    windowed = irr.irradiance_coefficients(radiance, window=params.window)
    expected = None
    if params.method == "sh":
        progress(0.4, "irradiance cubemap")
        cube = irr.irradiance_cube_sh(windowed, params.face_size)
        if not lights:
            progress(0.5, "SH9 error estimate")
            expected = irr.sh9_error_estimate(px, env.kind, window=params.window, radiance_sh=radiance,
                                              progress=within(progress, 0.5, 0.9))
            if expected["max_relative"] > SH9_WARN:
                worst, mean = 100 * expected["max_relative"], 100 * expected["mean_relative"]
                warnings.warn(f"{src}: 9 SH coefficients miss this environment's compact bright light: up to "
                              f"{worst:.0f} % error (mean {mean:.1f} %); use --method exact (or take the sun out "
                              "with bakery env lights)", BakeryWarning, stacklevel=2)
    else:
        dirs = sphere.cube_directions(params.face_size, dtype=np.float64)
        cube = irr.irradiance_exact(px, env.kind, dirs, progress=lambda f, w: progress(0.1 + 0.8 * f, w))
        if lights:
            cube = cube + sum(light_irradiance(lt, dirs) for lt in lights)
        cube = cube.astype(np.float32)
    progress(0.9, "writing")
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
        "cubemap": {"size": params.face_size, "method": params.method,
                    "units": "E/pi (reflected radiance)" if params.units == "reflected" else "E (irradiance)",
                    "clamped_negative_texels": negative},
        "conventions": CONVENTIONS,
        "lights_added": len(lights),
    }
    if expected is not None:
        data["sh9_expected_error"] = {k: round(float(v), 6) for k, v in expected.items()}
    json_path = write_json(output, data)
    written = [json_path]
    quality: dict = {}
    (ktx_cube,) = clamp_for_ktx2(ktx_path, [cube], params.ktx2_format)
    written += write_environment(ktx_path, ktx_cube, "cube", ktx_format=params.ktx2_format, effort=params.effort,
                                 zstd=params.zstd, threads=bake_threads(), quality=quality,
                                 key_values={**KTX_KEYS, "bakery.units": data["cubemap"]["units"]},
                                 progress=within(progress, 0.9, 0.95))
    written += write_environment(faces_pattern, cube, "cube", bits="half", threads=bake_threads(),
                                 progress=within(progress, 0.95, 0.99))
    extra = {"conventions": CONVENTIONS, **({"quality": quality} if quality else {})}
    recorded = manifest_inputs(env.paths, "environment")
    if inputs.get("lights") is not None:
        recorded["lights"] = inputs["lights"]
    man = write_manifest(output, bake="env-diffuse", inputs=recorded,
                         params=params_to_dict(params), outputs=written, extra=extra)
    progress(1.0, "done")
    return written + [man]


register(Bake("env-diffuse", "diffuse irradiance: SH9 coefficients (JSON) and a small irradiance cubemap",
              ("environment", "lights?"), DiffuseParams, diffuse_files, run_diffuse, output_suffix=".json"))


# ------------------------------------------------------------------------------------------------- lights


@dataclass(frozen=True)
class LightsParams(Params):
    """Parameters of ``env-lights``: the dominant compact lights of an HDR panorama (a sun) as directional
    lights, and the panorama without them."""

    max_lights: int = param(4, "The most lights to take out.", low=1, high=16)
    contrast: float = param(16.0, "A light's texels are at least this many times the median sky radiance.",
                            low=1.0, low_open=True, high=1e9)
    max_radius: float = param(5.0, "The widest light taken out; wider bright regions stay in the environment.",
                              unit="degrees", low=0.01, high=45.0)
    min_share: float = param(0.02, "A light must hold at least this fraction of the environment's energy.",
                             low=0.0, high=1.0)
    input_layout: ImageLayout | None = INPUT_LAYOUT
    repair: bool = REPAIR


def lights_outputs(inputs: dict[str, Path], output: Path, params: LightsParams) -> list[Path]:
    from bakery.io.manifest import manifest_path

    if output.suffix.lower() != ".json":
        raise BakeryError("the lights output must be a .json file (the environment without them goes beside it, "
                          "NAME.rest.exr)", output)
    return [output, rest_path(output), manifest_path(output)]


def rest_path(output: Path) -> Path:
    """The environment without its lights, beside the lights file: ``NAME.json`` -> ``NAME.rest.exr``."""
    return output.with_name(output.stem + ".rest.exr")


def run_lights(inputs: dict[str, Path], output: Path, params: LightsParams, progress: Progress) -> list[Path]:
    import numpy as np

    from bakery.envmap.resample import resample
    from bakery.envmap.sunlight import find_lights
    from bakery.io.envfiles import read_environment
    from bakery.io.manifest import write_json, write_manifest

    src = inputs["environment"]
    progress(0.0, "reading")
    env = read_environment(src, layout=params.input_layout, repair=params.repair,
                           progress=within(progress, 0.0, 0.1))
    px = env.pixels[..., :3]
    if env.kind == "cube":  # the finder works on a panorama of the cube's resolution
        px = resample(px, "cube", "equirect", 4 * px.shape[1])
    progress(0.1, "finding lights")
    lights, rest = find_lights(np.ascontiguousarray(px, np.float32), max_lights=params.max_lights,
                               contrast=params.contrast, max_radius_deg=params.max_radius,
                               min_share=params.min_share, progress=within(progress, 0.1, 0.8))
    progress(0.8, "writing")
    data = {
        "lights": [lt.to_dict() for lt in lights],
        "frame": CONVENTIONS["directions"] + "; direction points from the surface toward the light",
        "units": "radiance of the disc and irradiance at normal incidence E = L * solid angle, per channel, in the "
                 "units of the environment (the irradiance_sh of bakery env diffuse)",
        "environment_without_lights": rest_path(output).name,
    }
    json_path = write_json(output, data)
    from bakery.io.images import write_image

    rest_file = write_image(rest_path(output), np.ascontiguousarray(rest, np.float32), bits="float",
                            progress=within(progress, 0.8, 0.98))
    man = write_manifest(output, bake="env-lights", inputs=manifest_inputs(env.paths, "environment"),
                         params=params_to_dict(params), outputs=[json_path, rest_file],
                         extra={"conventions": CONVENTIONS, "lights_found": len(lights)})
    progress(1.0, "done")
    return [json_path, rest_file, man]


def read_lights(path: Path) -> list:
    """The lights of a file written by ``env-lights`` (one-line errors for malformed files)."""
    import json

    from bakery.envmap.sunlight import Light

    try:
        data = json.loads(Path(path).read_text(encoding="utf-8"))
        items = data["lights"]
        if not isinstance(items, list):
            raise TypeError("'lights' is not a list")
        return [Light.from_dict(item) for item in items]
    except (OSError, ValueError, KeyError, TypeError) as exc:
        raise BakeryError(f"not a lights file of bakery env lights ({exc})", path) from None


register(Bake("env-lights", "the dominant compact lights of an HDR environment (a sun) as directional lights, and "
              "the environment without them", ("environment",), LightsParams, lights_outputs, run_lights,
              output_suffix=".json"))
