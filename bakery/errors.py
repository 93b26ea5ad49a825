"""User-facing errors and warnings.

Every problem a user can fix (a bad file, a bad option, a bad recipe) raises :class:`BakeryError` with a
one-line message that names the file and the problem. The CLI prints the message alone and exits 2.
Programming errors are not caught into this family.
"""

from __future__ import annotations

import os


class BakeryError(ValueError):
    """A problem with the user's input: the message is one line, names the file and says what is wrong.

    The one exception family of bakery: pure functions (normals, roughness, environment maps, microfacet
    terms) raise it for values they cannot take, readers for bad files, bakes for bad parameters. It is a
    :class:`ValueError`, so callers that catch bad values the Python way catch it too.
    """

    def __init__(self, message: str, path: str | os.PathLike | None = None):
        self.path = None if path is None else os.fspath(path)
        text = " ".join(str(message).split())  # always one line
        if self.path is not None:
            text = f"{self.path}: {text}"
        super().__init__(text)


class BakeryWarning(UserWarning):
    """Suspicious but usable input; the CLI prints it as one ``warning: ...`` line on stderr."""
