"""Small bakes registered for the batch tests only (the batch code never names a bake).

They read and write through :mod:`bakery.io` like real bakes: outputs atomically, plus a manifest.
"""

from __future__ import annotations

import os
import time
from dataclasses import dataclass
from pathlib import Path

from bakery.bakes import Bake, params_to_dict, register
from bakery.bakes.params import Params, param


@dataclass(frozen=True)
class InvertParams(Params):
    """``out = gain * (1 - in)``; ``delay`` seconds of sleep make jobs slow enough to interrupt; a non-zero
    ``crash`` ends the worker process abruptly with that exit status (as a segfault or the OOM killer would)."""

    gain: float = param(1.0, "Gain.")
    delay: float = param(0.0, "Seconds of sleep.", low=0.0)
    crash: int = param(0, "Exit status of an abrupt end (0: none).")


def _invert(inputs: dict[str, Path], output: Path, params: InvertParams, progress=None) -> list[Path]:
    from bakery.io import read_image, write_image, write_manifest

    img = read_image(inputs["source"])
    progress(0.25, "read")
    if params.delay:
        time.sleep(params.delay)
    progress(0.75, "inverted")
    if params.crash:
        os._exit(params.crash)
    write_image(output, params.gain * (1.0 - img.pixels), bits=img.bits if img.bits != "float" else None)
    m = write_manifest(output, bake="test-invert", inputs=inputs, params=params_to_dict(params), outputs=[output])
    progress(1.0, "written")
    return [output, m]


@dataclass(frozen=True)
class MixParams(Params):
    """``out = (1 - w) * base + w * detail``, times ``mask`` when given."""

    weight: float = param(0.5, "Weight of the detail.")


def _mix(inputs: dict[str, Path], output: Path, params: MixParams, progress=None) -> list[Path]:
    from bakery.io import read_image, write_image, write_manifest

    base = read_image(inputs["base"])
    detail = read_image(inputs["detail"]).pixels
    out = (1 - params.weight) * base.pixels + params.weight * detail
    if "mask" in inputs:
        out = out * read_image(inputs["mask"]).pixels
    write_image(output, out, bits=base.bits)
    m = write_manifest(output, bake="test-mix", inputs=inputs, params=params_to_dict(params), outputs=[output])
    return [output, m]


def _image_and_manifest(inputs: dict[str, Path], output: Path, params) -> list[Path]:
    from bakery.io.manifest import manifest_path

    return [output, manifest_path(output)]


def _just(inputs: dict[str, Path], output: Path, params) -> list[Path]:
    return [output]


INVERT = register(Bake("test-invert", "1 - x (batch tests)", ("source",), InvertParams, _image_and_manifest,
                        _invert))
MIX = register(Bake("test-mix", "weighted mix of two maps (batch tests)", ("base", "detail", "mask?"), MixParams,
                    _image_and_manifest, _mix))


@dataclass(frozen=True)
class RampParams(Params):
    """A horizontal ramp of ``size`` texels from 0 to 1."""

    size: int = param(8, "Texels.", low=2)


def _ramp(inputs: dict[str, Path], output: Path, params: RampParams, progress=None) -> list[Path]:
    import numpy as np

    from bakery.io import write_image, write_manifest

    write_image(output, np.tile(np.linspace(0, 1, params.size, dtype=np.float32), (2, 1)), bits="16")
    m = write_manifest(output, bake="test-ramp", inputs={}, params=params_to_dict(params), outputs=[output])
    return [output, m]


RAMP = register(Bake("test-ramp", "a ramp, no inputs (batch tests)", (), RampParams, _image_and_manifest, _ramp))


@dataclass(frozen=True)
class ProbeParams(Params):
    """No parameters: the ``test-probe`` bake records the thread settings of the process that runs it."""


def _probe(inputs: dict[str, Path], output: Path, params: ProbeParams, progress=None) -> list[Path]:
    import cv2
    import OpenEXR

    from bakery.bakes import bake_threads
    from bakery.io import write_json

    names = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "NUMBA_NUM_THREADS")
    data = {"cv2": cv2.getNumThreads(), "openexr": OpenEXR.global_thread_count(), "bakery": bake_threads(),
            "env": {k: os.environ.get(k) for k in names}}
    return [write_json(output, data)]


PROBE = register(Bake("test-probe", "thread settings of a worker (batch tests)", (), ProbeParams, _just, _probe))


@dataclass(frozen=True)
class ResizeParams(Params):
    """Nearest-texel resampling to ``size`` × ``size`` texels (changes the size a chained rule sees)."""

    size: int = param(32, "Texels.", low=1)


def _resize(inputs: dict[str, Path], output: Path, params: ResizeParams, progress=None) -> list[Path]:
    import numpy as np

    from bakery.io import read_image, write_image, write_manifest

    img = read_image(inputs["source"])
    h, w = img.pixels.shape[:2]
    rows = np.arange(params.size) * h // params.size
    cols = np.arange(params.size) * w // params.size
    write_image(output, img.pixels[rows][:, cols], bits="16")
    m = write_manifest(output, bake="test-resize", inputs=inputs, params=params_to_dict(params), outputs=[output])
    return [output, m]


RESIZE = register(Bake("test-resize", "nearest-texel resize (batch tests)", ("source",), ResizeParams,
                       _image_and_manifest, _resize))


@dataclass(frozen=True)
class LevelsParams(Params):
    """Halvings of the input down to 1 texel, one file each (``NAME.lvK.png``): files that follow its size."""


def _level_files(inputs: dict[str, Path], output: Path, params) -> list[Path]:
    from bakery.io.images import image_size
    from bakery.io.manifest import manifest_path

    w, h = image_size(inputs["source"])
    count = max(min(w, h).bit_length() - 1, 0)
    return [output, manifest_path(output)] + [output.with_name(f"{output.stem}.lv{k}{output.suffix}")
                                              for k in range(1, count + 1)]


def _levels(inputs: dict[str, Path], output: Path, params: LevelsParams, progress=None) -> list[Path]:
    from bakery.io import read_image, write_image, write_manifest

    img = read_image(inputs["source"]).pixels
    files = _level_files(inputs, output, params)
    write_image(output, img, bits="16")
    for k, path in enumerate(files[2:], 1):
        write_image(path, img[:: 2**k, :: 2**k], bits="16")
    write_manifest(output, bake="test-levels", inputs=inputs, params=params_to_dict(params), outputs=[output])
    return files


LEVELS = register(Bake("test-levels", "one file per halving (batch tests)", ("source",), LevelsParams,
                       _level_files, _levels))
