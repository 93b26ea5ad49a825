"""Inspecting files: which files to look at, how to read them (images and KTX2), what their manifests say.

:func:`collect` turns command-line arguments (files, folders, glob patterns) into the maps to inspect and
counts the files that are not images (manifests, reports, recipes); :func:`inspect_paths` reads each map,
takes its kind and conventions from the manifest that still describes it
(:func:`bakery.io.manifest.manifest_for`; a stale manifest is ignored and the map judged on its own pixels),
runs :func:`bakery.inspect.inspect_pixels` and returns one :class:`MapReport` per file. A KTX2 file is
inspected level by level and face by face; the six loose faces of one cube (files whose names differ only in
the face token ``x+ x- y+ y- z+ z-``) are given one kind.
"""

from __future__ import annotations

import dataclasses
import glob
import os
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from bakery.errors import BakeryError
from bakery.inspect import Finding, MapFacts, facts_from_manifest, inspect_pixels

#: File endings inspected: the image formats bakery reads and KTX2.
MAP_SUFFIXES = (".png", ".tif", ".tiff", ".exr", ".hdr", ".pic", ".jpg", ".jpeg", ".ktx2")

#: The face tokens of loose cube faces (DEVELOPERS.md, vocabulary), in a file name between separators.
FACE_TOKEN = re.compile(r"(?<=[._-])([xyz][+-])(?=\.)")


@dataclass
class MapReport:
    """What ``inspect`` found in one file.

    Attributes
    ----------
    file : str
        The path as given (or found in a folder).
    kind : str
        The kind the map was judged as (:class:`bakery.inspect.MapFacts`).
    findings : list of Finding
        For KTX2 files, each finding names the level and face where it was first seen and how many others
        share it.
    facts : MapFacts
        What the manifest said (``facts.source == "manifest"``), or nothing (``"pixels"``).
    layout : str
        ``""`` for an image; ``"cubemap, 6 levels"`` or ``"2D, 9 levels"`` for a KTX2 file.
    """

    file: str
    kind: str
    findings: list[Finding] = field(default_factory=list)
    facts: MapFacts = field(default_factory=MapFacts)
    layout: str = ""

    def as_dict(self) -> dict:
        d = {"file": self.file, "kind": self.kind, "findings": [f.as_dict() for f in self.findings],
             "from": self.facts.source}
        if self.facts.bake:
            d["bake"] = self.facts.bake
        if self.facts.y:
            d["y"] = self.facts.y
        if self.layout:
            d["layout"] = self.layout
        return d


def is_map(path: Path) -> bool:
    return path.suffix.lower() in MAP_SUFFIXES and not path.name.startswith(".")


def sheet_picture(path: Path, root: Path) -> bool:
    """Whether ``path`` (found under the folder ``root``) belongs to a contact sheet ``NAME.html``: a file
    inside ``NAME_files/`` or one of its page pictures ``NAME.png`` / ``NAME-K.png`` beside it. These are
    thumbnails, not maps."""
    stem = re.sub(r"-\d+$", "", path.stem)
    if path.suffix.lower() == ".png" and (path.parent / f"{stem}.html").is_file():
        return True
    for folder in path.relative_to(root).parents:
        d = root / folder
        if d.name.endswith("_files") and (d.parent / f"{d.name[:-6]}.html").is_file():
            return True
    return False


def collect(args: list[str | os.PathLike], *, recursive: bool = False) -> tuple[list[Path], list[Path]]:
    """The maps named by ``args`` and the files skipped because they are not maps.

    Each argument is a file, a folder (its files; with ``recursive`` also those of its subfolders, hidden
    ones left out) or a glob pattern (``*``, ``?``, ``[...]``; ``**`` matches folders when ``recursive``).
    Files that are not images (manifests, reports, recipes) are skipped, and in folders also the pictures of
    contact sheets (:func:`sheet_picture`). A missing file, or a pattern that matches nothing, is a
    :class:`BakeryError`.
    """
    maps: list[Path] = []
    skipped: list[Path] = []
    seen: set[Path] = set()

    def add(p: Path, picture: bool = False) -> None:
        if p in seen:
            return
        seen.add(p)
        (maps if is_map(p) and not picture else skipped).append(p)

    for arg in args:
        text = os.fspath(arg)
        path = Path(text)
        if path.is_dir():
            walker = path.rglob("*") if recursive else path.glob("*")
            for p in sorted(walker):
                rel = p.relative_to(path).parts
                if p.is_file() and not any(part.startswith(".") for part in rel):
                    add(p, sheet_picture(p, path))
        elif path.is_file():
            add(path)
        elif glob.has_magic(text):
            try:
                found = sorted(glob.glob(text, recursive=recursive))
            except (re.error, ValueError) as exc:
                raise BakeryError(f"bad pattern ({exc})", text) from None
            files = [Path(f) for f in found if Path(f).is_file()]
            if not files:
                raise BakeryError("no file matches this pattern", text)
            for p in files:
                add(p)
        else:
            raise BakeryError("file not found", text)
    return maps, skipped


