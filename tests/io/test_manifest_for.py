"""Finding the manifest that describes a file, and ignoring stale ones (content hashes: FIPS 180-4 SHA-256)."""

from __future__ import annotations

import hashlib
import json

from bakery.io.manifest import manifest_for, write_manifest


def _write(tmp_path, name: str, data: bytes):
    p = tmp_path / name
    p.write_bytes(data)
    return p


def test_manifest_records_output_digests_checked_with_hashlib(tmp_path):
    src = _write(tmp_path, "h.png", b"height")
    main = _write(tmp_path, "n.png", b"level0")
    level = _write(tmp_path, "n.mip01.png", b"level1")
    man = write_manifest(main, bake="normal-mips", inputs={"normal": src}, params={}, outputs=[main, level])
    data = json.loads(man.read_text())
    assert data["output_digests"] == {
        "n.png": "sha256:" + hashlib.sha256(b"level0").hexdigest(),
        "n.mip01.png": "sha256:" + hashlib.sha256(b"level1").hexdigest(),
    }
    # a mip level is described by its bake's manifest, found beside it
    assert manifest_for(main)["manifest"] == man
    assert manifest_for(level)["bake"] == "normal-mips"
    assert manifest_for(src) is None


def test_changed_file_makes_its_manifest_stale(tmp_path):
    src = _write(tmp_path, "h.png", b"height")
    out = _write(tmp_path, "n.png", b"baked")
    write_manifest(out, bake="normal", inputs={"height": src}, params={}, outputs=[out])
    out.write_bytes(b"painted over by hand")
    assert manifest_for(out) is None


def test_unreadable_manifests_are_ignored(tmp_path):
    out = _write(tmp_path, "n.png", b"baked")
    (tmp_path / "n.png.bakery.json").write_text("{not json")
    (tmp_path / "other.png.bakery.json").write_text("[1, 2]")
    assert manifest_for(out) is None
    assert manifest_for(tmp_path / "missing.png") is None
