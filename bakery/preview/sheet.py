"""Contact sheets: a library of maps at a glance, in a browser or as a picture.

A sheet is an HTML page plus one or more PNG grids with one **card per asset** (:mod:`bakery.preview.assets`: a
map with its mip levels, side data, cube faces and KTX2 container). A card shows a thumbnail of the map, a lit
preview where the kind of map allows one (:mod:`bakery.preview.render`), its name, size, channels and sample
type, what bakery knows about it (the manifest that still describes it, else the kind
:mod:`bakery.classify` sees), every form it is stored in as a strip of levels (a cube map as a cross per level,
a specular chain with the roughness of each level, a split-sum table as its two channels, a packed texture as
its channels with their roles), the files it is made of, and the findings of :mod:`bakery.inspect` (warnings
and errors stand out). :func:`compare_entries` makes the cards of a before/after comparison instead. The page
needs no server and no network: pictures are plain PNG files in a folder beside it (``NAME_files/``),
referenced by relative links, and the page carries its own styles.

Thumbnails show what is stored: colour maps as stored (sRGB-encoded files as they are, linear and float colour
encoded for display), normal maps as their encoded RGB, single-channel 8/16-bit data as grey levels, float data
stretched between its minimum and maximum, HDR environments tone mapped with the extended Reinhard operator and
an automatic exposure (Reinhard et al. 2002, eqs. 1-4). The levels of one strip share level 0's exposure and
range, so they can be compared. Lit previews decode the map with its own conventions (a Y-down normal map as
Y-down, a packed texture through its channel layout).
"""

from __future__ import annotations

import dataclasses
import html
import math
import os
import shutil
import tempfile
import urllib.parse
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from bakery.errors import BakeryError
from bakery.inspect import Finding

#: File name endings a sheet picks up when given a folder (the formats bakery reads).
MAP_SUFFIXES = (".png", ".tif", ".tiff", ".exr", ".hdr", ".pic", ".jpg", ".jpeg", ".ktx2")

#: Entries per PNG grid page.
PER_PAGE = 48

#: Edge of level 0 in a strip of levels, in pixels; level k is shown at max(STRIP_MIN, STRIP >> k).
STRIP = 96
STRIP_MIN = 14


@dataclass
class Strip:
    """One form of an asset as a row of pictures: ``label``, the form's kind (``ktx2``, ``files``, ``tag``,
    ``faces``, ``channels``), and per picture the display values, a caption and the width to show it at."""

    label: str
    form: str
    pictures: list[tuple[np.ndarray, str, int]] = field(default_factory=list)


@dataclass
class SheetEntry:
    """One card of the sheet.

    Attributes
    ----------
    name : str
        The main file's path relative to the sheet's folder of maps (forward slashes).
    width, height, channels : int
    bits : str
        ``8``, ``16``, ``half`` or ``float`` (empty when the file could not be read).
    kind : str
        What the manifest says (normal, height, roughness, occlusion, mask, color, environment, irradiance,
        table, pack) or what :func:`bakery.classify.map_kind` sees, or ``"unreadable"``.
    findings : list of Finding
        From :func:`bakery.inspect.inspect_pixels`; a file that cannot be read carries an ``unreadable`` error.
    thumbnail : ndarray, float32, (h, w, 3)
        Display values (sRGB-encoded) in [0, 1]; None for an unreadable file. In a comparison: the new map.
    preview : ndarray, float32, (t, t, 3) or None
        The lit preview, display values in [0, 1]. In a comparison: the difference picture.
    preview_note : str
        What the preview shows, or why there is none.
    files : list of str
        Every file of the asset, relative names.
    about : str
        Where the kind and conventions come from (the manifest's bake, Y convention, layout).
    strips : list of Strip
    old : ndarray or None
        In a comparison: the old map's display values.
    numbers : list of (str, str)
        In a comparison: (what, value) rows, e.g. ("level 0 PSNR", "41.2 dB").
    """

    name: str
    width: int = 0
    height: int = 0
    channels: int = 0
    bits: str = ""
    kind: str = "unreadable"
    findings: list[Finding] = field(default_factory=list)
    thumbnail: np.ndarray | None = None
    preview: np.ndarray | None = None
    preview_note: str = ""
    files: list[str] = field(default_factory=list)
    about: str = ""
    strips: list[Strip] = field(default_factory=list)
    old: np.ndarray | None = None
    numbers: list[tuple[str, str]] = field(default_factory=list)

    @property
    def problems(self) -> list[Finding]:
        """Findings of severity warning or error."""
        return [f for f in self.findings if f.severity != "info"]


# ------------------------------------------------------------------------------------------ finding maps


def find_maps(folder: str | os.PathLike, *, recursive: bool = True, exclude: Iterable[Path] = ()) -> list[Path]:
    """Image files under ``folder`` in a stable (sorted) order, skipping hidden names, temporary files of
    interrupted writes (``.*.part.*``) and anything under ``exclude`` (e.g. the sheet's own thumbnails)."""
    root = Path(folder)
    if not root.is_dir():
        raise BakeryError("not a folder", root)
    skip = [Path(p).resolve() for p in exclude]
    found = []
    for dirpath, dirnames, filenames in os.walk(root):
        dirnames[:] = sorted(d for d in dirnames if not d.startswith(".")
                             and not any(_under(Path(dirpath, d).resolve(), s) for s in skip))
        if not recursive:
            dirnames[:] = []
        for f in sorted(filenames):
            p = Path(dirpath, f)
            if f.startswith(".") or p.suffix.lower() not in MAP_SUFFIXES:
                continue
            if any(_under(p.resolve(), s) for s in skip):
                continue
            found.append(p)
    return sorted(found, key=lambda p: p.relative_to(root).as_posix())


def _under(p: Path, root: Path) -> bool:
    return p == root or root in p.parents


# ------------------------------------------------------------------------------------------ images


