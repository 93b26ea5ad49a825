"""numba for the few kernels that need it, with its compiled-code cache outside the installed package.

numba's ``cache=True`` writes beside the module's source file by default, i.e. into site-packages; a later
``pip install -e`` then finds a stray ``bakery`` folder there that shadows the editable install. bakery points
the cache at the user's cache folder instead (``$XDG_CACHE_HOME/bakery/numba``, default
``~/.cache/bakery/numba``) unless ``NUMBA_CACHE_DIR`` chooses one. This is the one place in the core that
looks at the environment: where compiled code may be cached is the platform's convention, not a parameter.
"""

from __future__ import annotations

import os
from pathlib import Path


def cache_folder() -> Path:
    """Where bakery's numba kernels are cached."""
    base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    return Path(base) / "bakery" / "numba"


def numba():
    """The numba module, its cache folder set (call before decorating with ``cache=True``)."""
    import numba as nb

    if not nb.config.CACHE_DIR:
        nb.config.CACHE_DIR = str(cache_folder())
    return nb
