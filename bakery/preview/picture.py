"""The manifest of a picture bakery writes for people to look at (a lit preview, a turntable, a picture of a
chain's levels): ``NAME.ext.bakery.json`` beside it, like every bake output's, with ``"picture": true``.

``bakery inspect`` judges a file its manifest calls a picture as a picture: it is decoded and checked for NaN
and Inf, but not for sizes, tiling or ranges, which matter for maps a renderer samples and not for an image on
a screen. A picture without its manifest, or one changed since (a stale manifest), is judged as any image.
"""

from __future__ import annotations

import os
from pathlib import Path
from typing import Any


def picture_manifest(path: str | os.PathLike, *, made_by: str, inputs: dict[str, str | os.PathLike],
                     params: dict[str, Any]) -> Path:
    """Write the manifest of the picture ``path`` (already written): ``made_by`` is the command that made
    it (in the manifest's ``bake`` entry), ``inputs`` the files it shows by role, ``params`` its settings."""
    from bakery.io.manifest import write_manifest

    return write_manifest(path, bake=made_by, inputs=inputs, params=params, outputs=[path],
                          extra={"picture": True})
