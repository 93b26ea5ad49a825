"""Names of value sets shared by every layer (no imports: the I/O layer, the bakes and the CLI use them)."""

from __future__ import annotations

from typing import Literal

#: Sample type of an image file: 8- or 16-bit unsigned integers (stored values / 255 or / 65535 in memory),
#: half or single floats.
Bits = Literal["8", "16", "half", "float"]