def inspect_paths(paths: list[Path], *, expect_y: str | None = None, kind: str | None = None,
                  manifests: bool = True, max_pixels: int | None = None,
                  names: list[str] | None = None) -> list[MapReport]:
    """Inspect every file of ``paths``; ``names`` (default: the paths as text) label the reports.

    A file that cannot be read gets a report of kind ``"unreadable"`` with one ``unreadable`` error.
    """
    names = names or [str(p) for p in paths]
    reports = [_inspect_one(p, n, expect_y=expect_y, kind=kind, manifests=manifests, max_pixels=max_pixels)
               for p, n in zip(paths, names, strict=True)]
    if kind is None:
        _regroup_faces(paths, reports, expect_y=expect_y, max_pixels=max_pixels)
    return reports


def _facts(path: Path, manifests: bool) -> tuple[MapFacts | None, bool]:
    """The manifest's facts for ``path`` and whether its own manifest is there but no longer matches it."""
    if not manifests:
        return None, False
    from bakery.io.manifest import manifest_for, manifest_path

    data = manifest_for(path)
    if data is None:
        return None, manifest_path(path).is_file()
    manifest_dir = Path(data["manifest"]).parent
    try:
        name = path.resolve().relative_to(manifest_dir.resolve()).as_posix()
    except ValueError:
        name = path.name
    return facts_from_manifest(data, name), False


STALE = Finding("manifest-stale", "info", "the manifest beside this file no longer matches it (the file changed "
                "after it was baked): the map is judged on its own pixels", "re-bake it, or remove the old manifest")


def _inspect_one(path: Path, name: str, *, expect_y, kind, manifests, max_pixels) -> MapReport:
    try:
        facts, stale = _facts(path, manifests)
        facts = facts or MapFacts()
        if path.suffix.lower() == ".ktx2":
            report = _inspect_ktx2(path, name, facts, expect_y=expect_y, kind=kind, max_pixels=max_pixels)
        else:
            from bakery.io.images import read_image

            img = read_image(path, max_pixels=max_pixels, allow_nonfinite=True)
            found_kind, findings = inspect_pixels(img.pixels, bits=img.bits, kind=kind, facts=facts,
                                                  expect_y=expect_y, name=path.name)
            report = MapReport(name, found_kind, findings, facts)
    except BakeryError as exc:
        msg = str(exc).removeprefix(f"{path}: ")
        return MapReport(name, "unreadable", [Finding("unreadable", "error", msg, "fix or remove the file")])
    if stale:
        report.findings.append(STALE)
    return report


def ktx2_bits(fmt) -> str:
    """The sample type a KTX2 texel format stands for (block formats: 8-bit, BC6H: half)."""
    if fmt.is_float:
        return "float" if fmt.bits == 32 and fmt.kind == "sfloat" else "half"
    return "16" if fmt.kind == "unorm" and fmt.bits == 16 else "8"


#: Block-compressed KTX2 levels smaller than this (texels, either axis) get no seam judgement: with fewer than
#: 8 blocks across, the jumps between 4x4 blocks outweigh the wrap edge's (seen on BC5 normal maps of tiling
#: heights whose 16x16 level scored 1.5 while its other levels scored about 1; common practice).
BLOCK_SEAM_MIN = 32


