"""A library as an artist thinks of it: files grouped into assets, and what bakery knows about each.

An **asset** is one map with everything written for it: its mip levels (``NAME.mipKK.ext``), side data per level
(``NAME.TAG.mipKK.ext``, e.g. the normal lengths ``NAME.length.mipKK.png``), cube faces (``NAME.FACE.ext``,
``NAME.mipKK.FACE.ext`` and the face patterns ``NAME_FACE.ext``, which stand for ``NAME_cube``), and the same map
in a KTX2 container (``NAME.ktx2``). Face tokens are ``x+ x- y+ y- z+ z-``. Files of one asset share a folder and
a base name; everything else is an asset of its own.

What an asset is comes from the manifest that still describes its main file
(:func:`bakery.io.manifest.manifest_for`): the bake that made it, the green-channel convention of normal maps
(the ``y`` parameter, or the flip of the input's convention for ``normal-fix``), the colour transfer of colour
mips, the roughness of each level of a specular chain, the layout of a split-sum table and the channel layout of
a packed texture (its ``channels`` entry). Without a manifest the map's kind is guessed by
:func:`bakery.classify.map_kind`.
"""

from __future__ import annotations

import os
import re
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from bakery.errors import BakeryError

#: Cube face tokens in face order +X, -X, +Y, -Y, +Z, -Z.
FACE_TOKENS = ("x+", "x-", "y+", "y-", "z+", "z-")
_MIP = re.compile(r"mip(\d\d)")
#: Side data written beside a map without a level number (``NAME.length.ktx2``: the normal lengths' chain).
SIDE_TAGS = ("length",)
_FACE_SUFFIX = re.compile(r"(.*)[_-](x\+|x-|y\+|y-|z\+|z-)", re.IGNORECASE)

#: Bakes whose outputs are tangent-space normal maps.
NORMAL_BAKES = ("normal", "blend", "normal-mips", "normal-fix")
#: Sheet kind of each bake's main output.
BAKE_KINDS = {**dict.fromkeys(NORMAL_BAKES, "normal"), "height": "height", "roughness": "roughness",
              "antialias": "roughness", "occlusion": "occlusion", "curvature": "mask", "mips": "color",
              "env-convert": "environment", "env-specular": "environment", "env-diffuse": "irradiance",
              "env-lut": "table", "pack": "pack"}
#: The kind :func:`bakery.inspect.inspect_pixels` judges a sheet kind as.
INSPECT_KINDS = {"normal": "normal", "height": "height", "color": "color", "environment": "environment",
                 "irradiance": "environment", "picture": "picture"}


@dataclass(frozen=True)
class NameParts:
    """What a file name says: ``base`` (the asset's name), mip ``level``, cube ``face`` token (or None), side
    data ``tag`` (or None) and the extension (lower case)."""

    base: str
    level: int = 0
    face: str | None = None
    tag: str | None = None
    ext: str = ""


def parse_name(name: str) -> NameParts:
    """Split a file name by the naming rules of bakery's outputs.

    Examples
    --------
    >>> parse_name("rock_normal.length.mip03.png")
    NameParts(base='rock_normal', level=3, face=None, tag='length', ext='.png')
    >>> parse_name("sky_specular.mip02.z-.exr")
    NameParts(base='sky_specular', level=2, face='z-', tag=None, ext='.exr')
    >>> parse_name("rock_normal.length.ktx2").tag
    'length'
    >>> parse_name("sky_x+.exr").base
    'sky_cube'
    """
    ext = Path(name).suffix
    stem = name[: len(name) - len(ext)] if ext else name
    parts = stem.split(".")
    face = None
    if len(parts) > 1 and parts[-1].lower() in FACE_TOKENS:
        face = parts.pop().lower()
    elif len(parts) == 1 and (m := _FACE_SUFFIX.fullmatch(stem)):
        face, parts = m.group(2).lower(), [m.group(1) + "_cube"]
    level, tag = 0, None
    if len(parts) > 1 and (m := _MIP.fullmatch(parts[-1])):
        level = int(m.group(1))
        parts.pop()
        if len(parts) > 1 and face is None:
            tag = parts.pop()
    elif len(parts) > 1 and face is None and parts[-1] in SIDE_TAGS:
        tag = parts.pop()
    return NameParts(".".join(parts), level, face, tag, ext.lower())


