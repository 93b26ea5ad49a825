"""From files and option values to the renderer's plain inputs (:class:`~bakery.preview.shading.Material`).

The I/O edge of the preview: reads maps with :func:`bakery.io.read_image`, applies the file conventions
(normal-map green channel, sRGB colour), and checks values, so :mod:`bakery.preview.render` only sees arrays.
"""

from __future__ import annotations

import os
from pathlib import Path

import numpy as np

from bakery.errors import BakeryError


def parse_value_or_path(text: str, what: str, *, channels: int) -> float | tuple[float, ...] | Path:
    """``"0.4"`` -> 0.4; ``"0.8,0.5,0.2"`` -> a tuple (when ``channels`` is 3); anything else is a file path.

    Examples
    --------
    >>> parse_value_or_path("0.25", "roughness", channels=1)
    0.25
    >>> parse_value_or_path("1,0.5,0", "base colour", channels=3)
    (1.0, 0.5, 0.0)
    """
    parts = [p.strip() for p in text.split(",")]
    try:
        values = tuple(float(p) for p in parts)
    except ValueError:
        return Path(text)
    if len(values) == 1:
        return values[0]
    if len(values) != channels:
        raise BakeryError(f"{what} takes one number{f' or {channels} numbers' if channels > 1 else ''} or a "
                          f"file; got {text!r}")
    return values


def decode_normal_pixels(pixels: np.ndarray, *, green: str = "up") -> np.ndarray:
    """Stored normal-map values (H, W, C) in [0, 1] -> unit normals (H, W, 3), +Y up.

    :func:`bakery.normals.decode_normals` (encoding ``n·0.5 + 0.5``, glTF 2.0; ``green="down"`` for files whose
    green channel stores −y; two-channel files rebuild z), then renormalised; zero vectors become (0, 0, 1).
    """
    from bakery.normals.encode import decode_normals, normalize

    return normalize(decode_normals(pixels, y=green))[0]


def _read(path: Path, *, color: str = "data", max_pixels: int | None = None) -> np.ndarray:
    """Pixels of an image file, or level 0 of a 2D KTX2 texture (block-compressed ones decoded; sRGB formats
    come back linear, as ``color="srgb"`` would give)."""
    from bakery.io.images import read_image

    if Path(path).suffix.lower() == ".ktx2":
        from bakery.io.ktx2 import read_ktx2

        tex = read_ktx2(path)
        if tex.cubemap:
            raise BakeryError("is a cubemap; a material map is a 2D texture", path)
        return np.ascontiguousarray(tex.levels[0], dtype=np.float32)
    return read_image(path, color=color, max_pixels=max_pixels).pixels


#: Roles a channel of a packed texture can hold (the ``channels`` entry of a pack bake's manifest).
PACK_ROLES = ("color", "alpha", "roughness", "smoothness", "metalness", "occlusion", "height", "cavity",
              "curvature", "mask", "constant")
#: Roles the preview uses; the others are shown on the contact sheet only.
PREVIEW_ROLES = ("color", "roughness", "smoothness", "metalness", "occlusion", "height")
CHANNEL_NAMES = ("r", "g", "b", "a")


def parse_pack_layout(text: str) -> dict[str, str]:
    """``"occlusion,roughness,metalness"`` -> ``{"r": "occlusion", "g": "roughness", "b": "metalness"}``: one
    role per channel in r, g, b, a order; ``-`` leaves a channel unused.

    Examples
    --------
    >>> parse_pack_layout("occlusion, roughness, -, metalness")
    {'r': 'occlusion', 'g': 'roughness', 'a': 'metalness'}
    """
    parts = [p.strip().lower() for p in text.split(",")]
    if not 1 <= len(parts) <= 4:
        raise BakeryError(f"--pack-layout names one role per channel (1 to 4, r,g,b,a); got {text!r}")
    layout = {}
    for ch, role in zip(CHANNEL_NAMES, parts, strict=False):
        if role in ("-", ""):
            continue
        if role not in PACK_ROLES:
            raise BakeryError(f"--pack-layout: unknown role {role!r}; roles are {', '.join(PACK_ROLES)} (or -)")
        layout[ch] = role
    return layout


