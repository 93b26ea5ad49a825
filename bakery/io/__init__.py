"""File formats: the only part of bakery that reads or writes files."""

from bakery.io.atomic import atomic_output, check_distinct
from bakery.io.images import DEFAULT_MAX_PIXELS, Image, read_image, write_image
from bakery.io.manifest import file_digest, write_json, write_manifest

__all__ = ["DEFAULT_MAX_PIXELS", "Image", "atomic_output", "check_distinct", "file_digest", "read_image",
           "write_image", "write_json", "write_manifest"]
