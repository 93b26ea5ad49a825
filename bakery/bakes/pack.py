"""The ``pack`` bake: one texture whose channels come from channels of several maps, or constants.

Inputs are the sources of the output channels, one optional role per channel (``r``, ``g``, ``b``, ``a``); the
parameters say, per output channel, which channel of its map to read (``r-channel``), what it holds
(``r-role``: sets its mip rule, :data:`bakery.packing.MIP_RULES`), whether to invert it (``r-invert``: 1 - v,
smoothness from roughness) or a constant instead of a map (``r-constant``). A roughness channel whose map is
the level 0 of an ``antialias`` chain takes the chain's levels as they are. The pure work is
:func:`bakery.packing.pack_levels`; see docs/packing.md.

No heavy imports at module level (the batch planner imports every bake module).
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Any, Literal

from bakery.bakes import Bake, Progress, bake_threads, level_path, params_to_dict, register, within
from bakery.bakes.params import (
    Bits,
    Channel,
    Params,
    bits_param,
    effort_param,
    ktx2_format_param,
    param,
    zstd_param,
)
from bakery.errors import BakeryError

LETTERS = ("r", "g", "b", "a")
Role = Literal["color", "alpha", "roughness", "smoothness", "metalness", "occlusion", "height", "cavity",
               "curvature", "mask", "constant"]
IMAGE_SUFFIXES = (".png", ".tif", ".tiff", ".exr")
#: Sample types from least to most precise: the output follows the most precise source.
PRECISION = ("8", "16", "half", "float")
#: What an unspecified colour channel holds.
DEFAULT_CONSTANT = 0.0


def _channel(letter: str) -> Any:
    return param(None, f"Channel of the --{letter} map to read into {letter.upper()} (r, g, b, a). Default: a "
                 f"grey map's only channel, else the map's own {letter.upper()}.")


def _role(letter: str) -> Any:
    return param(None, f"What {letter.upper()} holds, which sets its mip rule (docs/packing.md): color is filtered "
                 "in linear light, roughness takes an antialias chain's levels, the others are averaged. Default: "
                 f"what the map's manifest says, else mask (constant with --{letter}-constant).")


def _invert(letter: str) -> Any:
    return param(False, f"Store 1 - v in {letter.upper()} (smoothness from a roughness map, and the like).")


def _constant(letter: str) -> Any:
    default = "absent" if letter == "a" else f"{DEFAULT_CONSTANT:g} when no --{letter} map is given"
    return param(None, f"Fill {letter.upper()} with this value instead of a map (default: {default}).",
                 low=0.0, high=1.0)


@dataclass(frozen=True)
class PackParams(Params):
    """Parameters of the ``pack`` bake: four per output channel, then the output's."""

    r_channel: Channel | None = _channel("r")
    r_role: Role | None = _role("r")
    r_invert: bool = _invert("r")
    r_constant: float | None = _constant("r")
    g_channel: Channel | None = _channel("g")
    g_role: Role | None = _role("g")
    g_invert: bool = _invert("g")
    g_constant: float | None = _constant("g")
    b_channel: Channel | None = _channel("b")
    b_role: Role | None = _role("b")
    b_invert: bool = _invert("b")
    b_constant: float | None = _constant("b")
    a_channel: Channel | None = _channel("a")
    a_role: Role | None = _role("a")
    a_invert: bool = _invert("a")
    a_constant: float | None = _constant("a")
    transfer: Literal["srgb", "linear"] | None = param(
        None, "How color channels are stored: srgb (IEC 61966-2-1; decoded before their mips are averaged and "
        "encoded again) or linear. Default: srgb for 8/16-bit maps, linear for float maps.")
    mips: bool = param(False, "Also write the mip levels, each channel by its role's rule: NAME.mip01.ext ... "
                       "beside an image output, every level inside a .ktx2 output.")
    levels: int | None = param(None, "With --mips: number of levels including level 0 (default: down to 1x1).",
                               low=1, high=16)
    resample: bool = param(False, "Scale maps of different sizes to the largest (area average when shrinking, "
                           "bilinear when enlarging) instead of refusing them.")
    bits: Bits | None = bits_param("Output samples: 8 or 16 (PNG, TIFF, KTX2), half (EXR, KTX2), float (EXR, "
                                   "TIFF, KTX2). Default: the most precise of the maps' that the format holds.")
    ktx2_format: str | None = ktx2_format_param(
        None, "Texel format of a .ktx2 output: rgba8, rgba16, rgba16f, rgba32f (default by --bits), rgba8-srgb "
        "or bc7-srgb when R, G, B are all color, bc7, or compressed (the block format made for it).")
    effort: Literal["fast", "balanced", "best"] = effort_param()
    zstd: int | None = zstd_param()

    def check(self) -> None:
        if self.levels is not None and not self.mips:
            raise BakeryError("levels goes with mips (--mips); without it only level 0 is written")
        for x in LETTERS:
            if getattr(self, f"{x}_constant") is not None:
                if getattr(self, f"{x}_channel") is not None:
                    raise BakeryError(f"{x}-channel names a channel of a map; {x}-constant fills {x.upper()} "
                                      "with a value: give one of them")
                if getattr(self, f"{x}_invert"):
                    raise BakeryError(f"{x}-invert applies to a map; write the inverted constant with "
                                      f"{x}-constant")
        if self.ktx2_format is not None and self.ktx2_format.lower() != "compressed":
            from bakery.io.ktx2_formats import get_format

            get_format(self.ktx2_format)