@dataclass
class Member:
    """One file of an asset."""

    path: Path
    parts: NameParts


@dataclass
class Asset:
    """The files of one map (see the module docstring); ``key`` is the folder and base name relative to
    ``root`` (forward slashes)."""

    key: str
    root: Path
    members: list[Member] = field(default_factory=list)

    @property
    def main(self) -> Path:
        """The file that stands for the asset: the level-0 image (PNG before other formats), else the KTX2
        container, else the first file."""
        def rank(m: Member) -> tuple:
            p = m.parts
            plain = p.level == 0 and p.face is None and p.tag is None
            return (not (plain and p.ext != ".ktx2"), not (plain and p.ext == ".ktx2"), p.face is not None,
                    p.tag is not None, p.level, p.ext != ".png", m.path.name)
        return min(self.members, key=rank).path

    def name_of(self, path: Path) -> str:
        return path.relative_to(self.root).as_posix()


def group_assets(files: Sequence[tuple[Path, Path]]) -> list[Asset]:
    """Group ``(file, folder its name is relative to)`` pairs into assets, in the order of their keys."""
    assets: dict[tuple[Path, str], Asset] = {}
    for path, root in files:
        parts = parse_name(path.name)
        rel_dir = path.parent.relative_to(root).as_posix()
        key = parts.base if rel_dir == "." else f"{rel_dir}/{parts.base}"
        asset = assets.setdefault((root, key), Asset(key, root))
        asset.members.append(Member(path, parts))
    for a in assets.values():
        a.members.sort(key=lambda m: (m.parts.ext, m.parts.tag or "", m.parts.level,
                                      FACE_TOKENS.index(m.parts.face) if m.parts.face else -1))
    return [assets[k] for k in sorted(assets, key=lambda k: (str(k[0]), k[1]))]


# ------------------------------------------------------------------------------------------ knowledge


@dataclass
class Knowledge:
    """What the manifest says about a map (all None when there is no manifest).

    Attributes
    ----------
    bake : str or None
    kind : str or None
        Sheet kind: normal, height, roughness, occlusion, mask, color, environment, irradiance, table, pack.
    y : {"up", "down"} or None
        Green-channel convention of a normal map.
    y_from : {"manifest", "target"}
        Where ``y`` comes from: the manifest, or the target's convention for a map whose manifest does not
        say (contact sheets with a profile).
    transfer : {"srgb", "linear"} or None
        Colour encoding of a colour map.
    level_roughness : list of float or None
        Perceptual roughness per level of a specular chain.
    layout : dict or None
        ``{"r": ROLE, ...}`` of a packed texture.
    table : dict or None
        The ``layout`` entry of a split-sum table (its channels, rows and columns).
    alpha_cutoff : float or None
        The alpha test's cutoff a colour map's manifest records
        (:func:`bakery.preview.inputs.alpha_cutoff_from_manifest`).
    mask : str or None
        Which map a ``curvature`` bake wrote (``mean``, ``convexity``, ``concavity``, ``cavity``).
    """

    bake: str | None = None
    kind: str | None = None
    y: str | None = None
    y_from: str = "manifest"
    transfer: str | None = None
    level_roughness: list[float] | None = None
    layout: dict[str, str] | None = None
    table: dict | None = None
    alpha_cutoff: float | None = None
    mask: str | None = None

    @property
    def note(self) -> str:
        if self.bake is None:
            return "no manifest: kind guessed from the pixels"
        bits = [f"{'a picture ' if self.kind == 'picture' else ''}made by {self.bake}"]
        if self.y:
            bits.append(f"Y-{self.y}")
        if self.transfer:
            bits.append(f"{self.transfer} colour")
        if self.layout:
            bits.append("channels " + ", ".join(f"{c}={r}" for c, r in self.layout.items()))
        return "; ".join(bits)