def pack_layout_from_manifest(manifest: dict | None) -> dict[str, str] | None:
    """The channel layout ``{"r": ROLE, ...}`` of a packed texture's manifest (its ``channels`` entry), or None
    when the manifest has none or it is malformed."""
    entry = manifest.get("channels") if isinstance(manifest, dict) else None
    if not isinstance(entry, dict):
        return None
    layout = {}
    for ch, spec in entry.items():
        role = spec.get("role") if isinstance(spec, dict) else None
        if str(ch).lower() not in CHANNEL_NAMES or role not in PACK_ROLES:
            return None
        layout[str(ch).lower()] = role
    return layout or None


def alpha_cutoff_from_manifest(manifest: dict | None) -> float | None:
    """The alpha test's cutoff a colour map's manifest records (the ``mips`` bake's ``coverage`` entry: the
    ``alpha-cutoff`` that ``--coverage`` keeps coverage at and each level's coverage is reported at), or None.

    Examples
    --------
    >>> alpha_cutoff_from_manifest({"bake": "mips", "coverage": {"kept": True, "alpha_cutoff": 0.75}})
    0.75
    >>> alpha_cutoff_from_manifest({"bake": "mips", "coverage": None}) is None
    True
    """
    entry = manifest.get("coverage") if isinstance(manifest, dict) else None
    cut = entry.get("alpha_cutoff") if isinstance(entry, dict) else None
    if isinstance(cut, int | float) and not isinstance(cut, bool) and 0 < cut <= 1:
        return float(cut)
    return None


def alpha_test_for(pixels: np.ndarray, cutoff: float | None = None):
    """The :class:`~bakery.preview.shading.AlphaTest` of an RGBA colour map ``(H, W, 4)`` whose alpha is below 1
    somewhere, at ``cutoff`` (the one its manifest records, :func:`alpha_cutoff_from_manifest`) or else at
    the default 0.5 (common practice); None for maps without alpha or fully opaque ones."""
    from bakery.preview.shading import AlphaTest

    if pixels.shape[-1] != 4 or pixels[..., 3].min() >= 1:
        return None
    opacity = np.clip(pixels[..., 3], 0, 1)
    return AlphaTest(opacity) if cutoff is None else AlphaTest(opacity, cutoff)


def maps_from_pack(pixels: np.ndarray, layout: dict[str, str], *, bits: str) -> dict[str, np.ndarray]:
    """The material maps a packed texture holds, read through its channel ``layout``.

    Returns a dict with any of ``roughness`` (smoothness s becomes r = 1 − s), ``metallic``, ``occlusion``
    (each (H, W) in [0, 1]), ``base_color`` ((H, W, 3) linear: one ``color`` channel is grey, three are RGB in
    channel order; 8/16-bit values are decoded from sRGB as colour maps are, IEC 61966-2-1) and ``height``
    ((H, W)). The role says what the channel holds as stored; the manifest's ``invert`` flag only says how it
    was made from its source.
    """
    from bakery.color import srgb_to_linear

    px = np.asarray(pixels, dtype=np.float32)
    maps: dict[str, np.ndarray] = {}
    color = []
    for ch, role in layout.items():
        k = CHANNEL_NAMES.index(ch)
        if k >= px.shape[2]:
            raise BakeryError(f"the layout names channel {ch} but the texture has {px.shape[2]} channel(s)")
        v = px[..., k]
        if role == "color":
            color.append(v)
            continue
        if role not in PREVIEW_ROLES:
            continue
        key = {"smoothness": "roughness", "metalness": "metallic"}.get(role, role)
        if key in maps:
            raise BakeryError(f"the layout holds {key} twice")
        if role != "height" and (v.min() < 0 or v.max() > 1):
            raise BakeryError(f"the {role} channel {ch} holds values outside [0, 1]")
        maps[key] = 1 - v if role == "smoothness" else v
    if color:
        if len(color) not in (1, 3):
            raise BakeryError(f"a packed base colour needs 1 or 3 colour channels; the layout has {len(color)}")
        c = np.stack(color * (3 if len(color) == 1 else 1), axis=-1)
        maps["base_color"] = np.clip(srgb_to_linear(c) if bits in ("8", "16") else c, 0, 1).astype(np.float32)
    return maps


