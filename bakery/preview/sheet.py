"""Contact sheets: every map of a folder (or of a batch's outputs) at a glance, in a browser or as a picture.

A sheet is an HTML page plus one or more PNG grids. Each map gets a card: a thumbnail of the map itself, a lit
preview where the kind of map allows one (:mod:`bakery.preview.render`), its name, size, channels and bit
bits, the kind :mod:`bakery.classify` sees in it, and the findings of :mod:`bakery.inspect` (warnings and
errors stand out). The page needs no server and no network: thumbnails are plain PNG files in a folder beside
it (``NAME_files/``), referenced by relative links, and the page carries its own styles.

The core (:func:`thumbnail`, :func:`sheet_html`, :func:`sheet_grid`) is pure; :func:`make_entry` reads one file
and :func:`write_sheet` writes the page, the thumbnails and the grids (atomically: a failed run leaves nothing).

Thumbnails show what is stored: colour maps as stored (sRGB-encoded files as they are, float colour tone
mapped), normal maps as their encoded RGB, single-channel 8/16-bit data as grey levels, float data stretched
between its minimum and maximum, HDR environments tone mapped with the extended Reinhard operator and an
automatic exposure (Reinhard et al. 2002, eqs. 1-4).
"""

from __future__ import annotations

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
MAP_SUFFIXES = (".png", ".tif", ".tiff", ".exr", ".hdr", ".pic", ".jpg", ".jpeg")

#: Entries per PNG grid page.
PER_PAGE = 48