def knowledge(path: str | os.PathLike) -> Knowledge:
    """The :class:`Knowledge` of the manifest that still describes ``path`` (stale manifests are ignored)."""
    from bakery.io.manifest import manifest_for
    from bakery.preview.inputs import alpha_cutoff_from_manifest, pack_layout_from_manifest

    path = Path(path)
    m = manifest_for(path)
    if m is None:
        return Knowledge()
    bake = m.get("bake") if isinstance(m.get("bake"), str) else None
    kind = BAKE_KINDS.get(bake or "")
    layout = pack_layout_from_manifest(m)
    if layout is not None:
        kind = "pack"
    if m.get("picture") is True:  # a picture bakery made for people to look at (bakery.preview.picture)
        kind = "picture"
    if bake == "occlusion" and ".bent." in path.name:  # the bent normals beside the occlusion
        kind = "normal"
    k = Knowledge(bake=bake, kind=kind, layout=layout)
    if kind == "normal":
        k.y = manifest_y(m, path.parent)
    if kind == "color":
        t = m.get("transfer") if isinstance(m.get("transfer"), str) else _param(m, "transfer")
        k.transfer = t if t in ("srgb", "linear") else None
        k.alpha_cutoff = alpha_cutoff_from_manifest(m)
    rough = m.get("roughness_per_level")
    if isinstance(rough, dict):
        rough = rough.get("roughness")
    if isinstance(rough, list) and all(isinstance(v, int | float) for v in rough):
        k.level_roughness = [float(v) for v in rough]
    if kind == "table" and isinstance(m.get("layout"), dict):
        k.table = m["layout"]
    if bake == "curvature" and isinstance(m.get("map"), str):
        k.mask = m["map"]
    return k


def _param(m: dict, name: str):
    params = m.get("params")
    return params.get(name) if isinstance(params, dict) else None


def manifest_y(m: dict, folder: Path) -> str | None:
    """The green-channel convention a normal-map bake's manifest records: its ``y`` parameter (or ``y``, or
    ``conventions.y``); for ``normal-fix`` manifests without it the input's convention (from the input's own
    manifest in the same folder), switched when ``flip_y`` is set. None when the manifest does not say."""
    from bakery.io.manifest import manifest_for

    conv = m.get("conventions")
    y = _param(m, "y") or m.get("y") or (conv.get("y") if isinstance(conv, dict) else None)
    if y in ("up", "down"):
        return y
    if m.get("bake") == "normal-fix":
        entry = (m.get("inputs") or {}).get("normal")
        name = entry.get("name") if isinstance(entry, dict) else None
        src = manifest_for(folder / name) if isinstance(name, str) else None
        y_in = manifest_y(src, folder) if src is not None and src.get("bake") != "normal-fix" else None
        if y_in is None:
            return None
        return {"up": "down", "down": "up"}[y_in] if _param(m, "flip_y") else y_in
    return None


# ------------------------------------------------------------------------------------------ reading forms


@dataclass
class Form:
    """One way an asset is stored, read into memory: a KTX2 container, a chain of loose files of one format,
    the side data of one tag, or loose cube faces.

    Attributes
    ----------
    label : str
    files : list of Path
    levels : list of ndarray, float32
        ``(H, W, C)`` or, for cubes, ``(6, N, N, C)``; level 0 first (a level whose file is missing is None).
    bits : str
        ``8``, ``16``, ``half``, ``float``: the sample type the values came from.
    cube : bool
    tag : str or None
        Side data tag (``length``), else None.
    fmt : str
        The KTX2 format (``bc5``, ``rgba16f``), else the file extension.
    """

    label: str
    files: list[Path]
    levels: list[np.ndarray | None]
    bits: str
    cube: bool = False
    tag: str | None = None
    fmt: str = ""
    errors: list[str] = field(default_factory=list)
    source: str = "files"  # ktx2, files, tag, faces


