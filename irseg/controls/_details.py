"""Job and image details: the free-text ``[survey]`` and ``[image]`` sections, and visible photos.

``[survey]`` (``survey.toml`` only) says which job a survey is; ``[image]`` (an image's sidecar
only) says what one image shows. Every key is optional free text; TOML dates and times are
kept as their ISO text. A visible-light photo of an image is the file its ``[image] photo``
names (relative to the image's folder), else ``<stem>_photo.jpg`` / ``.jpeg`` / ``.png``
beside the image; it is shown beside the overlay in the report, scaled, never registered.
"""

from __future__ import annotations

import os
import tomllib
from collections.abc import Iterable, Mapping
from pathlib import Path

from ..errors import InputError
from ..metadata import DETAIL_SECTIONS, check_details, details_from

__all__ = [
    "DETAIL_SECTIONS",
    "check_details",
    "details_from",
    "PHOTO_SUFFIXES",
    "photo_candidates",
    "find_photo",
    "photo_files",
    "photo_thumbnail",
]

#: Suffixes of a photo found by name (``<stem>_photo<suffix>``), in the order tried.
PHOTO_SUFFIXES = (".jpg", ".jpeg", ".png", ".JPG", ".JPEG", ".PNG")

#: Largest photo read for the report (64 MiB: a camera JPEG is a few MB).
MAX_PHOTO_BYTES = 64 << 20

#: The long side of a photo as embedded in the report, pixels.
PHOTO_SIDE_PX = 640


# --------------------------------------------------------------------------- photos


def photo_candidates(image_path: str | os.PathLike[str], photo: str | None = None) -> list[Path]:
    """Where the photo of an image may be, in the order looked at.

    Parameters
    ----------
    image_path : path-like
        The thermogram.
    photo : str, optional
        Its ``[image] photo`` (relative to the image's folder, or absolute): then only that file.

    Returns
    -------
    list of Path
    """
    image = Path(image_path)
    if photo:
        return [image.parent / photo]
    return [image.with_name(f"{image.stem}_photo{suffix}") for suffix in PHOTO_SUFFIXES]


def find_photo(image_path: str | os.PathLike[str], photo: str | None = None) -> Path | None:
    """The photo of an image that exists as a regular file, or None (see :func:`photo_candidates`)."""
    for path in photo_candidates(image_path, photo):
        if path.is_file():
            return path
    return None


def _photo_key(image: Path) -> str | None:
    """``[image] photo`` of an image's sidecar, or None (an unreadable sidecar fails its image later)."""
    from ..io import metadata_candidates, read_small_text

    sidecar = metadata_candidates(image)[1]
    if not sidecar.is_file():
        return None
    try:
        tree = tomllib.loads(read_small_text(sidecar, what="metadata file"))
    except (InputError, tomllib.TOMLDecodeError, RecursionError):
        return None
    section = tree.get("image")
    value = section.get("photo") if isinstance(section, Mapping) else None
    return value.strip() if isinstance(value, str) and value.strip() else None


def photo_files(images: Iterable[str | os.PathLike[str]]) -> set[str]:
    """The photos of a survey's images that exist: absolute, normalised paths.

    A folder scan leaves these out silently: they are pictures *of* an image (shown in the
    report), neither thermograms nor files to report as skipped.
    """
    found: set[str] = set()
    for image in images:
        path = Path(os.path.abspath(image))
        for candidate in photo_candidates(path, _photo_key(path)):
            if os.path.lexists(candidate):
                found.add(os.path.normpath(os.path.abspath(candidate)))
    return found


def photo_thumbnail(path: str | os.PathLike[str], *, side_px: int = PHOTO_SIDE_PX) -> bytes:
    """A photo scaled to fit ``side_px`` on its long side, as JPEG bytes (for the report).

    Raises
    ------
    InputError
        The file cannot be read, is larger than 64 MiB, or is not a JPEG or PNG picture.
    """
    import cv2
    import numpy as np

    from ..io import read_small_bytes

    blob = read_small_bytes(path, max_bytes=MAX_PHOTO_BYTES, what="photo")
    name = Path(path).name
    if not (blob.startswith(b"\xff\xd8\xff") or blob.startswith(b"\x89PNG\r\n\x1a\n")):
        raise InputError(f"{name}: the photo is not a JPEG or PNG picture; export it as JPEG")
    picture = cv2.imdecode(np.frombuffer(blob, np.uint8), cv2.IMREAD_COLOR)
    if picture is None or picture.size == 0:
        raise InputError(f"{name}: the photo cannot be decoded; export it again as JPEG")
    rows, cols = picture.shape[:2]
    scale = min(1.0, side_px / max(rows, cols))
    if scale < 1.0:
        size = (max(1, round(cols * scale)), max(1, round(rows * scale)))
        picture = cv2.resize(picture, size, interpolation=cv2.INTER_AREA)
    ok, encoded = cv2.imencode(".jpg", picture, [cv2.IMWRITE_JPEG_QUALITY, 85])
    if not ok:  # pragma: no cover - OpenCV always encodes an 8-bit colour picture
        raise InputError(f"{name}: the photo cannot be re-encoded for the report")
    return encoded.tobytes()