# --------------------------------------------------------------------------------------------- the plan


@dataclass
class Source:
    """One output channel as planned (before any pixel is read)."""

    letter: str
    role: str
    path: Path | None
    channel: str | None  # letter asked for (None: default)
    invert: bool
    constant: float | None


def _option(letter: str, what: str) -> str:
    return f"--{letter}-{what}"


def plan_channels(inputs: dict[str, Path], p: PackParams) -> list[Source]:
    """The output channels (R, G, B, then A when asked for), checked against the inputs."""
    out = []
    for x in LETTERS:
        path = inputs.get(x)
        constant = getattr(p, f"{x}_constant")
        channel = getattr(p, f"{x}_channel")
        role = getattr(p, f"{x}_role")
        invert = getattr(p, f"{x}_invert")
        if path is not None and constant is not None:
            raise BakeryError(f"{x.upper()} has both a map (--{x}) and {_option(x, 'constant')}; give one",
                              path)
        if path is None:
            if channel is not None or invert:
                what = _option(x, "channel") if channel is not None else _option(x, "invert")
                raise BakeryError(f"{what} needs a map for {x.upper()} (--{x} FILE)")
            if x == "a" and constant is None and role is None:
                continue  # no alpha channel
            if role not in (None, "constant", "alpha") and constant is None:
                raise BakeryError(f"{_option(x, 'role')} {role} needs a map (--{x} FILE) or a constant "
                                  f"({_option(x, 'constant')} V)")
            value = DEFAULT_CONSTANT if constant is None and x != "a" else constant
            if x == "a" and value is None:
                value = 1.0
            out.append(Source(x, role or "constant", None, None, False, value))
        else:
            out.append(Source(x, role or "", path, channel, invert, None))  # role "" = from the manifest
    if all(s.path is None for s in out):
        raise BakeryError("nothing to pack: give at least one map (--r, --g, --b or --a FILE)")
    return out


def _suffix(output: Path) -> str:
    suffix = output.suffix.lower()
    if suffix not in IMAGE_SUFFIXES + (".ktx2",):
        raise BakeryError(f"write a packed texture as .png, .tif, .exr or .ktx2, not {suffix or 'no extension'}",
                          output)
    return suffix