def _unit_map(path: Path, what: str, max_pixels: int | None) -> np.ndarray:
    """A single-channel (or equal-channel) map with values in [0, 1]."""
    px = _read(path, max_pixels=max_pixels)
    if px.shape[2] >= 3 and not (np.array_equal(px[..., 0], px[..., 1])
                                 and np.array_equal(px[..., 0], px[..., 2])):
        raise BakeryError(f"a {what} map needs one channel (or three equal ones); this one has colour", path)
    v = px[..., 0]
    if v.min() < 0 or v.max() > 1:
        raise BakeryError(f"{what} values must lie in [0, 1]; found {v.min():.3g} to {v.max():.3g}", path)
    return v


def load_material(*, normal: str | os.PathLike | None = None, green: str = "up",
                  height: str | os.PathLike | None = None, strength: float | None = None,
                  roughness: float | str | os.PathLike = 0.5, exponent: str | os.PathLike | None = None,
                  base_color: float | tuple[float, float, float] | str | os.PathLike = 0.5,
                  metallic: float | str | os.PathLike = 0.0, occlusion: str | os.PathLike | None = None,
                  pack: str | os.PathLike | None = None, pack_layout: dict[str, str] | None = None,
                  alpha_cutoff: float | None = None, max_pixels: int | None = None):
    """Build a :class:`~bakery.preview.shading.Material` from files and values.

    Parameters
    ----------
    normal : path, optional
        Tangent-space normal map (2, 3 or 4 channels, alpha ignored). None: flat.
    green : {"up", "down"}
        The normal map file's green-channel convention.
    height : path, optional
        A height map instead of ``normal``: normals are baked from it in memory with
        :func:`bakery.normals.normal_from_height` (the ``bakery normal`` defaults: Scharr derivatives, wrapping
        edges).
    strength : float, optional
        Strength of that bake (texels per height unit); default as ``bakery normal``: relief = width / 32.
    roughness : float or path
        Perceptual roughness in [0, 1], or a single-channel map of it (data, never colour-converted).
    exponent : path, optional
        A Blinn-Phong specular-exponent map instead of a roughness map, converted in memory with
        :func:`bakery.roughness.roughness_from_exponent` (its defaults: the peak rule of Walter et al. 2007).
    base_color : float, (r, g, b) or path
        Linear values in [0, 1], or a colour map (8/16-bit files decoded from sRGB, IEC 61966-2-1; float files
        taken as linear). A map with alpha below 1 somewhere is alpha-tested
        (:class:`~bakery.preview.shading.AlphaTest`) at the cutoff its manifest records
        (:func:`alpha_cutoff_from_manifest`), else at 0.5 (common practice), unless ``alpha_cutoff`` is given.
    metallic : float or path
        Metalness in [0, 1], or a single-channel map of it.
    occlusion : path, optional
        Ambient-occlusion map in [0, 1] (e.g. of ``bakery occlusion``), multiplying the environment's light.
    pack : path, optional
        A packed texture: its channels give any of roughness, smoothness, metalness, occlusion, colour and
        height (:func:`maps_from_pack`), laid out as ``pack_layout`` says or, without it, as the ``channels``
        entry of its manifest says. A quantity may come from the pack or from its own option, not both.
    pack_layout : dict, optional
        ``{"r": ROLE, ...}`` (:func:`parse_pack_layout`).
    max_pixels : int, optional
        Passed to :func:`bakery.io.read_image`.
    """
    from bakery.preview.shading import Material

    normals = None
    cut = None
    if normal is not None and height is not None:
        raise BakeryError("give a normal map or a height map, not both")
    if exponent is not None and isinstance(roughness, str | os.PathLike):
        raise BakeryError("give a roughness map or an exponent map, not both")
    packed: dict[str, np.ndarray] = {}
    if pack is not None:
        packed = _read_pack(Path(pack), pack_layout, max_pixels)
        given = {"roughness": isinstance(roughness, str | os.PathLike) or exponent is not None,
                 "metallic": isinstance(metallic, str | os.PathLike), "occlusion": occlusion is not None,
                 "base_color": isinstance(base_color, str | os.PathLike),
                 "height": normal is not None or height is not None}
        for key in packed:
            if given[key]:
                raise BakeryError(f"{key.replace('_', ' ')} comes from the packed texture and from its own "
                                  "option: give one", Path(pack))
    elif pack_layout is not None:
        raise BakeryError("--pack-layout goes with a packed texture (--pack)")
    heights = None
    if height is not None:
        path = Path(height)
        px = _read(path, max_pixels=max_pixels)
        if px.shape[2] >= 3 and not (np.array_equal(px[..., 0], px[..., 1])
                                     and np.array_equal(px[..., 0], px[..., 2])):
            raise BakeryError("a height map needs one channel (or three equal ones); this one has colour", path)
        heights = px[..., 0]
    elif "height" in packed:
        heights = packed["height"]
    if heights is not None:
        from bakery.normals.from_height import DEFAULT_RELIEF_RATIO, normal_from_height, strength_from_size

        if strength is None:
            s = strength_from_size(heights.shape, DEFAULT_RELIEF_RATIO, 1.0)
        elif not (np.isfinite(strength) and strength != 0):
            raise BakeryError(f"--strength must be a non-zero number; got {strength}")
        else:
            s = float(strength)
        normals = normal_from_height(heights, strength=s)
    elif strength is not None:
        raise BakeryError("--strength applies to a height map (--height)")
    if normal is not None:
        from bakery.bakes.normals import read_normals  # decodes, warns about and renormalizes non-unit vectors

        normals, _ = read_normals(Path(normal), green)
    if exponent is not None:
        from bakery.roughness import roughness_from_exponent

        path = Path(exponent)
        px = _read(path, max_pixels=max_pixels)
        if px.shape[2] != 1:
            raise BakeryError(f"an exponent map needs one channel; this one has {px.shape[2]}", path)
        try:
            rough = np.asarray(roughness_from_exponent(px[..., 0]), dtype=np.float32)
        except BakeryError as exc:
            raise BakeryError(str(exc), path) from None
    elif isinstance(roughness, str | os.PathLike):
        rough = _unit_map(Path(roughness), "roughness", max_pixels)
    elif "roughness" in packed:
        rough = packed["roughness"]
    else:
        rough = float(roughness)
        if not 0 <= rough <= 1:
            raise BakeryError(f"--roughness must lie in [0, 1]; got {rough}")
    if isinstance(base_color, str | os.PathLike):
        path = Path(base_color)
        px = _read(path, color="srgb", max_pixels=max_pixels)
        if px.shape[2] == 1:
            px = np.repeat(px, 3, axis=2)
        elif px.shape[2] == 2:
            raise BakeryError("a base colour map needs 1, 3 or 4 channels; this one has 2", path)
        color = np.clip(px[..., :3], 0, 1)
        if px.shape[2] == 4:
            from bakery.io.manifest import manifest_for

            cut = alpha_test_for(px, alpha_cutoff if alpha_cutoff is not None else
                                 alpha_cutoff_from_manifest(manifest_for(path)))
    elif "base_color" in packed:
        color = packed["base_color"]
    else:
        c = np.broadcast_to(np.asarray(base_color, dtype=np.float32), (3,))
        if c.min() < 0 or c.max() > 1:
            raise BakeryError(f"base colour values must lie in [0, 1]; got {tuple(float(v) for v in c)}")
        color = c
    if isinstance(metallic, str | os.PathLike):
        metal = _unit_map(Path(metallic), "metalness", max_pixels)
    elif "metallic" in packed:
        metal = packed["metallic"]
    else:
        metal = float(metallic)
        if not 0 <= metal <= 1:
            raise BakeryError(f"--metallic must lie in [0, 1]; got {metallic}")
    ao = _unit_map(Path(occlusion), "occlusion", max_pixels) if occlusion is not None else packed.get("occlusion")
    return Material(normals=normals, roughness=rough, base_color=color, metallic=metal, occlusion=ao,
                    alpha_test=cut)


def _read_pack(path: Path, layout: dict[str, str] | None, max_pixels: int | None) -> dict[str, np.ndarray]:
    """The material maps of a packed texture file (layout given, or from its manifest)."""
    from bakery.io.images import read_image
    from bakery.io.manifest import manifest_for

    if layout is None:
        layout = pack_layout_from_manifest(manifest_for(path))
        if layout is None:
            raise BakeryError("no manifest with a channel layout describes this packed texture; name the layout "
                              "with --pack-layout (e.g. occlusion,roughness,metalness)", path)
    if path.suffix.lower() == ".ktx2":
        px, bits = _read(path, max_pixels=max_pixels), "float"  # KTX2 levels come back linear
    else:
        img = read_image(path, max_pixels=max_pixels)
        px, bits = img.pixels, img.bits
    try:
        return maps_from_pack(px, layout, bits=bits)
    except BakeryError as exc:
        raise BakeryError(str(exc), path) from None
