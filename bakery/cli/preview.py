"""``bakery preview`` (a lit material ball and tile) and ``bakery sheet`` (contact sheets)."""

from __future__ import annotations

import math
from enum import StrEnum
from pathlib import Path
from typing import Annotated

import typer

from bakery.cli import app
from bakery.cli._common import command, echo, output_path, progress_lines
from bakery.errors import BakeryError


class Green(StrEnum):
    up = "up"
    down = "down"


class Views(StrEnum):
    both = "both"
    ball = "ball"
    tile = "tile"


def _exposure(text: str) -> float | None:
    if text.strip().lower() == "auto":
        return None
    try:
        value = float(text)
    except ValueError:
        raise BakeryError(f"--exposure takes a number of EV or 'auto'; got {text!r}") from None
    if not math.isfinite(value) or abs(value) > 40:
        raise BakeryError(f"--exposure must lie within ±40 EV; got {value}")
    return value


@app.command("preview")
@command
def preview(
    output: Annotated[Path, typer.Option("--output", "-o", help="Picture to write: .png, or .gif/.webp with "
                                         "--turntable.", show_default=False)],
    normal: Annotated[Path | None, typer.Option(help="Normal map (tangent space).", dir_okay=False)] = None,
    y: Annotated[Green | None, typer.Option("--y", help="Green-channel convention of the normal map file: up "
                                            "(OpenGL-style, glTF 2.0) or down (DirectX-style); default: what "
                                            "its manifest records, else the --profile's, else up.",
                                            show_default=False)] = None,
    profile: Annotated[Path | None, typer.Option("--profile", help="A target profile (docs/profiles.md): "
                                                 "its green-channel convention reads a normal map whose "
                                                 "manifest does not record one.", metavar="FILE",
                                                 show_default=False)] = None,
    height: Annotated[Path | None, typer.Option(help="Height map instead of --normal: normals are baked from "
                                                "it in memory (as `bakery normal` does).", dir_okay=False)] = None,
    strength: Annotated[float | None, typer.Option(help="Strength of the --height bake, texels per height unit "
                                                   "[default: relief = width / 32].", show_default=False)] = None,
    roughness: Annotated[str, typer.Option(help="Perceptual roughness: a number in [0, 1] or a roughness "
                                           "map.")] = "0.5",
    exponent: Annotated[Path | None, typer.Option(help="Specular-exponent map instead of a roughness map, "
                                                  "converted in memory (as `bakery roughness` does).",
                                                  dir_okay=False)] = None,
    base_color: Annotated[str, typer.Option("--base-color", help="Base colour: a grey level, R,G,B (linear, "
                                            "0-1) or a colour map (8/16-bit files are sRGB).")] = "0.5",
    alpha_cutoff: Annotated[float | None, typer.Option(
        "--alpha-cutoff",
        help="Alpha test of a --base-color map with alpha: texels with alpha below it are not drawn. "
             "Default: the cutoff its manifest records (bakery mips), else 0.5.", show_default=False)] = None,
    metallic: Annotated[str, typer.Option(help="Metalness: a number in [0, 1] (0 = dielectric, 1 = metal) or "
                                          "a metalness map.")] = "0",
    occlusion: Annotated[Path | None, typer.Option(help="Ambient-occlusion map (e.g. of `bakery occlusion`): "
                                                   "darkens the environment's light.", dir_okay=False)] = None,
    pack: Annotated[Path | None, typer.Option(help="Packed texture: roughness, metalness, occlusion, colour or "
                                              "height from its channels, laid out as its manifest says (or "
                                              "--pack-layout).", dir_okay=False)] = None,
    pack_layout: Annotated[str | None, typer.Option("--pack-layout", help="Roles of the --pack channels in "
                                                    "r,g,b,a order, e.g. occlusion,roughness,metalness (- for "
                                                    "an unused channel).", show_default=False)] = None,
    env: Annotated[Path | None, typer.Option(help="HDR environment (.hdr/.exr): an equirectangular panorama or a "
                                             "cube map as a cross, row or stack, baked in memory; default: the "
                                             "built-in procedural sky.", dir_okay=False)] = None,
    specular: Annotated[Path | None, typer.Option(help="Baked lighting instead of --env: the prefiltered KTX2 "
                                                  "chain of `bakery env specular` (needs --diffuse).",
                                                  dir_okay=False)] = None,
    diffuse: Annotated[Path | None, typer.Option(help="Baked lighting: the SH JSON of `bakery env diffuse`.",
                                                 dir_okay=False)] = None,
    lut: Annotated[Path | None, typer.Option(help="Baked lighting: the BRDF table of `bakery env lut` "
                                             "[default: made in memory].", dir_okay=False,
                                             show_default=False)] = None,
    lights: Annotated[Path | None, typer.Option(help="The lights file of `bakery env lights`: its lights shine "
                                                "as directional lights (GGX highlight, Lambert diffuse); "
                                                "without --env, the environment without them that it names "
                                                "lights the rest.", dir_okay=False)] = None,
    size: Annotated[int, typer.Option(min=8, max=4096, help="Height of the picture in pixels (each view is "
                                      "size x size).")] = 512,
    views: Annotated[Views, typer.Option("--views", help="Which views to draw.")] = Views.both,
    yaw: Annotated[float, typer.Option(help="Camera orbit around the vertical axis, degrees.")] = 0.0,
    pitch: Annotated[float, typer.Option(min=-80.0, max=80.0, help="Camera height above the ball's equator, "
                                         "degrees.")] = 15.0,
    tile_pitch: Annotated[float, typer.Option(min=5.0, max=90.0, help="Camera elevation above the tile, "
                                              "degrees.")] = 40.0,
    rotation: Annotated[float, typer.Option(help="Turn the environment about the vertical axis, degrees "
                                            "(content moves to the right).")] = 0.0,
    tiles: Annotated[tuple[float, float], typer.Option(help="Texture repeats around the ball and from pole to "
                                                       "pole.")] = (4.0, 2.0),
    repeat: Annotated[float, typer.Option(min=0.01, help="Texture repeats along each side of the tile.")] = 2.0,
    exposure: Annotated[str, typer.Option(help="Exposure in EV, or 'auto' (log-average luminance to key "
                                          "0.18, Reinhard et al. 2002).")] = "0",
    white: Annotated[float | None, typer.Option(min=0.0, help="Luminance that maps to white (extended "
                                                "Reinhard); default: none.")] = None,
    supersample: Annotated[int, typer.Option(min=1, max=4, help="Samples per pixel along each axis.")] = 2,
    turntable: Annotated[int | None, typer.Option(min=2, max=720, help="Write an animation of N frames: the "
                                                  "ball turning once under the fixed environment.")] = None,
    fps: Annotated[float, typer.Option(min=1.0, max=100.0, help="Frames per second of --turntable.")] = 24.0,
) -> None:
    """Render a lit preview of a material: a ball and a flat tile under an HDR environment (split-sum
    specular, spherical-harmonic diffuse, Reinhard tone mapping, sRGB output)."""
    from bakery.io.atomic import check_distinct
    from bakery.preview.inputs import load_material, parse_pack_layout, parse_value_or_path
    from bakery.preview.lighting import choose_lighting

    for name, value in (("--yaw", yaw), ("--pitch", pitch), ("--tile-pitch", tile_pitch), ("--rotation", rotation),
                        ("--tiles", tiles[0]), ("--tiles", tiles[1]), ("--repeat", repeat), ("--white", white),
                        ("--fps", fps), ("--strength", strength)):
        if value is not None and not math.isfinite(value):
            raise BakeryError(f"{name} must be a finite number; got {value}")
    anim = turntable is not None
    output_path(output, suffixes=(".gif", ".webp") if anim else (".png",))
    rough = parse_value_or_path(roughness, "--roughness", channels=1)
    color = parse_value_or_path(base_color, "--base-color", channels=3)
    metal = parse_value_or_path(metallic, "--metallic", channels=1)
    layout = parse_pack_layout(pack_layout) if pack_layout is not None else None
    ev = _exposure(exposure)
    if white is not None and not white > 0:
        raise BakeryError(f"--white must be a positive luminance; got {white}")
    roles = {"normal": normal, "height": height, "exponent": exponent, "environment": env, "specular": specular,
             "diffuse": diffuse, "lut": lut, "lights": lights, "roughness": rough, "color": color,
             "metallic": metal, "occlusion": occlusion, "pack": pack}
    roles = {role: p for role, p in roles.items() if isinstance(p, Path)}
    from bakery.io.atomic import check_output_folder
    from bakery.io.manifest import manifest_path

    written = [output, manifest_path(output)]  # the picture and its manifest (docs/preview.md)
    check_output_folder(written)
    check_distinct(written, roles.values())
    limit = None  # read_image applies BAKERY_MAX_PIXELS
    target_y = None
    if profile is not None:  # checked even when --y or the manifest decides
        from bakery.profiles import load_profile

        target_y = load_profile(profile).y
    green = y.value if y is not None else _normal_y(normal, target_y)
    if alpha_cutoff is not None and not 0 < alpha_cutoff <= 1:
        raise BakeryError(f"--alpha-cutoff must lie in (0, 1]; got {alpha_cutoff:g}")
    material = load_material(normal=normal, green=green, height=height, strength=strength,
                             roughness=rough, exponent=exponent, base_color=color, metallic=metal,
                             occlusion=occlusion, pack=pack, pack_layout=layout, alpha_cutoff=alpha_cutoff,
                             max_pixels=limit)
    lighting = choose_lighting(env, specular=specular, diffuse=diffuse, lut=lut, lights=lights)
    cut = material.alpha_test.cutoff if material.alpha_test is not None else None
    settings = {"size": size, "y": green, "yaw": yaw, "pitch": pitch, "rotation": rotation, "tiles": list(tiles),
                "exposure": exposure, "white": white, "supersample": supersample, "strength": strength,
                "pack_layout": pack_layout, "alpha_cutoff": cut, **{name: value for name, value in (
                    ("roughness", rough), ("base_color", color), ("metallic", metal)) if not isinstance(value, Path)}}
    if anim:
        from bakery.io.animation import write_animation
        from bakery.preview.render import turntable_frames

        display = progress_lines("frames")
        frames, used = turntable_frames(material, lighting, turntable, size=size, yaw=yaw, pitch=pitch,
                                        env_rotation=rotation, tiles=tiles, supersample=supersample,
                                        exposure=ev, white=white,
                                        progress=lambda i: display((i + 1) / turntable, f"frame {i + 1}"))
        write_animation(output, frames, fps=fps)
        _record(output, used, settings | {"turntable": turntable, "fps": fps}, roles)
        echo(f"wrote {output} ({turntable} frames, {size}x{size}, exposure {used:+.2f} EV)")
        return
    from bakery.io.images import write_image
    from bakery.preview.render import preview_image

    img, used = preview_image(material, lighting, size=size, yaw=yaw, pitch=pitch, env_rotation=rotation,
                              tiles=tiles, repeat=repeat, tile_pitch=tile_pitch, supersample=supersample,
                              exposure=ev, white=white, views=views.value)
    write_image(output, img, bits="8")
    _record(output, used, settings | {"repeat": repeat, "tile_pitch": tile_pitch, "views": views.value}, roles)
    cut_note = f", alpha-tested at {cut:g}" if cut is not None else ""
    echo(f"wrote {output} ({img.shape[1]}x{img.shape[0]}, exposure {used:+.2f} EV{cut_note})")


