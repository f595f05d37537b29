"""Fingerprints and resume: which images of a survey still need computing (used by irseg.batch).

An image is complete when its ``result.json`` (written last) holds the fingerprint of the
input's bytes, its metadata files, the settings and irseg's version, and its two pictures
exist. ``resume=True`` skips complete images; every other image becomes a task.
"""

from __future__ import annotations

import hashlib
import json
import os
import stat
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from ..io import OutputManifest, escape_text
from .. import io as irio
from .._version import __version__
from ..errors import ConfigError, InputError
from ._inputs import InputImage, relativise
from ._loop import image_files, image_folder_problem
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
        If the file cannot be read or is not a regular file (a FIFO is refused, never read).
    """
    digest = hashlib.sha256()
    digest.update(b"irseg-fingerprint-1\0" + __version__.encode() + b"\0")
    settings_json = json.dumps(irio.normalise_json(settings.to_dict()), sort_keys=True)
    digest.update(settings_json.encode() + b"\0")
    name = escape_text(Path(path).name)
    try:
        # O_NONBLOCK: a FIFO named like an image must not block the run; fstat checks the file opened
        fd = os.open(path, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_CLOEXEC", 0)
                     | getattr(os, "O_BINARY", 0))
    except OSError as exc:
        fix = "make it readable" if isinstance(exc, PermissionError) else "check it exists"
        raise InputError(f"{name}: cannot read the file ({exc.strerror or exc}); {fix}") from exc
    try:
        if not stat.S_ISREG(os.fstat(fd).st_mode):
            raise InputError(f"{name}: not a regular file (a folder, pipe or device); name an image file")
        with os.fdopen(fd, "rb") as handle:
            fd = -1
            for chunk in iter(lambda: handle.read(1 << 20), b""):
                digest.update(chunk)
    except OSError as exc:
        if isinstance(exc, InputError):
            raise
        raise InputError(f"{name}: cannot read the file ({exc.strerror or exc}); check its permissions") from exc
    finally:
        if fd >= 0:
            os.close(fd)
    for meta_path in irio.metadata_candidates(path):
        digest.update(b"\0meta\0" + os.fsencode(meta_path.name))
        try:
            digest.update(b"\0" + irio.read_small_bytes(meta_path, what="metadata file"))
        except InputError:
            digest.update(b"\0absent")
    return "sha256:" + digest.hexdigest()


def load_complete(
    out_dir: Path, item: InputImage, fingerprint: str, manifest: OutputManifest | None = None
) -> ImageRecord | None:
    """The stored record of an image when its outputs are complete, match, and irseg wrote them, else None."""
    folder = out_dir / item.stem
    if manifest is not None and (
        image_folder_problem(out_dir, item.stem, manifest) is not None
        or not all(manifest.owns(rel) for rel in image_files(item.stem))
    ):
        return None
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
    blocked : list of ImageOutcome
        Images whose output folder cannot be used (failed at ``write`` before being computed:
        a link, a file, or a file irseg did not write in the way), in input order.
    """

    tasks: list[dict[str, Any]]
    resumed: list[ImageOutcome]
    unreadable: list[ImageOutcome]
    blocked: list[ImageOutcome] = field(default_factory=list)


def plan_survey(
    items: Sequence[InputImage],
    root: str,
    settings: SurveySettings,
    out_dir: Path,
    *,
    resume: bool,
    manifest: OutputManifest | None = None,
) -> SurveyPlan:
    """Fingerprint every image; keep the complete ones when resuming, make tasks of the rest.

    With a ``manifest``, an image whose output folder is in the way fails at ``write`` without
    being computed (:func:`irseg.batch._loop.image_folder_problem`).
    """
    plan = SurveyPlan([], [], [], [])
    for item in items:
        base = item.base or root
        problem = image_folder_problem(out_dir, item.stem, manifest) if manifest is not None else None
        if problem is not None:
            failure = ImageFailure(image=item.image, stage="write", message=problem)
            plan.blocked.append(ImageOutcome(item.index, item.image, item.stem, "failed", failure=failure))
            continue
        try:
            fingerprint = fingerprint_input(item.path, settings)
        except InputError as exc:  # unreadable file: that image alone fails
            message = escape_text(relativise(str(exc), base))
            failure = ImageFailure(image=item.image, stage="read", message=message)
            plan.unreadable.append(ImageOutcome(item.index, item.image, item.stem, "failed", failure=failure))
            continue
        record = load_complete(out_dir, item, fingerprint, manifest) if resume else None
        if record is not None:
            plan.resumed.append(ImageOutcome(item.index, item.image, item.stem, "ok", record=record, skipped=True))
            continue
        plan.tasks.append({
            "index": item.index, "path": item.path, "image": item.image, "rel": item.rel,
            "stem": item.stem, "root": base, "fingerprint": fingerprint, "settings": settings,
        })
    return plan
