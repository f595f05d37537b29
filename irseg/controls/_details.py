"""Job and image details: the free-text ``[survey]`` and ``[image]`` sections, and visible photos.

``[survey]`` (``survey.toml`` only) says which job a survey is; ``[image]`` (an image's sidecar
only) says what one image shows. Every key is optional free text; TOML dates and times are
kept as their ISO text. A visible-light photo of an image is the file its ``[image] photo``
names (relative to the image's folder), else ``<stem>_photo.jpg`` / ``.jpeg`` / ``.png``
beside the image; it is shown beside the overlay in the report, scaled, never registered.
"""

from __future__ import annotations

import dataclasses
import datetime
import difflib
import os
import tomllib
from collections.abc import Iterable, Mapping
from pathlib import Path
from typing import Any

from ..errors import InputError, MetadataError
from ..types import ImageDetails, SurveyDetails

__all__ = [
    "DETAIL_SECTIONS",
    "PHOTO_SUFFIXES",
    "check_details",
    "details_from",
    "photo_candidates",
    "find_photo",
    "photo_files",
    "photo_thumbnail",
]

#: The free-text sections, their record type and the file they belong in.
DETAIL_SECTIONS: dict[str, type] = {"survey": SurveyDetails, "image": ImageDetails}

#: Suffixes of a photo found by name (``<stem>_photo<suffix>``), in the order tried.
PHOTO_SUFFIXES = (".jpg", ".jpeg", ".png", ".JPG", ".JPEG", ".PNG")

#: Longest free-text value accepted, in characters (a paragraph; the report shows it whole).
MAX_DETAIL_CHARS = 2000

#: Largest photo read for the report (64 MiB: a camera JPEG is a few MB).
MAX_PHOTO_BYTES = 64 << 20

#: The long side of a photo as embedded in the report, pixels.
PHOTO_SIDE_PX = 640


def _keys(section: str) -> tuple[str, ...]:
    return tuple(f.name for f in dataclasses.fields(DETAIL_SECTIONS[section]))


def check_details(source: str, section: str, table: Any) -> dict[str, str]:
    """Check one ``[survey]`` or ``[image]`` table; return its values as stripped text.

    Parameters
    ----------
    source : str
        The file (named in messages).
    section : {"survey", "image"}
    table : Any
        The parsed TOML table.

    Returns
    -------
    dict of str to str
        The keys given; TOML dates and times as ISO text (``2026-01-14``, ``2026-01-14T21:40:00``).

    Raises
    ------
    MetadataError
        Not a table, an unknown key (with the nearest valid one), a value that is not text,
        a date or a time, or a value longer than 2000 characters; the message names the file,
        the key and the fix.
    """
    if not isinstance(table, Mapping):
        raise MetadataError(f"{source}: {section} = ... should be a section [{section}] holding keys, not a value")
    valid = _keys(section)
    out: dict[str, str] = {}
    for key, value in table.items():
        if key not in valid:
            near = difflib.get_close_matches(str(key), valid, n=1, cutoff=0.6)
            hint = f"did you mean {near[0]!r}? " if near else ""
            raise MetadataError(f"{source}: [{section}] has no key {key!r}; {hint}valid keys: {', '.join(valid)}")
        out[key] = _text(source, section, key, value)
    return out


def _text(source: str, section: str, key: str, value: Any) -> str:
    if isinstance(value, (datetime.date, datetime.time)):  # datetime.datetime is a date
        return value.isoformat()
    if not isinstance(value, str):
        raise MetadataError(
            f"{source}: [{section}] {key} = {value!r:.60} is not text; write it in quotes, e.g. {key} = \"...\""
        )
    text = value.strip()
    if len(text) > MAX_DETAIL_CHARS:
        raise MetadataError(
            f"{source}: [{section}] {key} is {len(text)} characters long; keep it under {MAX_DETAIL_CHARS} "
            "(details are a line or a paragraph)"
        )
    if key == "photo" and (not text or "\0" in text):
        raise MetadataError(f'{source}: [image] photo = "{text}" is not a file name; name the photo, e.g. "IMG_0412.jpg"')
    return text


def details_from(section: str, values: Mapping[str, str]) -> SurveyDetails | ImageDetails:
    """The record of a checked table (:func:`check_details`); keys absent read as None."""
    return DETAIL_SECTIONS[section](**dict(values))


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
