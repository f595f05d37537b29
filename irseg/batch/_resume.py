"""Fingerprints and resume: which images of a survey still need computing (used by irseg.batch).

An image is complete when its ``result.json`` (written last) holds the fingerprint of the
input's bytes, its metadata files, the settings and irseg's version, and its two pictures
exist. ``resume=True`` skips complete images; every other image becomes a task.
"""

from __future__ import annotations

import hashlib
import json
import os
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from .. import io as irio
from .._version import __version__
from ..errors import ConfigError, InputError
from ._inputs import InputImage
from ._records import ImageFailure, ImageOutcome, ImageRecord, SurveySettings

__all__ = ["fingerprint_input", "load_complete", "SurveyPlan", "plan_survey"]


def fingerprint_input(path: str | os.PathLike[str], settings: SurveySettings) -> str:
    """sha256 of an input's bytes, its metadata files, the settings and irseg's version.

    Parameters
    ----------
    path : path-like
        The image file.
    settings : SurveySettings

    Returns
    -------
    str
        ``"sha256:<hex>"``.

    Raises
    ------
    InputError
        If the file cannot be read.
    """
    digest = hashlib.sha256()
    digest.update(b"irseg-fingerprint-1\0" + __version__.encode() + b"\0")
    settings_json = json.dumps(irio.normalise_json(settings.to_dict()), sort_keys=True)
    digest.update(settings_json.encode() + b"\0")
    try:
        with open(path, "rb") as handle:
            for chunk in iter(lambda: handle.read(1 << 20), b""):
                digest.update(chunk)
    except OSError as exc:
        raise InputError(f"{Path(path).name}: cannot read the file ({exc.strerror or exc}); check it exists") from exc
    for meta_path in irio.metadata_candidates(path):
        digest.update(b"\0meta\0" + meta_path.name.encode())
        try:
            digest.update(b"\0" + irio.read_small_bytes(meta_path, what="metadata file"))
        except InputError:
            digest.update(b"\0absent")
    return "sha256:" + digest.hexdigest()


def load_complete(out_dir: Path, item: InputImage, fingerprint: str) -> ImageRecord | None:
    """The stored record of an image when its outputs are complete and match, else None."""
    folder = out_dir / item.stem
    try:
        record = ImageRecord.from_json(irio.normalise_json(irio.read_json_file(folder / "result.json")))
    except ConfigError:  # absent, unreadable or not irseg's record: compute again
        return None
    if (
        record.fingerprint != fingerprint
        or record.stem != item.stem
        or record.image != item.image
        or record.irseg_version != __version__
    ):
        return None
    if not (folder / "labels.png").is_file() or not (folder / "overlay.png").is_file():
        return None
    return record


@dataclass(frozen=True)
class SurveyPlan:
    """What a run has to do.

    Attributes
    ----------
    tasks : list of dict
        One small picklable task per image to compute (see :func:`irseg.batch._worker.run_task`).
    resumed : list of ImageOutcome
        Complete images kept from an earlier run (``skipped=True``), in input order.
    unreadable : list of ImageOutcome
        Images whose file could not even be fingerprinted (failed at ``read``), in input order.
    """

    tasks: list[dict[str, Any]]
    resumed: list[ImageOutcome]
    unreadable: list[ImageOutcome]


def plan_survey(
    items: list[InputImage], root: str, settings: SurveySettings, out_dir: Path, *, resume: bool
) -> SurveyPlan:
    """Fingerprint every image; keep the complete ones when resuming, make tasks of the rest."""
    plan = SurveyPlan([], [], [])
    for item in items:
        try:
            fingerprint = fingerprint_input(item.path, settings)
        except InputError as exc:  # unreadable file: that image alone fails
            failure = ImageFailure(image=item.image, stage="read", message=str(exc))
            plan.unreadable.append(ImageOutcome(item.index, item.image, item.stem, "failed", failure=failure))
            continue
        record = load_complete(out_dir, item, fingerprint) if resume else None
        if record is not None:
            plan.resumed.append(ImageOutcome(item.index, item.image, item.stem, "ok", record=record, skipped=True))
            continue
        plan.tasks.append({
            "index": item.index, "path": item.path, "image": item.image, "rel": item.rel,
            "stem": item.stem, "root": root, "fingerprint": fingerprint, "settings": settings,
        })
    return plan
