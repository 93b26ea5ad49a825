"""Target profiles: a small TOML file stating what the engine a library is baked for expects.

A profile states conventions once (the green channel of normal maps, sample types, KTX2 texel formats per map
kind, mip chains, colour encoding, the layout of cube images) and every bake takes its defaults from it; an
explicit option, recipe value or folder file still wins. The file format is described in ``docs/profiles.md``;
``samples/profiles/`` holds two examples.

Statements use the parameter words of the bakes (``y``, ``bits``, ``ktx2-format`` ...), at the top level (every
map kind) or in a table per map kind (``[normal]``, ``[roughness]`` ...); a kind's table wins over the top level.
A statement reaches a bake when the bake has that parameter and writes that kind of map (:data:`BAKE_KINDS`).

Precedence of parameter values, highest first: command option > folder file > rule parameters > recipe
defaults > profile > the bake's own default.

This module imports neither numpy nor OpenCV.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from bakery.errors import BakeryError

#: Map kinds a profile can speak of, each with a table of its own.
KINDS = ("normal", "height", "roughness", "color", "mask", "environment", "lookup", "packed")

#: The kind of map each bake writes (bakes not listed take only the top-level statements).
BAKE_KINDS = {
    "normal": "normal", "blend": "normal", "normal-fix": "normal", "normal-mips": "normal",
    "height": "height",
    "roughness": "roughness", "antialias": "roughness",
    "mips": "color",
    "occlusion": "mask", "curvature": "mask",
    "env-convert": "environment", "env-diffuse": "environment", "env-specular": "environment",
    "env-lights": "environment",
    "env-lut": "lookup",
    "pack": "packed",
}

#: Keys about the profile itself (top level only).
ABOUT_KEYS = ("name", "about")

#: Layouts of a cube or panorama written as one image.
IMAGE_LAYOUTS = ("equirect", "cross-wide", "cross-tall", "row", "stack")


def _choice(*values: Any) -> Callable[[Any], Any]:
    def check(v: Any) -> Any:
        for c in values:
            if (isinstance(v, str) and isinstance(c, str) and v.lower() == c) or (
                    not isinstance(v, bool) and not isinstance(c, str) and v == c):
                return c
            if isinstance(c, str) and isinstance(v, int) and not isinstance(v, bool) and str(v) == c:
                return c  # bits = 16
        raise ValueError(f"must be one of {', '.join(map(str, values))}; got {v!r}")
    return check


def _levels(v: Any) -> Any:
    if isinstance(v, str) and v.lower() == "full":
        return "full"
    if isinstance(v, int) and not isinstance(v, bool) and 1 <= v <= 16:
        return v
    raise ValueError(f'must be "full" (down to 1x1) or a whole number of levels 1-16; got {v!r}')


def _zstd(v: Any) -> Any:
    if isinstance(v, int) and not isinstance(v, bool) and 1 <= v <= 22:
        return v
    raise ValueError(f"must be a Zstandard level 1-22; got {v!r}")


def _ktx2_format(v: Any) -> Any:
    if not isinstance(v, str) or not v.strip():
        raise ValueError(f"must be a KTX2 format name or compressed; got {v!r}")
    if v.lower() == "compressed":
        return "compressed"
    from bakery.io.ktx2_formats import get_format

    try:
        get_format(v)
    except BakeryError as exc:
        raise ValueError(str(exc)) from None
    return v


@dataclass(frozen=True)
class Statement:
    """One thing a profile can state: how its value is checked, the kinds it may be stated for (None: every
    kind and the top level) and what it means."""

    check: Callable[[Any], Any]
    kinds: tuple[str, ...] | None
    help: str


#: Every statement word, with its check and meaning (docs/profiles.md lists them).
STATEMENTS: dict[str, Statement] = {
    "y": Statement(_choice("up", "down"), None, "green-channel convention of normal maps: up (+Y up, glTF 2.0) "
                   "or down"),
    "bits": Statement(_choice("8", "16", "half", "float"), None, "sample type of image outputs"),
    "levels": Statement(_levels, None, 'mip levels of every chain: "full" (down to 1x1) or a count; 1 = no mips'),
    "ktx2-format": Statement(_ktx2_format, None, "texel format of .ktx2 outputs (compressed: the block format "
                             "made for the map)"),
    "effort": Statement(_choice("fast", "balanced", "best"), None, "block-compression effort"),
    "zstd": Statement(_zstd, None, "Zstandard supercompression level of .ktx2 outputs"),
    "channels": Statement(_choice(2, 3), ("normal",), "channels of normal-map files (2 = XY)"),
    "transfer": Statement(_choice("srgb", "linear"), ("color",), "colour encoding of colour maps"),
    "output-layout": Statement(_choice(*IMAGE_LAYOUTS), ("environment",), "layout of an environment written "
                               "as one image (.ktx2 and {face} outputs keep theirs)"),
    "roughness-grows": Statement(_choice("down", "up"), ("lookup",), "row order of the split-sum table"),
}


@dataclass(frozen=True)
class Profile:
    """A checked target profile (:func:`load_profile`).

    Attributes
    ----------
    path : Path
        The file it was read from (absolute).
    name : str
        Its ``name`` key, else the file name without ``.toml``.
    about : str
        Its ``about`` key (free text), else empty.
    every : dict
        Top-level statements (every map kind), by statement word.
    kinds : dict
        Statements per map kind (:data:`KINDS`), by statement word.
    """

    path: Path
    name: str
    about: str = ""
    every: dict[str, Any] = field(default_factory=dict)
    kinds: dict[str, dict[str, Any]] = field(default_factory=dict)

    @property
    def y(self) -> str:
        """Green-channel convention of the library's normal maps, ``"up"`` or ``"down"`` (``"up"`` when the
        profile does not say)."""
        return self.statements("normal").get("y", "up")

    def statements(self, kind: str | None) -> dict[str, Any]:
        """The statements that hold for maps of ``kind`` (None: the top level only)."""
        return {**self.every, **(self.kinds.get(kind, {}) if kind else {})}

    def where(self, word: str, bake_name: str) -> str:
        """Where the statement ``word`` a bake takes comes from: ``"profile FILE, key [normal] y"``."""
        kind = BAKE_KINDS.get(bake_name)
        key = f"[{kind}] {word}" if kind and word in self.kinds.get(kind, {}) else word
        return f"profile {self.path}, key {key}"

    def defaults_for(self, bake_name: str, output: str | Path | None = None) -> dict[str, Any]:
        """Parameter values bake ``bake_name`` takes from this profile, keyed by parameter word
        (``ktx2-format``), as :func:`bakery.bakes.params_from_mapping` accepts them.

        Only parameters the bake has are returned. ``levels = "full"`` becomes each bake's own way to say
        "down to 1x1"; a bake with a ``mips`` switch (env convert, pack) takes ``levels`` as on (more than one
        level) or off, and pack its count with it. With ``output`` given, ``output-layout`` is left out when the
        path decides the layout (``.ktx2``, a ``{face}`` pattern).
        """
        from bakery.bakes import get_bake
        from bakery.bakes.params import specs

        try:
            bake = get_bake(bake_name)
        except BakeryError:
            return {}
        by_name = {s.option: s for s in specs(bake.params)}
        out: dict[str, Any] = {}
        for word, value in self.statements(BAKE_KINDS.get(bake_name)).items():
            if word == "levels":
                switch = "mips" in by_name and by_name["mips"].base is bool
                if switch and "levels" in by_name:  # pack: a mips switch and a count that goes with it
                    out["mips"] = value == "full" or value > 1
                    if out["mips"] and value != "full":
                        out["levels"] = value
                elif "levels" in by_name:
                    spec = by_name["levels"]
                    full = 0 if spec.default == 0 else None  # env specular: 0 = down to 1x1
                    out["levels"] = full if value == "full" else value
                elif switch:
                    out["mips"] = value == "full" or value > 1
                continue
            if word == "output-layout" and output is not None and _path_decides_layout(Path(output)):
                continue
            if word in by_name:
                out[word] = value
        return out


def _path_decides_layout(path: Path) -> bool:
    return path.suffix.lower() == ".ktx2" or "{" in path.name


def load_profile(path: str | Path) -> Profile:
    """Read and check a target profile; a problem raises :class:`BakeryError` naming the file and the key.

    Every value is checked against the statement's allowed values, then against the parameters of every bake it
    reaches (so a value a bake refuses stops here, not in the middle of a run).
    """
    path = Path(path).expanduser()
    data = _read_toml(path)
    where = str(path)
    name = data.get("name", path.stem)
    if not isinstance(name, str) or not name.strip():
        raise BakeryError(f"{where}: key 'name': expected text; got {name!r}")
    about = data.get("about", "")
    if not isinstance(about, str):
        raise BakeryError(f"{where}: key 'about': expected text; got {about!r}")
    every: dict[str, Any] = {}
    kinds: dict[str, dict[str, Any]] = {}
    for key, value in data.items():
        if key in ABOUT_KEYS:
            continue
        if isinstance(value, dict):
            if key not in KINDS:
                raise BakeryError(f"{where}: unknown table [{key}]; a profile's tables are map kinds: "
                                  f"{', '.join(KINDS)}")
            kinds[key] = {w: _statement(w, v, key, where) for w, v in value.items()}
        else:
            every[key] = _statement(key, value, None, where)
    profile = Profile(path.resolve(), name.strip(), about, every, kinds)
    _check_against_bakes(profile, where)
    return profile


def _read_toml(path: Path) -> dict[str, Any]:
    import tomllib

    if path.is_dir():
        raise BakeryError("is a folder; a profile is a .toml file", path)
    try:
        text = path.read_bytes().decode("utf-8")
    except FileNotFoundError:
        raise BakeryError("profile not found", path) from None
    except OSError as exc:
        raise BakeryError(f"cannot read the profile ({exc.strerror})", path) from None
    except UnicodeDecodeError:
        raise BakeryError("not UTF-8 text; TOML files must be UTF-8", path) from None
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise BakeryError(f"TOML syntax error: {exc}", path) from None


def _statement(word: str, value: Any, kind: str | None, where: str) -> Any:
    shown = f"[{kind}] {word}" if kind else word
    st = STATEMENTS.get(word)
    if st is None:
        hint = f"; a table [{word}] is a map kind" if word in KINDS else ""
        allowed = [w for w, s in STATEMENTS.items() if s.kinds is None or (kind in s.kinds)]
        raise BakeryError(f"{where}: unknown key {shown!r}{hint}; known: {', '.join(ABOUT_KEYS + tuple(allowed))}"
                          if kind is None else
                          f"{where}: unknown key {shown!r}; a [{kind}] table has: {', '.join(allowed)}")
    if st.kinds is not None and kind not in st.kinds:
        tables = ", ".join(f"[{k}]" for k in st.kinds)
        raise BakeryError(f"{where}: key {shown!r}: {word} is stated in {tables} only")
    try:
        return st.check(value)
    except ValueError as exc:
        raise BakeryError(f"{where}: key {shown!r}: {exc}") from None


def _check_against_bakes(profile: Profile, where: str) -> None:
    from bakery.bakes import all_bakes

    for name, bake in all_bakes().items():
        values = {w.replace("-", "_"): v for w, v in profile.defaults_for(name).items()}
        try:
            bake.params(**values)  # together: some values go with others (pack's levels with its mips)
            continue
        except BakeryError as exc:
            problem = exc
        culprit = next(iter(values))
        for word, value in values.items():
            alone = {word: value, **({"mips": values["mips"]} if "mips" in values and word != "mips" else {})}
            try:
                bake.params(**alone)
            except BakeryError as exc:
                culprit, problem = word, exc
                break
        key = profile.where(culprit.replace("_", "-"), name).split(", key ", 1)[1]
        raise BakeryError(f"{where}: key {key!r}: bake {name!r} refuses it: {problem}") from None
        try:
            bake.params(**{w.replace("-", "_"): v for w, v in values.items()})
        except BakeryError as exc:
            raise BakeryError(f"{where}: bake {name!r} refuses these statements together: {exc}") from None