def _fit(img: np.ndarray, size: int, *, enlarge: bool = True, alpha: bool = False) -> np.ndarray:
    """Shrink (area average) or enlarge (nearest, so texels stay visible) to fit a size x size box; with
    ``enlarge=False`` smaller images stay as they are. ``alpha=True``: the last channel is an opacity that
    weights the average of the others (premultiplied, Porter & Duff 1984), so the colour of transparent texels
    does not darken the edges."""
    import cv2

    h, w = img.shape[:2]
    scale = size / max(h, w)
    if scale >= 1 and not enlarge:
        return np.asarray(img, dtype=np.float32).reshape(h, w, -1)
    nh, nw = max(1, round(h * scale)), max(1, round(w * scale))
    interp = cv2.INTER_AREA if scale < 1 else cv2.INTER_NEAREST
    src = np.asarray(img, dtype=np.float32)
    weighted = alpha and interp == cv2.INTER_AREA
    if weighted:
        src = np.concatenate([src[..., :-1] * src[..., -1:], src[..., -1:]], axis=-1)
    out = cv2.resize(np.ascontiguousarray(src), (nw, nh), interpolation=interp).reshape(nh, nw, -1)
    if weighted:
        a = out[..., -1:]
        out[..., :-1] = np.where(a > 0, out[..., :-1] / np.maximum(a, np.float32(1e-12)), 0)
    return out


#: Display values of the light and dark squares that show through transparent texels (neutral greys; a
#: checkerboard behind transparency is common practice in image editors).
CHECKER = (0.6, 0.4)