def _inspect_ktx2(path: Path, name: str, facts: MapFacts, *, expect_y, kind, max_pixels) -> MapReport:
    from bakery.classify import faces_kind, map_kind
    from bakery.io.envfiles import read_ktx2_limited

    tex = read_ktx2_limited(path, max_pixels)
    bits = ktx2_bits(tex.format)
    is_float = bits in ("half", "float")
    lv0 = tex.levels[0]
    if kind is None and facts.kind is None:
        if tex.cubemap:
            kind = faces_kind(list(lv0), is_float=is_float)
        else:
            kind = map_kind(lv0, is_float=is_float, name=path.name)
    kind = kind or facts.kind
    faces = ("x+", "x-", "y+", "y-", "z+", "z-")
    merged: dict[str, tuple[Finding, str, int]] = {}
    for level, data in enumerate(tex.levels):
        if tex.cubemap and kind == "environment":  # judged as one 6x1 strip: the whole cube's range counts
            units = [(f"level {level}", np.concatenate(list(data), axis=1))]
        elif tex.cubemap:
            units = [(f"level {level} face {faces[i]}", data[i]) for i in range(6)]
        else:
            units = [(f"level {level}", data)]
        for where, px in units:
            # levels past 0 average the normals: the integrability checks are for level 0
            lf = facts if level == 0 else dataclasses.replace(facts, gradient=False)
            if tex.format.block is not None and min(px.shape[:2]) < BLOCK_SEAM_MIN:
                lf = dataclasses.replace(lf, tiles=False)  # the 4x4 blocks dominate the jumps: no seam judged
            _, found = inspect_pixels(px, bits=bits, kind=kind, facts=lf, expect_y=expect_y,
                                      srgb_format=tex.format.srgb)
            for f in found:
                if f.code in merged:
                    first, at, count = merged[f.code]
                    merged[f.code] = (first, at, count + 1)
                else:
                    merged[f.code] = (f, where, 0)
    findings = []
    for f, where, others in merged.values():
        also = f" (and {others} other level(s)/face(s))" if others else ""
        findings.append(Finding(f.code, f.severity, f"{where}{also}: {f.message}", f.hint))
    layout = f"{'cubemap' if tex.cubemap else '2D'}, {len(tex.levels)} level(s), {tex.format.short_name}"
    return MapReport(name, kind, findings, facts, layout)


#: Findings about an environment's whole range, judged on a cube's six faces together.
CUBE_CODES = ("env-ldr", "env-clipped", "env-aspect")


def _regroup_faces(paths: list[Path], reports: list[MapReport], *, expect_y, max_pixels) -> None:
    """The six loose faces of one cube get one kind: their manifest's, else the kind of the six together
    (:func:`bakery.classify.faces_kind`). An environment's range (LDR, clipped highlights) is judged on the
    six faces side by side, reported on the first face: one face may well be dim, or hold a few equal
    texels where the symmetry of the sky meets in its centre."""
    groups: dict[str, list[int]] = {}
    for i, p in enumerate(paths):
        if reports[i].kind == "unreadable":
            continue
        m = FACE_TOKEN.search(p.name)
        if m:
            key = str(p.with_name(p.name[:m.start()] + "{face}" + p.name[m.end():]))
            groups.setdefault(key, []).append(i)
    from bakery.classify import faces_kind
    from bakery.io.images import read_image

    order = {t: k for k, t in enumerate(("x+", "x-", "y+", "y-", "z+", "z-"))}
    for members in groups.values():
        if len(members) != 6 or len({FACE_TOKEN.search(paths[i].name).group(1) for i in members}) != 6:
            continue
        members.sort(key=lambda i: order[FACE_TOKEN.search(paths[i].name).group(1)])
        imgs = [read_image(paths[i], max_pixels=max_pixels, allow_nonfinite=True) for i in members]
        if len({im.pixels.shape for im in imgs}) != 1:
            continue
        known = [reports[i].facts for i in members if reports[i].facts.source == "manifest"]
        kind = known[0].kind if known else faces_kind([np.nan_to_num(im.pixels) for im in imgs],
                                                      is_float=imgs[0].is_float)
        for i, im in zip(members, imgs, strict=True):
            rep = reports[i]
            if rep.kind != kind or kind == "environment":
                _, found = inspect_pixels(im.pixels, bits=im.bits, kind=kind, facts=rep.facts, expect_y=expect_y)
                stale = [f for f in rep.findings if f.code == STALE.code]
                if kind == "environment":
                    found = [f for f in found if f.code not in CUBE_CODES]
                reports[i] = MapReport(rep.file, kind, found + stale, rep.facts)
        if kind == "environment":
            strip = np.concatenate([im.pixels for im in imgs], axis=1)
            _, found = inspect_pixels(strip, bits=imgs[0].bits, kind=kind, facts=reports[members[0]].facts)
            reports[members[0]].findings[:0] = [
                Finding(f.code, f.severity, f"the cube of six faces: {f.message}", f.hint)
                for f in found if f.code in CUBE_CODES]
