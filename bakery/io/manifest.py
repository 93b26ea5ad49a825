"""Content hashes and the JSON manifest written beside every bake's outputs.

Manifests hold what is needed to reproduce and use an output: inputs with content hashes, parameters, the
bakery version and conventions. No dates or timings, so the same inputs give byte-identical manifests.
"""

from __future__ import annotations

import hashlib
import json
import math
import os
from pathlib import Path
from typing import Any

from bakery.io.atomic import atomic_output


def file_digest(path: str | os.PathLike, *, chunk: int = 1 << 20) -> str:
    """``"sha256:<hex>"`` of a file's bytes."""
    h = hashlib.sha256()
    with open(path, "rb") as f:
        while block := f.read(chunk):
            h.update(block)
    return "sha256:" + h.hexdigest()


def to_json(data: Any) -> str:
    """Deterministic JSON text: sorted keys, two-space indent, paths as strings, trailing newline. A NaN or
    infinite number (which JSON cannot hold, RFC 8259 section 6) is written as the string "nan", "inf" or
    "-inf", so a report about a bad value can always be written."""
    return json.dumps(_finite(data), indent=2, sort_keys=True, default=_default, allow_nan=False) + "\n"


def _finite(obj: Any) -> Any:
    if isinstance(obj, float) and not math.isfinite(obj):
        return str(obj)
    if isinstance(obj, dict):
        return {k: _finite(v) for k, v in obj.items()}
    if isinstance(obj, list | tuple):
        return [_finite(v) for v in obj]
    if hasattr(obj, "item") and getattr(obj, "ndim", None) == 0:  # numpy scalars
        return _finite(obj.item())
    return obj


def _default(obj: Any) -> Any:
    if isinstance(obj, Path):
        return obj.as_posix()
    if hasattr(obj, "item"):  # numpy scalars
        return obj.item()
    if hasattr(obj, "tolist"):
        return obj.tolist()
    raise TypeError(f"cannot store {type(obj).__name__} in a manifest")


def write_json(path: str | os.PathLike, data: Any) -> Path:
    """Write deterministic JSON atomically."""
    path = Path(path)
    with atomic_output(path) as tmp:
        tmp.write_text(to_json(data), encoding="utf-8")
    return path


#: The ending of every manifest file name.
MANIFEST_SUFFIX = ".bakery.json"


def manifest_path(output: str | os.PathLike) -> Path:
    """The manifest that belongs to an output file: ``NAME.ext`` -> ``NAME.ext.bakery.json``, so outputs that
    differ only in their extension (``rock.png``, ``rock.ktx2``) keep manifests of their own; a face pattern's
    ``{face}`` / ``{index}`` becomes ``cube``."""
    output = Path(str(output).replace("{face}", "cube").replace("{index}", "cube"))
    return output.with_name(output.name + MANIFEST_SUFFIX)


def write_manifest(output: str | os.PathLike, *, bake: str, inputs: dict[str, str | os.PathLike],
                   params: dict[str, Any], outputs: list[str | os.PathLike],
                   extra: dict[str, Any] | None = None) -> Path:
    """Write :func:`manifest_path` of ``output``, describing one bake.

    Input paths are stored by name only (relative paths would vary with the working folder); their content
    hashes identify them. Outputs are stored relative to the manifest's folder with their content hashes
    (``output_digests``; call this after the outputs are written).
    """
    from bakery._version import __version__

    out_dir = Path(output).parent
    data = {
        "bake": bake,
        "bakery": __version__,
        "inputs": {role: {"name": Path(p).name, "digest": file_digest(p)} for role, p in inputs.items()},
        "params": params,
        "outputs": [_rel(o, out_dir) for o in outputs],
        # content hashes of the outputs, so a reader can tell whether a file is still the one the bake wrote
        "output_digests": {_rel(o, out_dir): file_digest(o) for o in outputs if Path(o).is_file()},
    }
    if extra:
        data.update(extra)
    return write_json(manifest_path(output), data)


def _rel(p: str | os.PathLike, base: Path) -> str:
    try:
        return Path(p).resolve().relative_to(base.resolve()).as_posix()
    except ValueError:
        return Path(p).name


def manifest_for(path: str | os.PathLike) -> dict[str, Any] | None:
    """The manifest that describes the file ``path`` and still matches it, or None.

    Looks at ``NAME.ext.bakery.json`` first, then at every other manifest in the same folder that lists the
    file among its outputs (mip levels and cube faces are listed in the manifest of their bake's main output).
    A manifest counts only when it records the file's content hash and the hash matches: a manifest left from
    an earlier bake of a file that changed since is stale and ignored. Unreadable manifests are ignored too.
    The returned dict is the manifest's JSON with ``"manifest"`` (its path) added.
    """
    path = Path(path)
    if not path.is_file():
        return None
    own = manifest_path(path)
    candidates = [own] + sorted(p for p in path.parent.glob("*" + MANIFEST_SUFFIX) if p != own)
    digest = None
    for cand in candidates:
        data = _load(cand)
        if data is None:
            continue
        recorded = data.get("output_digests")
        if not isinstance(recorded, dict) or path.name not in recorded:
            continue
        digest = digest or file_digest(path)
        if recorded[path.name] == digest:
            data["manifest"] = cand
            return data
    return None


def _load(path: Path) -> dict[str, Any] | None:
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    return data if isinstance(data, dict) else None