def _target_size(sources: list[Source], resample: bool) -> tuple[int, int]:
    from bakery.io.images import image_size

    sizes = {}
    for s in sources:
        if s.path is not None and s.path not in sizes:
            sizes[s.path] = image_size(s.path)
    distinct = set(sizes.values())
    if len(distinct) > 1 and not resample:
        listed = ", ".join(f"{s.letter} {s.path.name} {sizes[s.path][0]}x{sizes[s.path][1]}"
                           for s in sources if s.path is not None)
        raise BakeryError(f"maps differ in size ({listed}); give maps of one size, or --resample to scale them "
                          "to the largest")
    return max(w for w, _ in distinct), max(h for _, h in distinct)


def pack_outputs(inputs: dict[str, Path], output: Path, p: PackParams) -> list[Path]:
    from bakery.io.manifest import manifest_path
    from bakery.mips import level_count

    suffix = _suffix(output)
    sources = plan_channels(inputs, p)
    w, h = _target_size(sources, p.resample)
    count = level_count(w, h, p.levels) if p.mips else 1
    levels = [output] if suffix == ".ktx2" else [level_path(output, k) for k in range(count)]
    return levels + [manifest_path(output)]


# --------------------------------------------------------------------------------------------- reading


def pick(pixels, letter: str, asked: str | None, path: Path) -> tuple[Any, str]:
    """The plane (H, W) of ``pixels`` that output channel ``letter`` reads, and the letter read.

    A grey file (one channel, or grey + alpha) gives its grey for r, g and b (its alpha for a); an RGB(A) file
    gives the asked channel, by default the output channel's own letter (or the grey of equal R, G, B)."""
    import numpy as np

    c = pixels.shape[2]
    want = asked or letter
    if c in (1, 2):
        if want == "a":
            if c == 2:
                return pixels[:, :, 1], "a"
            if asked is None:
                return pixels[:, :, 0], "r"
            raise BakeryError(f"grey map has no alpha channel ({_option(letter, 'channel')} a)", path)
        return pixels[:, :, 0], "r"
    i = LETTERS.index(want)
    if i < c:
        return pixels[:, :, i], want
    if asked is None and np.array_equal(pixels[:, :, 0], pixels[:, :, 1]) \
            and np.array_equal(pixels[:, :, 1], pixels[:, :, 2]):
        return pixels[:, :, 0], "r"
    raise BakeryError(f"map has {c} channels and no {want.upper()}; say which to read into {letter.upper()} "
                      f"({_option(letter, 'channel')} r|g|b)", path)


def role_from_manifest(path: Path) -> tuple[str, dict | None]:
    """The role a map's manifest implies (``antialias`` -> roughness, ``occlusion`` -> occlusion, ``curvature``
    -> its map, ``mips`` -> color, ``roughness`` -> its target), else mask; and the manifest."""
    from bakery.io.manifest import manifest_for

    m = manifest_for(path)
    if m is None:
        return "mask", None
    bake = m.get("bake")
    params = m.get("params") or {}
    if bake == "antialias":
        return "roughness", m
    if bake == "occlusion":
        return "occlusion", m
    if bake == "curvature":
        return {"cavity": "cavity", "curvature": "curvature"}.get(params.get("map"), "mask"), m
    if bake == "mips":
        return "color", m
    if bake == "roughness":
        return {"roughness": "roughness", "smoothness": "smoothness"}.get(params.get("target"), "mask"), m
    return "mask", m


def chain_files(path: Path, manifest: dict | None) -> list[Path]:
    """The level files of the ``antialias`` chain whose level 0 is ``path`` (level 0 first), or [] when
    ``path`` is not one. Levels that changed since the bake wrote them are refused."""
    from bakery.io.manifest import file_digest

    if manifest is None or manifest.get("bake") != "antialias":
        return []
    images = [o for o in manifest.get("outputs", []) if Path(o).suffix.lower() in IMAGE_SUFFIXES]
    if not images or images[0] != path.name:
        return []
    files = [path.parent / o for o in images]
    digests = manifest.get("output_digests") or {}
    for f in files[1:]:
        if not f.is_file() or digests.get(f.name) != file_digest(f):
            raise BakeryError(f"roughness chain level {f.name} is missing or changed since the antialias bake "
                              "wrote it; bake the chain again", path)
    return files


