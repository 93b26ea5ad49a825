"""Engine-ready KTX2 textures from full-precision levels: mips, block compression, supercompression and a
quality report.

:func:`compress_ktx2` takes float32 level 0 (or a list of float levels) of one map kind:

- ``"color"``: linear colour (RGB or RGBA); sRGB formats encode it with the sRGB curve;
- ``"data"``: roughness, height, occlusion, masks (stored as they are);
- ``"normal"``: stored normal values ``n * 0.5 + 0.5`` (2 or 3 channels, see :mod:`bakery.normals.encode`);
  every level is renormalized before its XY (or XYZ) is compressed, and BC5 files say in their key/value data
  that Z is reconstructed;
- ``"hdr"``: linear radiance (BC6H stores [0, 65504]; negative values clamp to 0 with a counted warning).

Mips are made from the float data with the area-weighted box filter of :mod:`bakery.mips`, level by level,
down to 1x1; levels smaller than a 4x4 block fill one block with replicated edge texels (KTX 2.0 spec, section
3.12). The report (:mod:`bakery.quality`) compares each written level, decoded, with the float level it came
from. On levels above :data:`REPORT_TEXELS` texels it reads every k-th row of blocks (about that many texels per
level, the same rows of reference and decoded data), so it stays a small fraction of the encode; the report
records the step (``"block_row_step"``).
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from bakery.errors import BakeryError
from bakery.io import ktx2 as K
from bakery.progress import Progress, maybe_within

KINDS = ("color", "data", "normal", "hdr")
#: Texels per level read by the quality report before it samples rows of blocks (common practice).
REPORT_TEXELS = 1 << 15
#: Key/value entry of a BC5 normal map (keys outside the "KTX" namespace, KTX 2.0 spec section 3.11).
NORMAL_KEY = "bakery.normal"
NORMAL_XY_VALUE = "xy; z reconstructed as sqrt(1 - x^2 - y^2)"
ENCODER_KEY = "bakery.encoder"


@dataclass
class CompressedKtx2:
    """What :func:`compress_ktx2` made: the file bytes, the float levels it encoded, the report."""

    data: bytes
    format: K.Format
    levels: list[np.ndarray]
    report: dict | None
    summary: str | None
    counts: dict | None = None  # {"clamped": n, "negative": n} samples clamped to the format's range
    path: Path | None = None

    @property
    def clamped(self) -> int:
        return (self.counts or {}).get("clamped", 0)


def default_kind(fmt: K.Format) -> str:
    """The map kind a format is made for: bc5 normal, bc6h and float formats hdr, sRGB colour, else data."""
    if fmt.block == "bc5":
        return "normal"
    if fmt.is_float:
        return "hdr"
    return "color" if fmt.srgb else "data"


def _renormalize(stored: np.ndarray, progress: Progress | None = None) -> np.ndarray:
    """Stored normal values (2 or 3 channels) -> unit vectors -> stored values, 3 channels, float32."""
    from bakery.normals.encode import decode_normals, normalize

    n = decode_normals(stored[..., :3] if stored.shape[-1] >= 3 else stored)
    unit, _ = normalize(n, out=n, progress=progress)
    unit *= np.float32(0.5)
    unit += np.float32(0.5)
    return unit


def build_levels(source: np.ndarray | list[np.ndarray], *, kind: str, mips: bool | int = True,
                 cubemap: bool = False, progress: Progress | None = None) -> list[np.ndarray]:
    """Float32 levels to encode: ``source`` itself when it is a list of levels, else level 0 and its box-filtered
    mips (``mips``: True for the full chain, False for level 0 alone, an int for that many levels). Normal
    levels are renormalized (3 channels out); ``progress(fraction, label)`` after each, by texels."""
    from bakery.mips import downsample, level_count

    if isinstance(source, list | tuple):
        levels = [np.asarray(lv, dtype=np.float32) for lv in source]
    else:
        lv0 = np.asarray(source, dtype=np.float32)
        if lv0.ndim == 2:
            lv0 = lv0[:, :, None]
        h, w = lv0.shape[-3:-1]
        n = level_count(w, h, None if mips is True else (1 if mips is False else int(mips)))
        levels = [lv0]
        for _ in range(1, n):
            prev = levels[-1]
            levels.append(np.stack([downsample(f) for f in prev]) if cubemap else downsample(prev))
    if kind == "normal":
        done, total, out = 0, sum(lv.size for lv in levels), []
        for lv in levels:
            step = maybe_within(progress, done / total, (done + lv.size) / total)
            out.append(np.stack([_renormalize(f) for f in lv]) if cubemap else _renormalize(lv, step))
            done += lv.size
            if progress is not None:
                progress(done / total, "encoding")
        levels = out
    return levels


def _report(fmt: K.Format, kind: str, levels: list[np.ndarray], payloads: list[bytes], cubemap: bool,
            report_texels: int | None) -> list[dict]:
    from bakery import quality as Q
    from bakery.color import linear_to_srgb, srgb_to_linear
    from bakery.io import blockcodec
    from bakery.normals.encode import decode_normals

    out = []
    for i, (lv, data) in enumerate(zip(levels, payloads, strict=True)):
        faces = lv if cubemap else lv[None]
        h, w = faces.shape[1:3]
        rows = blockcodec.sample_block_rows(w, h, None if report_texels is None else report_texels // len(faces))
        tr = blockcodec.texel_rows(rows, h)
        per_face = len(data) // len(faces)
        refs, decs = [], []
        for f, face in enumerate(faces):
            chunk = memoryview(data)[f * per_face:(f + 1) * per_face]
            if fmt.block is not None:
                dec = blockcodec.decode_level(chunk, fmt.block, w, h, block_rows=rows)  # stored space
            else:
                dec = K.decode_texels(chunk, fmt, (h, w))[tr]
                if fmt.srgb:
                    dec[..., :3] = linear_to_srgb(dec[..., :3])
            ref = K.fit_channels(face[tr], fmt.channels) if kind != "normal" else face[tr]
            refs.append(ref)
            decs.append(dec)
        ref = np.concatenate(refs) if len(refs) > 1 else refs[0]
        dec = np.concatenate(decs) if len(decs) > 1 else decs[0]
        entry: dict = {"level": i, "width": int(w), "height": int(h),
                       "block_row_step": 1 if rows is None else int(rows[1] - rows[0]) if len(rows) > 1 else 1}
        if kind == "normal":
            entry.update(Q.angle_stats(decode_normals(ref), decode_normals(dec)))
        elif kind == "hdr":
            entry.update(Q.hdr_stats(ref[..., :3], dec[..., :3]))
        else:
            if fmt.srgb:
                ref_lin = np.clip(ref, 0.0, 1.0)
                ref_enc = ref_lin.copy()
                ref_enc[..., :3] = linear_to_srgb(ref_enc[..., :3])
                dec_lin = dec.copy()
                dec_lin[..., :3] = srgb_to_linear(dec_lin[..., :3])
                entry["psnr_db"] = Q.psnr(ref_enc, dec)
                entry["psnr_linear_db"] = Q.psnr(ref_lin, dec_lin)
            else:
                entry["psnr_db"] = Q.psnr(np.clip(ref, 0.0, 1.0), dec)
        out.append(entry)
    return out


def compress_ktx2(source: np.ndarray | list[np.ndarray], fmt: K.Format | str, *, kind: str | None = None,
                  cubemap: bool = False, mips: bool | int = True, quality: str = "fast",
                  zstd: int | None = None, threads: int | None = None,
                  key_values: dict[str, bytes | str] | None = None, report: bool = True,
                  report_texels: int | None = REPORT_TEXELS,
                  where: str | os.PathLike | None = None,
                  progress: Progress | None = None) -> CompressedKtx2:
    """KTX2 bytes of ``source`` (float32 level 0 or a list of levels) in ``fmt`` with an optional quality report.

    Parameters
    ----------
    source : ndarray or list of ndarray
        Level 0 ``(H, W, C)`` (or ``(6, N, N, C)`` with ``cubemap``), or the levels themselves, level 0 first.
    fmt : str or Format
        Any :data:`bakery.io.ktx2.FORMATS` name or short name (``"bc5"``, ``"bc7-srgb"``, ``"bc6h"``, ...).
    kind : {"color", "data", "normal", "hdr"}, optional
        What the map holds (default from the format, :func:`default_kind`).
    mips : bool or int
        Full chain (True), level 0 only (False) or that many levels; ignored when ``source`` is a list.
    quality : {"fast", "balanced", "best"}
        Encoder profile (see :mod:`bakery.io.blockcodec`).
    zstd : int, optional
        Zstandard level (1-22) for supercompression.
    threads : int, optional
        Encoder threads (None: one per core); the bytes do not depend on it.
    report : bool
        Measure every level against its float data (:mod:`bakery.quality`).
    report_texels : int or None
        Texels per level the report reads before sampling rows of blocks (None: all).
    progress : callable, optional
        ``progress(fraction, label)``, rising to 1: encoding strip by strip of block rows
        (:func:`bakery.io.ktx2.encode_levels`), then Zstandard and the report. The bytes do not depend on it.
    """
    from bakery.io import blockcodec
    from bakery.quality import summary_line

    fmt = K.get_format(fmt) if isinstance(fmt, str | int) else fmt
    kind = default_kind(fmt) if kind is None else kind
    if kind not in KINDS:
        raise BakeryError(f"unknown map kind {kind!r}; use one of {', '.join(KINDS)}", where)
    blockcodec.check_quality(quality)
    first = source[0] if isinstance(source, list | tuple) else source
    channels = 1 if np.ndim(first) == 2 else int(np.shape(first)[-1])
    if kind == "normal" and channels not in (2, 3, 4):
        raise BakeryError(f"a normal map has 2 or 3 channels; got {channels}", where)
    if kind != "normal":
        K.check_block_channels(channels, fmt, where)
    if fmt.block == "bc6h" and kind != "hdr":
        raise BakeryError(f"bc6h stores HDR colour; use bc7 or bc4 for a {kind} map", where)
    for lv in (source if isinstance(source, list | tuple) else [source]):
        if not np.all(np.isfinite(lv)):
            raise BakeryError("cannot store NaN or Inf values in a KTX2 texture", where)
    if progress is not None:
        progress(0.05, "encoding")
    levels = build_levels(source, kind=kind, mips=mips, cubemap=cubemap,
                          progress=maybe_within(progress, 0.05, 0.15))
    if progress is not None:
        progress(0.15, "encoding")
    enc_levels = levels
    if kind == "normal" and fmt.channels == 2:
        enc_levels = [lv[..., :2] for lv in levels]
    w, h = K.check_levels(enc_levels, cubemap)
    counts: dict[str, int] = {}
    payloads = K.encode_levels(enc_levels, fmt, quality=quality, threads=threads, counts=counts,
                               progress=maybe_within(progress, 0.15, 0.85))
    kv: dict[str, bytes | str] = {}
    if fmt.block is not None:
        kv[ENCODER_KEY] = f"{blockcodec.encoder_version()} {quality}"
    if kind == "normal" and fmt.channels == 2:
        kv[NORMAL_KEY] = NORMAL_XY_VALUE
    kv.update(key_values or {})
    data = K.assemble_ktx2(payloads, fmt, w, h, cubemap=cubemap, key_values=kv, zstd=zstd)
    if progress is not None:
        progress(0.9 if report else 1.0, "encoding")
    rep = summary = None
    if report:
        rep = {"format": fmt.short_name, "vk_format": fmt.name, "kind": kind,
               "encoder": blockcodec.encoder_version() if fmt.block else None,
               "quality": quality if fmt.block else None, "zstd": zstd, "bytes": len(data),
               "report_texels": report_texels,
               "levels": _report(fmt, kind, enc_levels, payloads, cubemap, report_texels)}
        summary = summary_line(rep)
        if progress is not None:
            progress(1.0, "quality report")
    return CompressedKtx2(data, fmt, levels, rep, summary, counts)


def write_compressed_ktx2(path: str | os.PathLike, source: np.ndarray | list[np.ndarray],
                          fmt: K.Format | str, **options) -> CompressedKtx2:
    """:func:`compress_ktx2`, then write the file atomically; warns (:class:`BakeryWarning`) with a count
    when values were clamped. Returns the result with ``path`` set."""
    from bakery.io.atomic import atomic_output

    path = Path(path)
    res = compress_ktx2(source, fmt, where=path, **options)
    K.warn_clamped(path, res.format, res.counts or {})
    with atomic_output(path) as tmp:
        tmp.write_bytes(res.data)
    res.path = path
    return res


#: The format ``ktx2-format = "compressed"`` picks for each map kind.
COMPRESSED_DEFAULTS = {"normal": "bc5", "data": "bc4", "color": "bc7-srgb", "hdr": "bc6h"}


def resolve_format(name: str, kind: str, channels: int = 1) -> K.Format:
    """The texel format for ``name``: a format name, or ``"compressed"`` for the block format made for ``kind``
    (:data:`COMPRESSED_DEFAULTS`; a two-channel data map takes bc5, a colour data map bc7)."""
    if name.lower() == "compressed":
        name = COMPRESSED_DEFAULTS[kind]
        if kind == "data" and channels == 2:
            name = "bc5"
        elif kind == "data" and channels > 2:
            name = "bc7"
    return K.get_format(name)


def write_texture(path: str | os.PathLike, levels: list[np.ndarray], fmt: K.Format | str, *, kind: str,
                  cubemap: bool = False, key_values: dict[str, bytes | str] | None = None, effort: str = "fast",
                  zstd: int | None = None, threads: int | None = None,
                  progress: Progress | None = None) -> tuple[Path, dict | None]:
    """Write ``levels`` (float32, level 0 first, every level given) as KTX2 in ``fmt``: block formats and
    Zstandard through :func:`write_compressed_ktx2` with a quality report, others with
    :func:`bakery.io.ktx2.write_ktx2`. Returns the path and ``{"format", "summary", "levels": [...]}`` (the
    report) or None for an uncompressed file. ``progress(fraction, label)`` rises to 1 as it goes (block
    formats: per strip of block rows)."""
    fmt = K.get_format(fmt) if isinstance(fmt, str | int) else fmt
    path = Path(path)
    if fmt.block is None and zstd is None:
        return K.write_ktx2(path, levels, fmt, cubemap=cubemap, key_values=key_values, progress=progress), None
    res = write_compressed_ktx2(path, list(levels), fmt, kind=kind, cubemap=cubemap, quality=effort, zstd=zstd,
                                threads=threads, key_values=key_values, report=fmt.block is not None,
                                progress=progress)
    if res.report is None:
        return path, None
    return path, {"format": fmt.short_name, "summary": res.summary, "report": res.report}