def over_checkerboard(rgb: np.ndarray, alpha: np.ndarray) -> np.ndarray:
    """Display values ``rgb`` (H, W, 3, sRGB-encoded) over a checkerboard of :data:`CHECKER` greys, 16 squares
    across the longer side (at least 2 pixels each), with opacity ``alpha`` (H, W): the "over" operator of
    Porter & Duff 1984 on straight (unassociated) alpha, in linear light (IEC 61966-2-1 decode, mix, encode)."""
    from bakery.color import linear_to_srgb, srgb_to_linear

    h, w = alpha.shape
    cell = max(2, round(max(h, w) / 16))
    rows, cols = np.indices((h, w))
    bg = np.where((rows // cell + cols // cell) % 2 == 0, CHECKER[0], CHECKER[1]).astype(np.float32)
    a = np.clip(alpha, 0, 1)[..., None].astype(np.float32)
    mixed = srgb_to_linear(np.clip(rgb, 0, 1)) * a + srgb_to_linear(bg)[..., None] * (1 - a)
    return np.clip(linear_to_srgb(mixed), 0, 1).astype(np.float32)


def has_alpha(pixels: np.ndarray, kind: str) -> bool:
    """A colour map with an alpha channel (2 or 4 channels): shown over a checkerboard, lit alpha-tested."""
    return kind == "color" and pixels.shape[-1] in (2, 4)


#: Sheet kinds shown as grey levels.
GREY_KINDS = ("height", "roughness", "occlusion", "mask", "data")
#: Sheet kinds holding radiance (tone mapped).
RADIANCE_KINDS = ("environment", "irradiance")


def display_range(pixels: np.ndarray, kind: str, *, bits: str) -> tuple[float, float] | float | None:
    """How :func:`display_values` scales a map, chosen once (from level 0) for a whole strip: the automatic
    exposure in EV of radiance, the (min, max) stretch of float data outside [0, 1], or None."""
    from bakery.preview.tonemap import auto_exposure

    px = np.nan_to_num(np.asarray(pixels, dtype=np.float32), nan=0.0, posinf=0.0, neginf=0.0)
    c = px.shape[-1]
    if kind in RADIANCE_KINDS:
        rgb = px[..., :3] if c >= 3 else np.repeat(px[..., :1], 3, axis=-1)
        return auto_exposure(rgb.reshape(-1, 1, 3))
    if bits in ("half", "float") and (c == 1 or kind in GREY_KINDS):
        g = px[..., 0]
        lo, hi = float(g.min()), float(g.max())
        if lo < 0 or hi > 1:
            return (lo, hi)
    if bits in ("half", "float") and kind == "color" and px[..., :3].max() > 1:
        return auto_exposure(px[..., :3].reshape(-1, 1, 3))
    return None


def display_values(pixels: np.ndarray, kind: str, *, bits: str, scale=None, transfer: str | None = None
                   ) -> np.ndarray:
    """Display values (sRGB-encoded, [0, 1], float32, RGB) of a 2D map ``(H, W, C)``, scaled as ``scale``
    (from :func:`display_range`) says. ``transfer="linear"`` marks an integer colour map holding linear
    values (encoded for display). A colour map with alpha is shown over a checkerboard
    (:func:`over_checkerboard`)."""
    from bakery.color import linear_to_srgb
    from bakery.preview.tonemap import display

    px = np.nan_to_num(np.asarray(pixels, dtype=np.float32), nan=0.0, posinf=0.0, neginf=0.0)
    c = px.shape[2]
    is_float = bits in ("half", "float")
    if has_alpha(px, kind):  # the colour over a checkerboard where it is transparent
        shown = display_values(px[..., :-1], kind, bits=bits, scale=scale, transfer=transfer)
        return over_checkerboard(shown, px[..., -1])
    if kind in RADIANCE_KINDS or (kind == "color" and isinstance(scale, float)):
        rgb = px[..., :3] if c >= 3 else np.repeat(px[..., :1], 3, axis=2)
        return display(rgb, exposure=scale if isinstance(scale, float) else 0.0)
    if kind == "table" or (kind == "pack" and c == 2):
        rgb = np.concatenate([px[..., :2], np.zeros_like(px[..., :1])], axis=2) if c == 2 else px[..., :3]
    elif c == 2 and kind in ("normal", "data"):  # XY normal map: show x, y and the rebuilt z, encoded
        z = np.sqrt(np.clip(1 - (px[..., 0] * 2 - 1) ** 2 - (px[..., 1] * 2 - 1) ** 2, 0, 1)) * 0.5 + 0.5
        rgb = np.concatenate([px, z[..., None]], axis=2)
    elif c == 1 or kind in GREY_KINDS:
        g = px[..., 0]
        if isinstance(scale, tuple):
            lo, hi = scale
            g = (g - lo) / (hi - lo) if hi > lo else np.zeros_like(g)
        rgb = np.repeat(g[..., None], 3, axis=2)
    else:
        rgb = px[..., :3]
        if kind == "color" and (is_float or transfer == "linear"):
            rgb = linear_to_srgb(np.clip(rgb, 0, 1))
    return np.clip(rgb, 0, 1).astype(np.float32)


def cross(faces: np.ndarray) -> np.ndarray:
    """Six faces ``(6, N, N, C)`` as a horizontal cross ``(3N, 4N, C)`` (:func:`bakery.io.layouts.assemble`)."""
    from bakery.io.layouts import assemble

    return assemble(np.asarray(faces, dtype=np.float32), "cross-wide")


def thumbnail(pixels: np.ndarray, kind: str, *, bits: str, size: int = 160, scale=None,
              transfer: str | None = None) -> np.ndarray:
    """Display values of a map fitted in a ``size`` box (a cube ``(6, N, N, C)`` as a cross).

    Parameters
    ----------
    pixels : ndarray, float32, (H, W, C) or (6, N, N, C)
        As read by :func:`bakery.io.read_image` with ``color="data"`` (or a KTX2 level).
    kind : str
        A sheet kind (see :class:`SheetEntry`) or one of :func:`bakery.classify.map_kind`.
    bits : {"8", "16", "half", "float"}
    size : int
    scale : optional
        From :func:`display_range`; default: chosen from these pixels.
    transfer : {"srgb", "linear"}, optional
    """
    px = np.asarray(pixels, dtype=np.float32)
    if px.ndim == 4:
        px = cross(px)
    if scale is None:
        scale = display_range(px, kind, bits=bits)
    small = _fit(np.nan_to_num(px, nan=0.0, posinf=0.0, neginf=0.0), size, alpha=has_alpha(px, kind))
    return display_values(small, kind, bits=bits, scale=scale, transfer=transfer)


def _to_u8(img: np.ndarray) -> np.ndarray:
    return np.rint(np.clip(img, 0, 1) * 255).astype(np.uint8)


# ------------------------------------------------------------------------------------------ lit previews


#: A function that makes the lit preview of one map: (pixels, kind, bits, name, knowledge) -> (image or None,
#: note). ``knowledge`` is a :class:`bakery.preview.assets.Knowledge` (or None).
PreviewFn = Callable[..., tuple[np.ndarray | None, str]]


#: Name parts that say what a single-channel map holds (common practice in texture naming).
ROUGHNESS_WORDS = ("rough",)
HEIGHT_WORDS = ("height", "disp", "bump")
EXPONENT_WORDS = ("exponent", "shin")
OCCLUSION_WORDS = ("_ao", "occlusion")


def material_for(pixels: np.ndarray, kind: str, bits: str, name: str, knowledge=None):
    """The material a map is previewed as, and a note saying how; ``(None, reason)`` when there is none.

    - normal maps: decoded with the green-channel convention their manifest records (``knowledge.y``); without
      one, read as Y-up (bakery's and glTF's convention), so a Y-down map shows its inverted relief;
    - colour maps: the base colour (8/16-bit files decoded from sRGB, IEC 61966-2-1, unless the manifest says
      the values are linear); with alpha below 1 somewhere, alpha-tested (:class:`~bakery.preview.shading.
      AlphaTest`) at the cutoff the map's ``bakery mips`` manifest records (``knowledge.alpha_cutoff``), else
      at 0.5 (common practice);
    - roughness and occlusion maps (by manifest): a roughness map on a dark base colour, an occlusion map (and
      the cavity mask of ``curvature``, 1 open, darker in crevices) on a light grey one;
    - packed textures: through their channel layout (:func:`bakery.preview.inputs.maps_from_pack`);
    - single-channel maps without a manifest say what they hold by name only: ``rough`` -> roughness;
      ``height``, ``disp``, ``bump`` -> normals baked in memory (:func:`bakery.normals.normal_from_height`,
      relief = width / 32 as ``bakery normal`` assumes); float maps named ``exponent`` or ``shin`` -> roughness
      through :func:`bakery.roughness.roughness_from_exponent`.
    """
    from bakery.color import srgb_to_linear
    from bakery.preview.shading import Material

    px = np.asarray(pixels, dtype=np.float32)
    stem = Path(name).stem.lower()
    known = knowledge is not None and knowledge.kind is not None
    if kind == "normal":
        from bakery.preview.inputs import decode_normal_pixels

        y = (knowledge.y if knowledge is not None else None) or "up"
        n = decode_normal_pixels(px, green=y)
        said = ("as the target expects" if knowledge is not None and knowledge.y_from == "target" else
                "as its manifest says" if known and knowledge.y else "(no manifest says otherwise)")
        return (Material(normals=n.astype(np.float32), roughness=0.35),
                f"lit: normal map read as Y-{y} {said}")
    if kind == "pack":
        from bakery.preview.inputs import maps_from_pack

        maps = maps_from_pack(px, knowledge.layout, bits=bits)
        if "height" in maps:
            from bakery.normals.from_height import DEFAULT_RELIEF_RATIO, normal_from_height, strength_from_size

            h = maps.pop("height")
            maps["normals"] = normal_from_height(h, strength=strength_from_size(h.shape, DEFAULT_RELIEF_RATIO, 1.0))
        maps.setdefault("base_color", (0.5, 0.5, 0.5))
        used = ", ".join(f"{c}={r}" for c, r in knowledge.layout.items())
        return Material(**maps), f"lit: packed channels {used}"
    if kind == "color" and px.shape[2] >= 3:
        rgb = px[..., :3]
        linear = bits in ("half", "float") or (known and knowledge.transfer == "linear")
        rgb = np.clip(rgb, 0, None) if linear else srgb_to_linear(rgb)
        from bakery.preview.inputs import alpha_test_for

        cut = alpha_test_for(px, knowledge.alpha_cutoff if knowledge is not None else None)
        note = "lit: base colour" + (f", alpha-tested at {cut.cutoff:g}" if cut is not None else "")
        return Material(base_color=np.minimum(rgb, 1), roughness=0.5, alpha_test=cut), note
    g = px[..., 0]
    in_unit = bool(g.min() >= 0 and g.max() <= 1)
    if (kind == "roughness" or (not known and any(w in stem for w in ROUGHNESS_WORDS))) and in_unit:
        # a dark base colour so the specular reflection, where roughness shows, dominates
        return Material(roughness=g, base_color=(0.04, 0.04, 0.04)), "lit: roughness map (dark base)"
    cavity = kind == "mask" and knowledge is not None and knowledge.mask == "cavity"
    if (kind == "occlusion" or cavity or (not known and any(w in stem for w in OCCLUSION_WORDS))) and in_unit:
        return (Material(occlusion=g, roughness=0.6, base_color=(0.8, 0.8, 0.8)),
                "lit: cavity mask as an occlusion map (darkens the crevices' light)" if cavity else
                "lit: occlusion map (darkens the environment's light)")
    if kind in ("height", "data") and not known:
        if any(w in stem for w in HEIGHT_WORDS) or kind == "height" and knowledge is not None and knowledge.bake:
            from bakery.normals.from_height import DEFAULT_RELIEF_RATIO, normal_from_height, strength_from_size

            n = normal_from_height(g, strength=strength_from_size(g.shape, DEFAULT_RELIEF_RATIO, 1.0))
            return Material(normals=n, roughness=0.35), "lit: normals baked from the heights (relief = width/32)"
        if kind == "data" and any(w in stem for w in EXPONENT_WORDS) and g.min() >= 0:
            from bakery.roughness import roughness_from_exponent

            r = np.asarray(roughness_from_exponent(g), dtype=np.float32)
            return Material(roughness=r, base_color=(0.04, 0.04, 0.04)), "lit: roughness from the exponents"
        return None, "no lit preview: the name does not say rough, height or exponent"
    if kind == "height":
        from bakery.normals.from_height import DEFAULT_RELIEF_RATIO, normal_from_height, strength_from_size

        n = normal_from_height(g, strength=strength_from_size(g.shape, DEFAULT_RELIEF_RATIO, 1.0))
        return Material(normals=n, roughness=0.35), "lit: normals baked from the heights (relief = width/32)"
    if kind == "table":
        return None, "a table: shown as its channels, not on a ball"
    if kind == "picture":
        if knowledge is not None and knowledge.kind in RADIANCE_KINDS:
            return None, f"a picture of an environment, {bits}-bit sRGB clipped at 1: shown as it is"
        return None, "a picture: shown as it is, not on a ball"
    if kind == "irradiance":
        return None, "irradiance: shown as crosses, not on a ball"
    return None, f"no lit preview for this kind of map ({kind})"


def lit_previews(lighting, *, size: int = 160, supersample: int = 2) -> PreviewFn:
    """A :data:`PreviewFn` rendering the ball of :func:`material_for` under ``lighting``. An HDR environment
    (an equirect panorama, or a cube map turned into one: six faces, or one image holding them in a layout
    of :mod:`bakery.io.layouts`, a cross, row or stack recognised by its aspect ratio) is shown instead on a
    polished metal ball (roughness 0.15) lit by itself (:func:`bakery.preview.lighting.as_panorama`), its
    lighting baked in memory at a small size (face 64², five levels), with automatic exposure."""
    from bakery.preview.render import preview_image
    from bakery.preview.shading import Material

    def fn(pixels: np.ndarray, kind: str, bits: str, name: str, knowledge=None):
        if kind == "environment":
            from bakery.preview.lighting import as_panorama, lighting_from_panorama

            pano = as_panorama(pixels)
            if pano is None or pano.shape[0] % 2 or pano.shape[2] < 3:
                return None, ("no lit preview: neither an equirectangular RGB panorama (2:1, even height) nor a "
                              "cube map (six faces, a cross, row or stack)")
            own = lighting_from_panorama(pano[..., :3], face=64, levels=5)
            ball = Material(roughness=0.15, metallic=1.0, base_color=(0.95, 0.95, 0.95))
            img, _ = preview_image(ball, own, size=size, views="ball", supersample=supersample, exposure=None)
            return img, "lit by itself: metal ball, roughness 0.15"
        if kind == "irradiance":
            return None, "irradiance: shown as crosses, not on a ball"
        if pixels.ndim != 3:
            return None, f"no lit preview for a cube map of this kind ({kind})"
        try:
            material, note = material_for(pixels, kind, bits, name, knowledge)
        except BakeryError as exc:
            return None, f"no lit preview: {exc}"
        if material is None:
            return None, note
        img, _ = preview_image(material, lighting, size=size, views="ball", supersample=supersample)
        return img, note

    return fn


# ------------------------------------------------------------------------------------------ cards


def _level_caption(k: int, level: np.ndarray | None, roughness: list[float] | None) -> str:
    if level is None:
        return f"{k} · missing"
    h, w = level.shape[-3:-1]
    text = f"{k} · {w}×{h}"
    if roughness is not None and k < len(roughness):
        text += f" · r {roughness[k]:.2f}"
    return text


def strips_for(forms, kind: str, knowledge, *, size: int = STRIP) -> list:
    """The strips of an asset's forms (:func:`bakery.preview.assets.read_forms`): every level of each form
    (cube levels as crosses), level k shown ``size >> k`` wide (at least :data:`STRIP_MIN`), with the
    level's size and, for a specular chain, its roughness. A split-sum table adds a strip of its two channels
    and a packed texture one of its channels with their roles. A lone single-level file gets none."""
    strips = []
    single = len(forms) == 1 and sum(lv is not None for lv in forms[0].levels) <= 1 and not forms[0].cube
    for form in forms:
        present = [lv for lv in form.levels if lv is not None]
        if single or not present:
            continue
        fk = "mask" if form.tag else kind
        first = cross(present[0]) if form.cube else present[0]
        scale = display_range(first, fk, bits=form.bits)
        rough = knowledge.level_roughness if knowledge is not None and not form.tag else None
        if rough is not None and len(rough) != len(form.levels):
            rough = None
        strip = Strip(form.label, form.source)
        for k, lv in enumerate(form.levels):
            width = max(STRIP_MIN, size >> k)
            if lv is None:
                strip.pictures.append((np.zeros((1, 1, 3), np.float32), _level_caption(k, None, None), width))
                continue
            img = cross(lv) if form.cube else lv
            shown = _fit(np.nan_to_num(img, nan=0.0, posinf=0.0, neginf=0.0), size * (2 if form.cube else 1),
                         enlarge=False, alpha=has_alpha(img, fk))
            pic = display_values(shown, fk, bits=form.bits, scale=scale,
                                 transfer=knowledge.transfer if knowledge is not None else None)
            strip.pictures.append((pic, _level_caption(k, lv, rough), width * (2 if form.cube else 1)))
        strips.append(strip)
    main = next((lv for lv in forms[0].levels if lv is not None), None) if forms else None
    if main is not None and main.ndim == 3 and kind in ("table", "pack"):
        strips.append(_channel_strip(main, kind, knowledge, size=size))
    return strips


def _channel_strip(px: np.ndarray, kind: str, knowledge, *, size: int) -> Strip:
    names = "rgba"
    if kind == "table":
        chans = (knowledge.table or {}).get("channels", {}) if knowledge is not None else {}
        roles = {0: chans.get("R", "A (scale of F0)"), 1: chans.get("G", "B (bias)")}
        rows = (knowledge.table or {}).get("rows", "") if knowledge is not None else ""
        label = "table channels: columns n·v 0 → 1; " + (rows or "rows: roughness")
    else:
        roles = {names.index(c): r for c, r in (knowledge.layout or {}).items()}
        label = "packed channels"
    strip = Strip(label, "channels")
    for k in range(px.shape[2]):
        if k not in roles:
            continue
        g = _fit(px[..., k:k + 1], size, enlarge=False)
        strip.pictures.append((np.repeat(np.clip(g, 0, 1), 3, axis=2), f"{names[k]}: {roles[k]}", size))
    return strip


def make_asset_entry(asset, *, thumb: int = 160, preview: PreviewFn | None = None,
                     max_pixels: int | None = None, expect_y: str | None = None) -> SheetEntry:
    """Read an asset (:class:`bakery.preview.assets.Asset`) and make its card. ``expect_y`` is the target's
    green-channel convention: findings are judged against it, and normal maps whose manifest does not say
    theirs are previewed in it."""
    from bakery.inspect import inspect_pixels
    from bakery.preview.assets import INSPECT_KINDS, knowledge, read_forms

    main = asset.main
    know = knowledge(main)
    forms = read_forms(asset, max_pixels=max_pixels)
    entry = SheetEntry(asset.name_of(main), files=[asset.name_of(m.path) for m in asset.members],
                       about=know.note)
    errors = [e for f in forms for e in f.errors]
    entry.findings = [Finding("unreadable", "error", e, "fix or remove the file") for e in errors]
    px = next((lv for lv in forms[0].levels if lv is not None), None)
    if px is None:
        entry.preview_note = "no preview: the file could not be read"
        return entry
    bits = forms[0].bits
    if px.ndim == 4:
        kind = know.kind or "environment"
        entry.height, entry.width, entry.channels = px.shape[1], px.shape[2], px.shape[3]
    else:
        entry.height, entry.width, entry.channels = px.shape
        if know.kind == "table":
            kind = "table"  # a lookup table, not a texture: no tiling or terracing checks
        else:
            guessed, found = inspect_pixels(px, bits=bits, kind=INSPECT_KINDS.get(know.kind or "",
                                                                                   "data" if know.kind else None),
                                            name=Path(main).name)
            kind = know.kind or guessed
            if kind in RADIANCE_KINDS and know.kind and bits in ("8", "16"):
                # an environment bake's 8/16-bit image: sRGB display values clipped at 1 (bakery.io.envfiles),
                # a picture to look at rather than radiance to light with
                kind = "picture"
            # the findings of `bakery inspect`: judged with the map's manifest when one still matches it
            from bakery.inspect_files import inspect_paths

            report = inspect_paths([main], max_pixels=max_pixels, expect_y=expect_y)[0]
            if report.kind != "unreadable":
                found = report.findings
            elif know.y == "down":  # baked Y-down on purpose, as its manifest records
                found = [f for f in found if f.code != "green-y-down"]
            entry.findings += found
    entry.kind, entry.bits = kind, bits
    entry.thumbnail = thumbnail(px, kind, bits=bits, size=thumb, transfer=know.transfer)
    entry.strips = strips_for(forms, kind, know)
    if preview is None:
        entry.preview_note = "previews were not requested"
    elif not np.all(np.isfinite(px)):
        entry.preview_note = "no preview: the map holds NaN or Inf"
    else:
        if expect_y and kind == "normal" and not know.y:  # nothing recorded: read it as the target's
            know = dataclasses.replace(know, y=expect_y, y_from="target")
        entry.preview, entry.preview_note = preview(px, kind, bits, entry.name, know)
    return entry


def make_entry(path: str | os.PathLike, root: str | os.PathLike | None = None, *, thumb: int = 160,
               preview: PreviewFn | None = None, max_pixels: int | None = None) -> SheetEntry:
    """The card of one file on its own (an asset of one file)."""
    from bakery.preview.assets import group_assets

    path = Path(path)
    (asset,) = group_assets([(path, Path(root) if root is not None else path.parent)])
    return make_asset_entry(asset, thumb=thumb, preview=preview, max_pixels=max_pixels)


# ------------------------------------------------------------------------------------------ the page


_CSS = """
body{font:14px/1.35 system-ui,sans-serif;margin:16px;background:#1d1f22;color:#e4e4e4}
h1{font-size:20px;margin:0 0 4px}
.summary{color:#aaa;margin:0 0 12px}
.grid{display:grid;grid-template-columns:repeat(auto-fill,minmax(360px,1fr));gap:12px}
.card{background:#2a2d31;border-radius:6px;padding:8px;border-left:4px solid #4a4f55;min-width:0}
.card.warning{border-left-color:#d8a13a}.card.error{border-left-color:#e05555}
.pics{display:flex;gap:6px}
.pics figure{margin:0;flex:1;text-align:center;min-width:0}
.pics img{width:100%;aspect-ratio:1/1;object-fit:contain;background:#111;image-rendering:auto}
figcaption{font-size:11px;color:#999}
.none{display:flex;align-items:center;justify-content:center;aspect-ratio:1/1;background:#111;color:#777;
font-size:11px;padding:6px;box-sizing:border-box}
.name{font-weight:600;word-break:break-all;margin:6px 0 2px}
.meta,.about{color:#aaa;font-size:12px}
.strip{margin-top:6px}
.slabel{font-size:11px;color:#bbb;word-break:break-all}
.levels{display:flex;flex-wrap:wrap;gap:4px;align-items:flex-end}
.levels figure{margin:0;text-align:center}
.levels img{display:block;background:#111;image-rendering:pixelated;margin:auto}
.levels figcaption{font-size:10px;white-space:nowrap}
table.numbers{font-size:12px;border-collapse:collapse;margin-top:4px}
table.numbers td{padding:1px 8px 1px 0}
details{font-size:12px;color:#aaa;margin-top:4px}
ul{margin:4px 0 0;padding-left:18px;font-size:12px}
li.error{color:#ff8a8a}li.warning{color:#f0c060}li.info{color:#9aa}
.hint{color:#888}
.pages a{color:#8cc4ff;margin-right:8px}
"""

# Marks every image as loaded or failed and records the counts on <body>, so a script (or a person with the
# browser's inspector) can tell that the page is complete.
_SCRIPT = """
window.addEventListener('load', function () {
  var imgs = document.images, ok = 0;
  for (var i = 0; i < imgs.length; i++) {
    var good = imgs[i].complete && imgs[i].naturalWidth > 0;
    imgs[i].setAttribute('data-loaded', good ? 'yes' : 'no');
    if (good) { ok++; }
  }
  document.body.setAttribute('data-images-total', String(imgs.length));
  document.body.setAttribute('data-images-loaded', String(ok));
  var s = document.getElementById('status');
  if (s) { s.textContent = ok + ' of ' + imgs.length + ' images loaded'; }
});
"""


def _link(rel: str) -> str:
    return urllib.parse.quote(rel, safe="/")


def _figure(link: str | None, alt: str, caption: str, missing: str) -> str:
    esc = html.escape
    if link:
        return (f'<figure><img src="{_link(link)}" alt="{esc(alt)}" title="{esc(caption)}">'
                f"<figcaption>{esc(caption)}</figcaption></figure>")
    return f'<figure><div class="none">{esc(missing)}</div><figcaption>{esc(caption)}</figcaption></figure>'


def sheet_html(entries: Sequence[SheetEntry], *, title: str, links: Sequence[dict[str, str]],
               grids: Sequence[str], source: str = "") -> str:
    """The page: a card per entry. ``links[i]`` maps entry i's picture names to relative links: ``map``,
    ``lit``, ``old`` and ``sJ-K`` (picture K of strip J); ``grids`` holds the relative links of the PNG grid
    pages."""
    esc = html.escape
    n_warn = sum(1 for e in entries if e.problems)
    n_files = sum(max(1, len(e.files)) for e in entries)
    compare = any(e.old is not None or e.numbers for e in entries)
    what = "pair(s) compared" if compare else "asset(s)"
    parts = ["<!DOCTYPE html>", '<html lang="en"><head><meta charset="utf-8">',
             '<meta name="viewport" content="width=device-width,initial-scale=1">',
             f"<title>{esc(title)}</title><style>{_CSS}</style></head><body>",
             f"<h1>{esc(title)}</h1>",
             f'<p class="summary">{len(entries)} {what} in {n_files} file(s)'
             f'{" from " + esc(source) if source else ""}; {n_warn} with warnings or errors. '
             '<span id="status"></span></p>']
    if grids:
        glinks = " ".join(f'<a href="{_link(g)}">{esc(Path(g).name)}</a>' for g in grids)
        parts.append(f'<p class="pages">Picture grid: {glinks}</p>')
    parts.append('<div class="grid">')
    for e, lk in zip(entries, links, strict=True):
        worst = "error" if any(f.severity == "error" for f in e.findings) else (
            "warning" if e.problems else "")
        parts.append(f'<div class="card {worst}" data-asset="{esc(e.name)}" data-files="{len(e.files)}">')
        parts.append('<div class="pics">')
        if compare:
            parts.append(_figure(lk.get("old"), f"old {e.name}", "old", "not in the old set"))
            parts.append(_figure(lk.get("map"), f"new {e.name}", "new", "not in the new set"))
            parts.append(_figure(lk.get("lit"), f"difference of {e.name}", e.preview_note, e.preview_note))
        else:
            parts.append(_figure(lk.get("map"), f"map {e.name}", "map", "no thumbnail"))
            parts.append(_figure(lk.get("lit"), f"preview of {e.name}", e.preview_note, e.preview_note))
        parts.append("</div>")
        parts.append(f'<div class="name">{esc(e.name)}</div>')
        if e.width:
            parts.append(f'<div class="meta">{e.width}×{e.height}, {e.channels} channel(s), {esc(e.bits)}, '
                         f"{esc(e.kind)}</div>")
        if e.about:
            parts.append(f'<div class="about">{esc(e.about)}</div>')
        if e.numbers:
            rows = "".join(f"<tr><td>{esc(a)}</td><td>{esc(b)}</td></tr>" for a, b in e.numbers)
            parts.append(f'<table class="numbers">{rows}</table>')
        for j, strip in enumerate(e.strips):
            parts.append(f'<div class="strip" data-form="{esc(strip.form)}" data-levels="{len(strip.pictures)}">'
                         f'<div class="slabel">{esc(strip.label)}</div><div class="levels">')
            for k, (_, caption, width) in enumerate(strip.pictures):
                link = lk.get(f"s{j}-{k}")
                img = (f'<img src="{_link(link)}" alt="{esc(caption)}" style="width:{width}px">' if link else
                       f'<div class="none" style="width:{width}px">—</div>')
                parts.append(f"<figure>{img}<figcaption>{esc(caption)}</figcaption></figure>")
            parts.append("</div></div>")
        if len(e.files) > 1:
            items = "".join(f"<li>{esc(f)}</li>" for f in e.files)
            parts.append(f'<details><summary>{len(e.files)} files</summary><ul class="files">{items}</ul>'
                         "</details>")
        if e.findings:
            parts.append("<ul>")
            for f in e.findings:
                parts.append(f'<li class="{esc(f.severity)}">[{esc(f.severity)}] {esc(f.message)} '
                             f'<span class="hint">— {esc(f.hint)}</span></li>')
            parts.append("</ul>")
        parts.append("</div>")
    parts += ["</div>", f"<script>{_SCRIPT}</script>", "</body></html>"]
    return "\n".join(parts) + "\n"


# ------------------------------------------------------------------------------------------ the grid


def _ascii(text: str) -> str:
    return text.encode("ascii", "replace").decode("ascii")


def _text(canvas: np.ndarray, text: str, x: int, y: int, color, width: int) -> None:
    """One line of Hershey text (OpenCV), cut to fit ``width`` pixels."""
    import cv2

    font, scale = cv2.FONT_HERSHEY_SIMPLEX, 0.38
    text = _ascii(text)
    while text and cv2.getTextSize(text, font, scale, 1)[0][0] > width:
        text = text[:-2] + "~" if len(text) > 2 else ""
    cv2.putText(canvas, text, (x, y), font, scale, color, 1, cv2.LINE_AA)


def sheet_grid(entries: Sequence[SheetEntry], *, thumb: int = 160, columns: int = 4) -> list[np.ndarray]:
    """PNG grid pages (uint8 RGB): per entry the map and its preview side by side, then name, size and kind,
    and the first problem (in colour) with the number of others. :data:`PER_PAGE` entries per page."""
    pad, text_h = 8, 62
    cell_w, cell_h = 2 * thumb + 3 * pad, thumb + text_h + 2 * pad
    pages = []
    for start in range(0, max(len(entries), 1), PER_PAGE):
        chunk = entries[start:start + PER_PAGE]
        rows = max(1, math.ceil(len(chunk) / columns))
        cols = min(columns, max(len(chunk), 1))
        canvas = np.full((rows * cell_h, cols * cell_w, 3), 29, np.uint8)
        for i, e in enumerate(chunk):
            r, c = divmod(i, columns)
            x0, y0 = c * cell_w + pad, r * cell_h + pad
            for k, img in enumerate((e.thumbnail, e.preview)):
                bx = x0 + k * (thumb + pad)
                canvas[y0:y0 + thumb, bx:bx + thumb] = 17
                if img is not None:
                    fitted = _to_u8(_fit(img, thumb)[..., :3])
                    h, w = fitted.shape[:2]
                    oy, ox = y0 + (thumb - h) // 2, bx + (thumb - w) // 2
                    canvas[oy:oy + h, ox:ox + w] = fitted
                elif k == 1 and e.preview_note:
                    words, line, lines = e.preview_note.split(), "", []
                    for word in words:  # wrap the note over a few lines
                        if len(line) + len(word) > thumb // 8:
                            lines.append(line)
                            line = ""
                        line = f"{line} {word}".strip()
                    lines.append(line)
                    for j, text in enumerate(lines[:4]):
                        _text(canvas, text, bx + 6, y0 + thumb // 2 - 14 + 14 * j, (120, 120, 120), thumb - 12)
            ty = y0 + thumb + 14
            width = 2 * thumb + pad
            _text(canvas, e.name, x0, ty, (235, 235, 235), width)
            meta = f"{e.width}x{e.height} {e.channels}ch {e.bits} {e.kind}" if e.width else e.kind
            _text(canvas, meta, x0, ty + 14, (170, 170, 170), width)
            forms = "; ".join(f"{st.form} {len(st.pictures)}" for st in e.strips)
            extra = "  ".join(f"{a} {b}" for a, b in e.numbers[:2]) or (forms and f"strips: {forms}")
            if extra:
                _text(canvas, extra, x0, ty + 28, (150, 190, 230), width)
            probs = e.problems
            if probs:
                color = (240, 90, 90) if any(f.severity == "error" for f in probs) else (240, 190, 80)
                more = f" (+{len(probs) - 1} more)" if len(probs) > 1 else ""
                _text(canvas, f"{probs[0].severity}: {probs[0].code}{more}", x0, ty + 42, color, width)
        pages.append(canvas)
    return pages


# ------------------------------------------------------------------------------------------ writing


def sheet_paths(out_html: str | os.PathLike, pages: int) -> tuple[Path, list[Path]]:
    """The thumbnail folder and the grid PNG paths that belong to a sheet page ``NAME.html``:
    ``NAME_files/`` and ``NAME.png`` (one page) or ``NAME-1.png``, ``NAME-2.png`` ..."""
    out = Path(out_html)
    folder = out.with_name(out.stem + "_files")
    if pages <= 1:
        return folder, [out.with_suffix(".png")]
    return folder, [out.with_name(f"{out.stem}-{i}.png") for i in range(1, pages + 1)]


def write_sheet(entries: Sequence[SheetEntry], out_html: str | os.PathLike, *, title: str = "bakery contact sheet",
                source: str = "", columns: int = 4, thumb: int = 160) -> list[Path]:
    """Write the page, its thumbnail folder and the PNG grid page(s); return the written paths.

    Everything is written under temporary names in the output folder first and renamed into place at the end,
    so a failure leaves no partial sheet. An existing sheet of the same name is replaced.
    """
    import cv2

    from bakery.io.atomic import atomic_output, check_output_folder

    out = Path(out_html)
    if out.suffix.lower() not in (".html", ".htm"):
        raise BakeryError("a contact sheet is an HTML page: the output must end in .html", out)
    if not out.parent.is_dir():
        raise BakeryError("output folder does not exist", out.parent)
    grids = sheet_grid(entries, thumb=thumb, columns=columns)
    folder, grid_paths = sheet_paths(out, len(grids))
    check_output_folder([out, *grid_paths])  # before anything is written
    if folder.exists() and not folder.is_dir():
        raise BakeryError("a file has the name of the thumbnail folder", folder)
    work = Path(tempfile.mkdtemp(prefix=f".{out.stem}.sheet.", dir=out.parent))
    try:
        thumbs = work / folder.name
        thumbs.mkdir()
        links = []
        for i, e in enumerate(entries):
            named = {"map": e.thumbnail, "lit": e.preview, "old": e.old}
            for j, strip in enumerate(e.strips):
                named |= {f"s{j}-{k}": pic for k, (pic, caption, _) in enumerate(strip.pictures)
                          if not caption.endswith("missing")}
            lk = {}
            for key, img in named.items():
                if img is None:
                    continue
                name = f"{i + 1:04d}-{key}.png"
                if not cv2.imwrite(str(thumbs / name), _to_u8(img)[..., ::-1]):
                    raise BakeryError("cannot write a thumbnail", thumbs / name)
                lk[key] = f"{folder.name}/{name}"
            links.append(lk)
        for path, grid in zip(grid_paths, grids, strict=True):
            if not cv2.imwrite(str(work / path.name), grid[..., ::-1]):
                raise BakeryError("cannot write the grid picture", path)
        page = sheet_html(entries, title=title, links=links, grids=[p.name for p in grid_paths], source=source)
        # everything is made: move it into place, the page last
        if folder.exists():
            os.replace(folder, work / "replaced")
        os.replace(thumbs, folder)
        for path in grid_paths:
            os.replace(work / path.name, path)
        with atomic_output(out) as tmp:
            tmp.write_text(page, encoding="utf-8")
    finally:
        shutil.rmtree(work, ignore_errors=True)
    return [folder, *grid_paths, out]


def collect_maps(sources: list[Path], output: Path, *, recursive: bool = True,
                 allow_empty: bool = False) -> list[tuple[Path, Path]]:
    """(map, folder its name is relative to) for every map in ``sources`` (folders and files), leaving out the
    sheet's own thumbnails and grid pictures."""
    import re

    own_folder = sheet_paths(output, 1)[0]
    own_grid = re.compile(re.escape(output.stem) + r"(-\d+)?\.png")

    def own(p: Path) -> bool:
        return p.parent.resolve() == output.parent.resolve() and own_grid.fullmatch(p.name) is not None

    files: list[tuple[Path, Path]] = []
    for src in sources:
        if src.is_dir():
            files += [(p, src) for p in find_maps(src, recursive=recursive, exclude=[own_folder]) if not own(p)]
        elif src.is_file():
            files.append((src, src.parent))
        else:
            raise BakeryError("no such file or folder", src)
    if not files and not allow_empty:
        raise BakeryError("no maps found (looked for .png, .tif, .tiff, .exr, .hdr, .jpg, .ktx2)", sources[0])
    return files


def make_entries(files: list[tuple[Path, Path]], *, thumb: int = 160, preview: PreviewFn | None = None,
                 progress=None, max_pixels: int | None = None, expect_y: str | None = None) -> list[SheetEntry]:
    """The cards of ``files`` ((map, folder its name is relative to) pairs): one per asset
    (:func:`bakery.preview.assets.group_assets`); with several folders, names start with the folder's name."""
    from bakery.preview.assets import group_assets

    assets = group_assets(files)
    many_roots = len({root for _, root in files}) > 1
    entries = []
    for i, asset in enumerate(assets):
        e = make_asset_entry(asset, thumb=thumb, preview=preview, max_pixels=max_pixels, expect_y=expect_y)
        if progress is not None:
            progress((i + 1) / len(assets), asset.main.name)
        if many_roots:
            e.name = f"{asset.root.name}/{e.name}"
            e.files = [f"{asset.root.name}/{f}" for f in e.files]
        entries.append(e)
    return entries


def make_sheet(files: list[tuple[Path, Path]], output: Path, *, source: str = "", thumb: int = 160,
               columns: int = 4, lit: bool = True, env: Path | None = None, title: str = "bakery contact sheet",
               progress=None, expect_y: str | None = None) -> list[Path]:
    """The work of ``bakery sheet`` (also run after a batch): ``files`` holds (map, folder its card name is
    relative to) pairs, see :func:`collect_maps`; ``expect_y``: the target's green-channel convention
    (:func:`make_asset_entry`)."""
    from bakery.preview.lighting import choose_lighting

    if output.suffix.lower() not in (".html", ".htm"):
        raise BakeryError("output must end in .html or .htm", output)
    fn = lit_previews(choose_lighting(env), size=thumb) if lit else None
    entries = make_entries(files, thumb=thumb, preview=fn, progress=progress, expect_y=expect_y)
    return write_sheet(entries, output, title=title, source=source, columns=columns, thumb=thumb)


def make_compare_sheet(old: Path, new: Path, output: Path, *, thumb: int = 160, columns: int = 4,
                       recursive: bool = True, title: str = "bakery comparison", progress=None) -> list[Path]:
    """The work of ``bakery sheet OLD NEW --compare``: a card per asset of either folder, paired by relative
    path (:func:`bakery.preview.compare.compare_entries`)."""
    from bakery.preview.compare import compare_entries

    if output.suffix.lower() not in (".html", ".htm"):
        raise BakeryError("output must end in .html or .htm", output)
    for folder in (old, new):
        if not folder.is_dir():
            raise BakeryError("--compare takes two folders (old, then new)", folder)
    entries = compare_entries(collect_maps([old], output, recursive=recursive, allow_empty=True),
                              collect_maps([new], output, recursive=recursive, allow_empty=True),
                              thumb=thumb, progress=progress)
    if not entries:
        raise BakeryError("no maps found in either folder", old)
    return write_sheet(entries, output, title=title, source=f"{old} → {new}", columns=columns, thumb=thumb)