@dataclass
class SheetEntry:
    """One card of the sheet.

    Attributes
    ----------
    name : str
        The map's path relative to the sheet's folder of maps (forward slashes).
    width, height, channels : int
    bits : str
        ``u8``, ``u16``, ``f16`` or ``f32`` (empty when the file could not be read).
    kind : str
        What :func:`bakery.classify.map_kind` sees (or ``"unreadable"``).
    findings : list of Finding
        From :func:`bakery.inspect.inspect_pixels`; an unreadable file carries one ``unreadable`` error.
    thumbnail : ndarray, float32, (h, w, 3)
        Display values (sRGB-encoded) in [0, 1]; None for an unreadable file.
    preview : ndarray, float32, (t, t, 3) or None
        The lit preview, display values in [0, 1].
    preview_note : str
        What the preview shows, or why there is none.
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


def _fit(img: np.ndarray, size: int) -> np.ndarray:
    """Shrink (area average) or enlarge (nearest, so texels stay visible) to fit a size x size box."""
    import cv2

    h, w = img.shape[:2]
    scale = size / max(h, w)
    nh, nw = max(1, round(h * scale)), max(1, round(w * scale))
    interp = cv2.INTER_AREA if scale < 1 else cv2.INTER_NEAREST
    out = cv2.resize(np.ascontiguousarray(img, dtype=np.float32), (nw, nh), interpolation=interp)
    return out.reshape(nh, nw, -1)


def thumbnail(pixels: np.ndarray, kind: str, *, bits: str, size: int = 160) -> np.ndarray:
    """Display values (sRGB-encoded, [0, 1], float32, RGB) of a map fitted in a ``size`` box.

    Parameters
    ----------
    pixels : ndarray, float32, (H, W, C)
        As read by :func:`bakery.io.read_image` with ``color="data"``.
    kind : str
        From :func:`bakery.classify.map_kind`.
    bits : {"8", "16", "half", "float"}
    size : int
    """
    from bakery.preview.tonemap import auto_exposure, display

    px = np.nan_to_num(np.asarray(pixels, dtype=np.float32), nan=0.0, posinf=0.0, neginf=0.0)
    small = _fit(px, size)
    c = small.shape[2]
    is_float = bits in ("half", "float")
    if kind == "environment":
        rgb = small[..., :3] if c >= 3 else np.repeat(small[..., :1], 3, axis=2)
        return display(rgb, exposure=auto_exposure(rgb))
    if c == 2:  # XY normal map: show x, y and the rebuilt z, encoded
        z = np.sqrt(np.clip(1 - (small[..., 0] * 2 - 1) ** 2 - (small[..., 1] * 2 - 1) ** 2, 0, 1)) * 0.5 + 0.5
        rgb = np.concatenate([small, z[..., None]], axis=2)
    elif c == 1 or kind in ("height", "data"):
        g = small[..., 0]
        if is_float and (g.min() < 0 or g.max() > 1):
            lo, hi = float(g.min()), float(g.max())
            g = (g - lo) / (hi - lo) if hi > lo else np.zeros_like(g)
        rgb = np.repeat(g[..., None], 3, axis=2)
    else:
        rgb = small[..., :3]
        if is_float and kind == "color" and rgb.max() > 1:
            from bakery.preview.tonemap import display as show

            return show(rgb, exposure=auto_exposure(rgb))
        if is_float and kind == "color":
            from bakery.color import linear_to_srgb

            rgb = linear_to_srgb(np.clip(rgb, 0, 1))
    return np.clip(rgb, 0, 1).astype(np.float32)


def _to_u8(img: np.ndarray) -> np.ndarray:
    return np.rint(np.clip(img, 0, 1) * 255).astype(np.uint8)


#: A function that makes the lit preview of one map: (pixels, kind, bits, name) -> (image or None, note).
PreviewFn = Callable[[np.ndarray, str, str, str], tuple[np.ndarray | None, str]]


#: Name parts that say what a single-channel map holds (common practice in texture naming).
ROUGHNESS_WORDS = ("rough",)
HEIGHT_WORDS = ("height", "disp", "bump")
EXPONENT_WORDS = ("exponent", "shin")


def material_for(pixels: np.ndarray, kind: str, bits: str, name: str):
    """The material a map is previewed as, and a note saying how; ``(None, reason)`` when there is none.

    - normal maps: read as Y-up (bakery's and glTF's convention), so a Y-down map shows its inverted relief;
    - colour maps: the base colour (8/16-bit files decoded from sRGB, IEC 61966-2-1);
    - single-channel maps say what they hold by name only: ``rough`` -> roughness; ``height``, ``disp``,
      ``bump`` -> normals baked in memory (:func:`bakery.normals.normal_from_height`, relief = width / 32 as
      ``bakery normal`` assumes); float maps named ``exponent`` or ``shin`` -> roughness through
      :func:`bakery.roughness.roughness_from_exponent`.
    """
    from bakery.color import srgb_to_linear
    from bakery.preview.shading import Material

    px = np.asarray(pixels, dtype=np.float32)
    stem = Path(name).stem.lower()
    if kind == "normal":
        from bakery.preview.inputs import decode_normal_pixels

        n = decode_normal_pixels(px, green="up")
        return Material(normals=n.astype(np.float32), roughness=0.35), "lit: normal map read as Y-up"
    if kind == "color" and px.shape[2] >= 3:
        rgb = px[..., :3]
        rgb = srgb_to_linear(rgb) if bits in ("8", "16") else np.clip(rgb, 0, None)
        return Material(base_color=np.minimum(rgb, 1), roughness=0.5), "lit: base colour"
    if kind in ("height", "data"):
        g = px[..., 0]
        if any(w in stem for w in ROUGHNESS_WORDS) and g.min() >= 0 and g.max() <= 1:
            # a dark base colour so the specular reflection, where roughness shows, dominates
            return Material(roughness=g, base_color=(0.04, 0.04, 0.04)), "lit: roughness map (dark base)"
        if any(w in stem for w in HEIGHT_WORDS):
            from bakery.normals.from_height import DEFAULT_RELIEF_RATIO, normal_from_height, strength_from_size

            n = normal_from_height(g, strength=strength_from_size(g.shape, DEFAULT_RELIEF_RATIO, 1.0))
            return Material(normals=n, roughness=0.35), "lit: normals baked from the heights (relief = width/32)"
        if kind == "data" and any(w in stem for w in EXPONENT_WORDS) and g.min() >= 0:
            from bakery.roughness import roughness_from_exponent

            r = np.asarray(roughness_from_exponent(g), dtype=np.float32)
            return Material(roughness=r, base_color=(0.04, 0.04, 0.04)), "lit: roughness from the exponents"
        return None, "no lit preview: the name does not say rough, height or exponent"
    return None, f"no lit preview for this kind of map ({kind})"


def lit_previews(lighting, *, size: int = 160, supersample: int = 2) -> PreviewFn:
    """A :data:`PreviewFn` rendering the ball of :func:`material_for` under ``lighting``. An equirect HDR
    environment is shown instead on a polished metal ball (roughness 0.15) lit by itself, its lighting baked
    in memory at a small size (face 64², five levels), with automatic exposure."""
    from bakery.preview.render import preview_image
    from bakery.preview.shading import Material

    def fn(pixels: np.ndarray, kind: str, bits: str, name: str):
        if kind == "environment":
            from bakery.preview.lighting import lighting_from_panorama

            h, w = pixels.shape[:2]
            if w != 2 * h or h % 2:
                return None, "no lit preview: not an equirectangular panorama (2:1, even height)"
            own = lighting_from_panorama(pixels[..., :3], face=64, levels=5)
            ball = Material(roughness=0.15, metallic=1.0, base_color=(0.95, 0.95, 0.95))
            img, _ = preview_image(ball, own, size=size, views="ball", supersample=supersample, exposure=None)
            return img, "lit by itself: metal ball, roughness 0.15"
        material, note = material_for(pixels, kind, bits, name)
        if material is None:
            return None, note
        img, _ = preview_image(material, lighting, size=size, views="ball", supersample=supersample)
        return img, note

    return fn


def make_entry(path: str | os.PathLike, root: str | os.PathLike | None = None, *, thumb: int = 160,
               preview: PreviewFn | None = None, max_pixels: int | None = None) -> SheetEntry:
    """Read one map and make its card. A file that cannot be read becomes a card with the error."""
    from bakery.inspect import inspect_pixels
    from bakery.io.images import read_image

    path = Path(path)
    name = path.relative_to(root).as_posix() if root is not None else path.name
    try:
        img = read_image(path, max_pixels=max_pixels, allow_nonfinite=True)
    except BakeryError as exc:
        msg = str(exc).removeprefix(f"{path}: ")
        return SheetEntry(name, findings=[Finding("unreadable", "error", msg, "fix or remove the file")],
                          preview_note="no preview: the file could not be read")
    px = img.pixels
    kind, findings = inspect_pixels(px, bits=img.bits)
    entry = SheetEntry(name, px.shape[1], px.shape[0], px.shape[2], img.bits, kind, findings,
                       thumbnail(px, kind, bits=img.bits, size=thumb))
    if preview is None:
        entry.preview_note = "previews were not requested"
    elif not np.all(np.isfinite(px)):
        entry.preview_note = "no preview: the map holds NaN or Inf"
    else:
        entry.preview, entry.preview_note = preview(px, kind, img.bits, name)
    return entry


# ------------------------------------------------------------------------------------------ the page


_CSS = """
body{font:14px/1.35 system-ui,sans-serif;margin:16px;background:#1d1f22;color:#e4e4e4}
h1{font-size:20px;margin:0 0 4px}
.summary{color:#aaa;margin:0 0 12px}
.grid{display:grid;grid-template-columns:repeat(auto-fill,minmax(340px,1fr));gap:12px}
.card{background:#2a2d31;border-radius:6px;padding:8px;border-left:4px solid #4a4f55}
.card.warning{border-left-color:#d8a13a}.card.error{border-left-color:#e05555}
.pics{display:flex;gap:6px}
.pics figure{margin:0;flex:1;text-align:center}
.pics img{width:100%;aspect-ratio:1/1;object-fit:contain;background:#111;image-rendering:auto}
.pics figcaption{font-size:11px;color:#999}
.none{display:flex;align-items:center;justify-content:center;aspect-ratio:1/1;background:#111;color:#777;
font-size:11px;padding:6px;box-sizing:border-box}
.name{font-weight:600;word-break:break-all;margin:6px 0 2px}
.meta{color:#aaa;font-size:12px}
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


def sheet_html(entries: Sequence[SheetEntry], *, title: str, thumbs: Sequence[tuple[str | None, str | None]],
               grids: Sequence[str], source: str = "") -> str:
    """The page: a card per entry. ``thumbs[i]`` holds the relative links of entry i's map thumbnail and
    preview (None when absent); ``grids`` the relative links of the PNG grid pages."""
    esc = html.escape
    n_warn = sum(1 for e in entries if e.problems)
    parts = ["<!DOCTYPE html>", '<html lang="en"><head><meta charset="utf-8">',
             '<meta name="viewport" content="width=device-width,initial-scale=1">',
             f"<title>{esc(title)}</title><style>{_CSS}</style></head><body>",
             f"<h1>{esc(title)}</h1>",
             f'<p class="summary">{len(entries)} map(s){" from " + esc(source) if source else ""}; '
             f"{n_warn} with warnings or errors. <span id=\"status\"></span></p>"]
    if grids:
        links = " ".join(f'<a href="{_link(g)}">{esc(Path(g).name)}</a>' for g in grids)
        parts.append(f'<p class="pages">Picture grid: {links}</p>')
    parts.append('<div class="grid">')
    for e, (t_link, p_link) in zip(entries, thumbs, strict=True):
        worst = "error" if any(f.severity == "error" for f in e.findings) else (
            "warning" if e.problems else "")
        parts.append(f'<div class="card {worst}">')
        parts.append('<div class="pics">')
        if t_link:
            parts.append(f'<figure><img src="{_link(t_link)}" alt="map {esc(e.name)}">'
                         "<figcaption>map</figcaption></figure>")
        else:
            parts.append('<figure><div class="none">no thumbnail</div><figcaption>map</figcaption></figure>')
        if p_link:
            parts.append(f'<figure><img src="{_link(p_link)}" alt="preview of {esc(e.name)}" '
                         f'title="{esc(e.preview_note)}"><figcaption>{esc(e.preview_note)}</figcaption></figure>')
        else:
            parts.append(f'<figure><div class="none">{esc(e.preview_note)}</div><figcaption>preview'
                         "</figcaption></figure>")
        parts.append("</div>")
        parts.append(f'<div class="name">{esc(e.name)}</div>')
        if e.width:
            parts.append(f'<div class="meta">{e.width}×{e.height}, {e.channels} channel(s), {esc(e.bits)}, '
                         f"{esc(e.kind)}</div>")
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
    pad, text_h = 8, 48
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
            probs = e.problems
            if probs:
                color = (240, 90, 90) if any(f.severity == "error" for f in probs) else (240, 190, 80)
                more = f" (+{len(probs) - 1} more)" if len(probs) > 1 else ""
                _text(canvas, f"{probs[0].severity}: {probs[0].code}{more}", x0, ty + 28, color, width)
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
            pair: list[str | None] = []
            for suffix, img in (("map", e.thumbnail), ("lit", e.preview)):
                if img is None:
                    pair.append(None)
                    continue
                name = f"{i + 1:04d}-{suffix}.png"
                if not cv2.imwrite(str(thumbs / name), _to_u8(img)[..., ::-1]):
                    raise BakeryError("cannot write a thumbnail", thumbs / name)
                pair.append(f"{folder.name}/{name}")
            links.append(tuple(pair))
        for path, grid in zip(grid_paths, grids, strict=True):
            if not cv2.imwrite(str(work / path.name), grid[..., ::-1]):
                raise BakeryError("cannot write the grid picture", path)
        page = sheet_html(entries, title=title, thumbs=links, grids=[p.name for p in grid_paths], source=source)
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


def collect_maps(sources: list[Path], output: Path, *, recursive: bool = True) -> list[tuple[Path, Path]]:
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
    if not files:
        raise BakeryError("no maps found (looked for .png, .tif, .tiff, .exr, .hdr, .jpg)", sources[0])
    return files


def make_sheet(files: list[tuple[Path, Path]], output: Path, *, source: str = "", thumb: int = 160,
               columns: int = 4, lit: bool = True, env: Path | None = None, title: str = "bakery contact sheet",
               progress=None) -> list[Path]:
    """The work of ``bakery sheet`` (also run after a batch): ``files`` holds (map, folder its card name is
    relative to) pairs, see :func:`collect_maps`."""
    from bakery.preview.lighting import choose_lighting

    if output.suffix.lower() not in (".html", ".htm"):
        raise BakeryError("output must end in .html or .htm", output)
    fn = lit_previews(choose_lighting(env), size=thumb) if lit else None
    many_roots = len({root for _, root in files}) > 1
    entries = []
    for i, (path, root) in enumerate(files):
        e = make_entry(path, root, thumb=thumb, preview=fn)
        if progress is not None:
            progress((i + 1) / len(files), path.name)
        if many_roots:
            e.name = f"{root.name}/{e.name}"
        entries.append(e)
    return write_sheet(entries, output, title=title, source=source, columns=columns, thumb=thumb)