def _record(output: Path, used_ev: float, settings: dict, roles: dict[str, Path]) -> None:
    """The picture's manifest: it is a picture (``inspect`` judges it as one), what it shows and how."""
    from bakery.preview.picture import picture_manifest

    picture_manifest(output, made_by="preview", inputs=roles, params=settings | {"exposure_used": used_ev})


def _normal_y(normal: Path | None, target_y: str | None) -> str:
    """The green convention a normal map is read in when --y is not given: its manifest's, else the
    target's (the profile's), else up."""
    if normal is not None:
        from bakery.preview.assets import knowledge

        recorded = knowledge(normal).y
        if recorded:
            return recorded
    return target_y or "up"


@app.command("sheet")
@command
def sheet(
    sources: Annotated[list[Path], typer.Argument(help="Folders of maps and/or map files.", show_default=False)],
    output: Annotated[Path, typer.Option("--output", "-o", help="The page to write (.html); the PNG grid and "
                                         "a NAME_files/ folder of thumbnails go beside it.", show_default=False)],
    recursive: Annotated[bool, typer.Option(help="Look into sub-folders.")] = True,
    thumb: Annotated[int, typer.Option(min=32, max=1024, help="Thumbnail size in pixels.")] = 160,
    columns: Annotated[int, typer.Option(min=1, max=32, help="Cards per row of the PNG grid.")] = 4,
    lit: Annotated[bool, typer.Option("--lit/--no-lit", help="Render a lit preview for each map that has "
                                      "one (normal, colour and roughness maps).")] = True,
    env: Annotated[Path | None, typer.Option(help="HDR environment lighting the previews (a panorama, or a cube "
                                             "map as a cross, row or stack); default: the built-in procedural "
                                             "sky.", dir_okay=False)] = None,
    title: Annotated[str | None, typer.Option(help="Title of the page.", show_default=False)] = None,
    compare: Annotated[bool, typer.Option("--compare", help="Compare two folders, old then new: assets paired "
                                          "by relative path, each shown old, new and as a difference, with "
                                          "PSNR (angular error for normal maps) per level.")] = False,
    profile: Annotated[Path | None, typer.Option("--profile", help="A target profile (docs/profiles.md): "
                                                 "findings are judged against its green-channel convention, and "
                                                 "normal maps without a manifest that says theirs are previewed "
                                                 "in it.", metavar="FILE", show_default=False)] = None,
) -> None:
    """Make a contact sheet: an HTML page (opens from disk, no server) and a PNG grid with a card per asset
    (a map with its mip levels, cube faces and KTX2 container), its lit preview, size and the findings of
    `bakery inspect`."""
    from bakery.preview.sheet import collect_maps, make_compare_sheet, make_sheet

    output_path(output, suffixes=(".html", ".htm"))
    if compare:
        if len(sources) != 2:
            raise BakeryError("--compare takes two folders: the old version, then the new one")
        written = make_compare_sheet(sources[0], sources[1], output, thumb=thumb, columns=columns,
                                     recursive=recursive, title=title or "bakery comparison",
                                     progress=progress_lines("assets"))
        echo(f"wrote {written[-1]} and {', '.join(p.name for p in written[:-1])}")
        return
    title = title or "bakery contact sheet"
    files = collect_maps(sources, output, recursive=recursive)
    expect_y = None
    if profile is not None:
        from bakery.profiles import load_profile

        expect_y = load_profile(profile).y
    written = make_sheet(files, output, source=", ".join(str(s) for s in sources), thumb=thumb,
                         columns=columns, lit=lit, env=env, title=title, progress=progress_lines("assets"),
                         expect_y=expect_y)
    echo(f"wrote {written[-1]} and {', '.join(p.name for p in written[:-1])}")