# --------------------------------------------------------------------------------------------- the bake


def _ktx2_format(p: PackParams, bits: str, srgb_colour: bool, kind: str, channels: int, output: Path):
    from bakery.io.texcompress import resolve_format

    if p.ktx2_format is None:
        name = {"8": "rgba8-srgb" if srgb_colour else "rgba8", "16": "rgba16", "half": "rgba16f",
                "float": "rgba32f"}[bits]
    else:
        name = p.ktx2_format
    fmt = resolve_format(name, kind, channels)
    if fmt.srgb and not srgb_colour:
        raise BakeryError(f"ktx2-format {fmt.short_name} encodes R, G and B as sRGB colour; it needs all three "
                          "with role color stored sRGB (use a linear format such as rgba8 or bc7)", output)
    if fmt.block == "bc6h" or (fmt.block is not None and fmt.channels < 3) or (fmt.block is None and
                                                                               fmt.channels < 3):
        raise BakeryError(f"ktx2-format {fmt.short_name} cannot hold a packed texture of {channels} channels; use "
                          "rgba8, rgba16, rgba16f, bc7 or compressed", output)
    return fmt


def run_pack(inputs: dict[str, Path], output: Path, p: PackParams, progress: Progress) -> list[Path]:
    import contextlib

    import numpy as np

    from bakery.bakes.normals import output_bits
    from bakery.bakes.roughness import clip_for_integers
    from bakery.io import atomic_output, check_distinct, read_image, write_image, write_manifest
    from bakery.io.manifest import manifest_path
    from bakery.mips import level_count, mip_size
    from bakery.packing import CHAIN_ROLES, PackedChannel, invert, pack_levels, resample_plane

    suffix = _suffix(output)
    ktx2 = suffix == ".ktx2"
    sources = plan_channels(inputs, p)
    w, h = _target_size(sources, p.resample)
    progress(0.05, "reading")
    images, manifests = {}, {}
    files = list(dict.fromkeys(s.path for s in sources if s.path is not None))
    for i, path in enumerate(files):
        images[path] = read_image(path, progress=within(progress, 0.05 + 0.15 * i / len(files),
                                                        0.05 + 0.15 * (i + 1) / len(files)))
        manifests[path] = role_from_manifest(path)
    bits_in = max((images[s.path].bits for s in sources if s.path is not None), key=PRECISION.index)
    colour_src = [images[s.path] for s in sources if s.path is not None and (s.role or manifests[s.path][0])
                  == "color"]
    transfer = p.transfer or ("linear" if colour_src and colour_src[0].is_float else "srgb")

    channels, described, rules, chains_read, chain_names = [], {}, {}, [], {}
    for s in sources:
        if s.path is None:
            channels.append(PackedChannel(s.role, constant=float(s.constant)))
            described[s.letter] = {"role": s.role, "source": None, "channel": None, "invert": False,
                                   "constant": float(s.constant)}
            rules[s.letter] = channels[-1].mip_rule()
            continue
        img = images[s.path]
        implied, manifest = manifests[s.path]
        role = s.role or implied
        if not s.role and s.invert and role in CHAIN_ROLES:  # the inverse of roughness is smoothness
            role = "smoothness" if role == "roughness" else "roughness"
        plane, read_letter = pick(img.pixels, s.letter, s.channel, s.path)
        colour = role == "color" and transfer == "srgb"
        if (plane.shape[1], plane.shape[0]) != (w, h):
            plane = resample_plane(plane, (w, h), srgb=colour)
        if s.invert:
            plane = invert(plane)
        chain = {}
        if role in CHAIN_ROLES and p.mips:
            files = chain_files(s.path, manifest)
            for f in files:  # level 0 too: a resampled map's smaller levels may have its size
                level = images[f].pixels[:, :, 0] if f in images else read_image(f).pixels[:, :, 0]
                chain[(level.shape[1], level.shape[0])] = invert(level) if s.invert else level
            if files:
                chains_read += files[1:]
                chain_names[s.letter] = [f.name for f in files]
        channels.append(PackedChannel(role, plane=np.ascontiguousarray(plane, np.float32), chain=chain))
        described[s.letter] = {"role": role, "source": s.path.name, "channel": read_letter, "invert": s.invert,
                               "constant": None}
        rules[s.letter] = channels[-1].mip_rule()
    count = level_count(w, h, p.levels) if p.mips else 1
    paths = [output] if ktx2 else [level_path(output, k) for k in range(count)]
    check_distinct(paths + [manifest_path(output)], chains_read)
    progress(0.2, "levels")
    levels = pack_levels(channels, levels=count, transfer=transfer, threads=bake_threads(),
                         progress=within(progress, 0.2, 0.55))
    srgb_colour = transfer == "srgb" and all(c.role == "color" for c in channels[:3])
    if ktx2:
        bits = p.bits or ("8" if bits_in == "8" else "16" if bits_in == "16" else "half")
    else:
        bits = output_bits(output, p.bits, bits_in)
    for lv in levels:
        lv[...] = clip_for_integers(lv, bits, output, "packed")
    progress(0.6, "writing")
    quality = None
    if ktx2:
        from bakery.io.texcompress import write_texture

        kind = "color" if srgb_colour else "data"
        fmt = _ktx2_format(p, bits, srgb_colour, kind, len(channels), output)
        store = levels
        if fmt.srgb:  # sRGB formats take linear colour and encode it on writing
            from bakery.color import srgb_to_linear

            store = [np.concatenate([srgb_to_linear(lv[:, :, :3]), lv[:, :, 3:]], axis=2) for lv in levels]
        note = {"bakery.channels": " ".join(f"{x}={d['role']}" for x, d in described.items())}
        _, quality = write_texture(output, store, fmt, kind=kind, key_values=note, effort=p.effort, zstd=p.zstd,
                                   threads=bake_threads(), progress=within(progress, 0.6, 0.97))
    else:
        shares = np.cumsum([0] + [lv.shape[0] * lv.shape[1] for lv in levels], dtype=np.float64)
        shares /= shares[-1]
        writing = within(progress, 0.6, 0.97)
        with contextlib.ExitStack() as stack:  # every level renamed into place only after all were written
            for lv, path, lo, hi in zip(levels, paths, shares[:-1], shares[1:], strict=True):
                write_image(stack.enter_context(atomic_output(path)), lv, bits=bits, threads=bake_threads(),
                            progress=within(writing, lo, hi))
    extra = {
        "channels": described,
        "mip_rules": rules,
        "transfer": transfer,
        "sample_type": None if ktx2 else bits,
        "ktx2_format": fmt.short_name if ktx2 else None,
        "roughness_chains": chain_names,
        "levels": [{"level": k, "size": list(mip_size(w, h, k))} for k in range(count)],
    }
    if p.resample:
        extra["resampled"] = {s.letter: [*images[s.path].pixels.shape[1::-1]] for s in sources
                              if s.path is not None and images[s.path].pixels.shape[:2] != (h, w)}
    if quality:
        extra["quality"] = {output.name: quality}
    manifest = write_manifest(output, bake="pack", inputs=inputs, params=params_to_dict(p), outputs=paths,
                              extra=extra)
    progress(1.0, "done")
    return paths + [manifest]


register(Bake(
    name="pack",
    summary="channels of several maps (or constants) -> one texture, each channel with its own mip rule",
    inputs=("r?", "g?", "b?", "a?"),
    params=PackParams,
    outputs=pack_outputs,
    run=run_pack,
))
