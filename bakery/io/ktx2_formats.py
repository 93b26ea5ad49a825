"""KTX 2.0 texel formats bakery writes and reads: names, VkFormat numbers and block sizes (Khronos KTX 2.0
specification; Vulkan specification, VkFormat enumeration). Plain Python (no numpy), so that a format name can
be checked without loading the array stack.
"""

from __future__ import annotations

from dataclasses import dataclass

from bakery.errors import BakeryError


@dataclass(frozen=True)
class Format:
    """One supported VkFormat."""

    name: str
    vk: int
    channels: int
    kind: str  # "unorm", "sfloat", "b10g11r11", "e5b9g9r9", "block"
    bits: int  # bits per component (unorm/sfloat); 32 for the packed formats; 8 for blocks
    srgb: bool = False
    block: str | None = None  # block codec name (bakery.io.blockcodec.CODECS) for block-compressed formats

    @property
    def block_compressed(self) -> bool:
        return self.block is not None

    @property
    def texel_bytes(self) -> int:
        """Bytes of one texel block (one texel for uncompressed formats, 4x4 texels for BCn)."""
        if self.block is not None:
            return BLOCK_BYTES[self.block]
        return 4 if self.kind in ("b10g11r11", "e5b9g9r9") else self.channels * self.bits // 8

    @property
    def type_size(self) -> int:
        # KTX 2.0 spec section 3.5 (typeSize): 1 for block-compressed formats
        if self.block is not None:
            return 1
        return 4 if self.kind in ("b10g11r11", "e5b9g9r9") else self.bits // 8

    @property
    def is_float(self) -> bool:
        return self.kind not in ("unorm", "block") or self.block == "bc6h"

    @property
    def short_name(self) -> str:
        """The user-facing name (``"bc7-srgb"``, ``"rgba16f"``), or the Vulkan name where none exists."""
        return SHORT_NAMES.get(self.name, self.name)


BLOCK_BYTES = {"bc1": 8, "bc3": 16, "bc4": 8, "bc5": 16, "bc6h": 16, "bc7": 16}

FORMATS: dict[str, Format] = {f.name: f for f in (
    Format("R8_UNORM", 9, 1, "unorm", 8),
    Format("R8G8_UNORM", 16, 2, "unorm", 8),
    Format("R8G8B8A8_UNORM", 37, 4, "unorm", 8),
    Format("R8G8B8A8_SRGB", 43, 4, "unorm", 8, srgb=True),
    Format("R16_UNORM", 70, 1, "unorm", 16),
    Format("R16G16_UNORM", 77, 2, "unorm", 16),
    Format("R16G16B16A16_UNORM", 91, 4, "unorm", 16),
    Format("R16G16_SFLOAT", 83, 2, "sfloat", 16),
    Format("R16G16B16A16_SFLOAT", 97, 4, "sfloat", 16),
    Format("R32G32B32A32_SFLOAT", 109, 4, "sfloat", 32),
    Format("B10G11R11_UFLOAT_PACK32", 122, 3, "b10g11r11", 32),
    Format("E5B9G9R9_UFLOAT_PACK32", 123, 3, "e5b9g9r9", 32),
    # block-compressed (Vulkan spec, VkFormat enumeration; 4x4 blocks)
    Format("BC1_RGB_UNORM_BLOCK", 131, 3, "block", 8, block="bc1"),
    Format("BC1_RGB_SRGB_BLOCK", 132, 3, "block", 8, srgb=True, block="bc1"),
    Format("BC3_UNORM_BLOCK", 137, 4, "block", 8, block="bc3"),
    Format("BC3_SRGB_BLOCK", 138, 4, "block", 8, srgb=True, block="bc3"),
    Format("BC4_UNORM_BLOCK", 139, 1, "block", 8, block="bc4"),
    Format("BC5_UNORM_BLOCK", 141, 2, "block", 8, block="bc5"),
    Format("BC6H_UFLOAT_BLOCK", 143, 3, "block", 8, block="bc6h"),
    Format("BC7_UNORM_BLOCK", 145, 4, "block", 8, block="bc7"),
    Format("BC7_SRGB_BLOCK", 146, 4, "block", 8, srgb=True, block="bc7"),
)}
FORMATS_BY_VK: dict[int, Format] = {f.vk: f for f in FORMATS.values()}

#: Short names accepted by the CLI: what the file stores, lowercase.
FORMAT_ALIASES = {
    "rgba16f": "R16G16B16A16_SFLOAT", "rgba32f": "R32G32B32A32_SFLOAT", "b10g11r11-ufloat": "B10G11R11_UFLOAT_PACK32",
    "e5b9g9r9-ufloat": "E5B9G9R9_UFLOAT_PACK32", "rg16f": "R16G16_SFLOAT", "r8": "R8_UNORM", "rg8": "R8G8_UNORM",
    "rgba8": "R8G8B8A8_UNORM", "rgba8-srgb": "R8G8B8A8_SRGB", "r16": "R16_UNORM", "rg16": "R16G16_UNORM",
    "rgba16": "R16G16B16A16_UNORM",
    "bc1": "BC1_RGB_UNORM_BLOCK", "bc1-srgb": "BC1_RGB_SRGB_BLOCK", "bc3": "BC3_UNORM_BLOCK",
    "bc3-srgb": "BC3_SRGB_BLOCK", "bc4": "BC4_UNORM_BLOCK", "bc5": "BC5_UNORM_BLOCK", "bc6h": "BC6H_UFLOAT_BLOCK",
    "bc7": "BC7_UNORM_BLOCK", "bc7-srgb": "BC7_SRGB_BLOCK",
}
SHORT_NAMES = {v: k for k, v in FORMAT_ALIASES.items()}


def get_format(name: str | int) -> Format:
    """A :class:`Format` from its VkFormat name (``"R16G16B16A16_SFLOAT"``), short alias (``"rgba16f"``) or
    number."""
    if isinstance(name, int):
        if name in FORMATS_BY_VK:
            return FORMATS_BY_VK[name]
        raise BakeryError(f"unsupported KTX2 vkFormat {name}")
    key = FORMAT_ALIASES.get(name.lower(), name.upper().removeprefix("VK_FORMAT_"))
    if key not in FORMATS:
        raise BakeryError(f"unknown KTX2 format {name!r}; use one of {', '.join(FORMAT_ALIASES)} or "
                          + ", ".join(FORMATS))
    return FORMATS[key]


def encoder_version() -> str:
    """Name and version of the block encoder, e.g. ``"ispc-texcomp 1.0.1"`` (part of a batch job key: a new
    encoder re-bakes). Read from the installed package's metadata, so planning a batch loads no encoder
    and no array library."""
    from importlib.metadata import version

    return f"ispc-texcomp {version('ispc-texcomp')}"