def read_forms(asset: Asset, *, max_pixels: int | None = None) -> list[Form]:
    """Every :class:`Form` of an asset, the main file's first. Files that cannot be read are recorded in the
    form's ``errors`` (one line each) and leave their level empty."""
    groups: dict[tuple, list[Member]] = {}
    for m in asset.members:
        p = m.parts
        if p.ext == ".ktx2":
            key = ("ktx2", m.path.name)
        elif p.face is not None:
            key = ("faces", p.ext)
        else:
            key = ("tag" if p.tag else "loose", p.ext, p.tag)
        groups.setdefault(key, []).append(m)
    main = asset.main
    forms = []
    for key, members in groups.items():
        if key[0] == "ktx2":
            form = _ktx2_form(members[0].path, max_pixels)
            form.tag = members[0].parts.tag
            forms.append(form)
        elif key[0] == "faces":
            forms.append(_faces_form(members, max_pixels))
        else:
            forms.append(_loose_form(members, key[2], max_pixels))
    forms.sort(key=lambda f: (main not in f.files, f.tag is not None))
    return forms


def _ktx2_bits(fmt) -> str:
    if fmt.is_float or fmt.srgb:  # sRGB formats are decoded to linear values by the reader
        return "float" if fmt.bits == 32 else "half"
    return "16" if fmt.bits == 16 else "8"


def _ktx2_form(path: Path, max_pixels: int | None) -> Form:
    from bakery.io.envfiles import read_ktx2_limited

    try:
        tex = read_ktx2_limited(path, max_pixels)
    except BakeryError as exc:
        return Form(path.name, [path], [None], "", errors=[str(exc)], fmt="ktx2", source="ktx2")
    fmt = tex.format.short_name
    what = "cube map" if tex.cubemap else "2D"
    label = f"{path.name}: KTX2 {fmt}, {what}, {len(tex.levels)} level(s)"
    if tex.supercompressed:
        label += ", Zstandard"
    return Form(label, [path], [np.asarray(lv, np.float32) for lv in tex.levels], _ktx2_bits(tex.format),
                cube=tex.cubemap, fmt=fmt, source="ktx2")


def _read_file(path: Path, max_pixels: int | None):
    from bakery.io.images import read_image

    return read_image(path, max_pixels=max_pixels, allow_nonfinite=True)


def _loose_form(members: list[Member], tag: str | None, max_pixels: int | None) -> Form:
    top = max(m.parts.level for m in members)
    levels: list[np.ndarray | None] = [None] * (top + 1)
    errors, bits = [], ""
    for m in members:
        try:
            img = _read_file(m.path, max_pixels)
        except BakeryError as exc:
            errors.append(str(exc))
            continue
        levels[m.parts.level] = img.pixels
        bits = bits or img.bits
    files = [m.path for m in members]
    what = f"{tag} (side data)" if tag else "files"
    label = f"{len(files)} {what}" if len(files) > 1 else files[0].name
    return Form(label, files, levels, bits, tag=tag, fmt=members[0].parts.ext.lstrip("."), errors=errors,
                source="tag" if tag else "files")


def _faces_form(members: list[Member], max_pixels: int | None) -> Form:
    top = max(m.parts.level for m in members)
    faces: list[list[np.ndarray | None]] = [[None] * 6 for _ in range(top + 1)]
    errors, bits = [], ""
    for m in members:
        try:
            img = _read_file(m.path, max_pixels)
        except BakeryError as exc:
            errors.append(str(exc))
            continue
        faces[m.parts.level][FACE_TOKENS.index(m.parts.face)] = img.pixels
        bits = bits or img.bits
    levels: list[np.ndarray | None] = []
    for k, fs in enumerate(faces):
        shapes = {f.shape for f in fs if f is not None}
        if len(shapes) != 1 or next(iter(shapes))[0] != next(iter(shapes))[1]:
            if shapes:
                errors.append(f"level {k}: the faces are not squares of one size")
            levels.append(None)
            continue
        shape = next(iter(shapes))
        levels.append(np.stack([f if f is not None else np.zeros(shape, np.float32) for f in fs]))
        missing = [FACE_TOKENS[i] for i, f in enumerate(fs) if f is None]
        if missing:
            errors.append(f"level {k}: face(s) {' '.join(missing)} missing")
    files = [m.path for m in members]
    return Form(f"{len(files)} face files", files, levels, bits, cube=True,
                fmt=members[0].parts.ext.lstrip("."), errors=errors, source="faces")
