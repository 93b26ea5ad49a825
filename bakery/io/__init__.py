"""File formats: the only part of bakery that reads or writes files.

The names below load their module on first use (PEP 562), so code that needs only a light module of this
package (``bakery.io.atomic``, ``bakery.io.manifest``) does not import numpy or an image library with it.
"""

from __future__ import annotations

import importlib
from typing import Any

_WHERE = {"atomic_output": "atomic", "check_distinct": "atomic", "DEFAULT_MAX_PIXELS": "images", "Image": "images",
          "read_image": "images", "write_image": "images", "file_digest": "manifest", "write_json": "manifest",
          "write_manifest": "manifest"}

__all__ = ["DEFAULT_MAX_PIXELS", "Image", "atomic_output", "check_distinct", "file_digest", "read_image",
           "write_image", "write_json", "write_manifest"]


def __getattr__(name: str) -> Any:
    module = _WHERE.get(name)
    if module is None:
        raise AttributeError(f"module 'bakery.io' has no attribute {name!r}")
    value = getattr(importlib.import_module(f"bakery.io.{module}"), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(__all__))
