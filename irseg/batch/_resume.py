"""Fingerprints and resume: which images of a survey still need computing (used by irseg.batch).

An image is complete when its ``result.json`` (written last) holds the fingerprint of the
input's bytes, its metadata files, the settings and irseg's version, and its two pictures
exist. ``resume=True`` skips complete images; every other image becomes a task.

A pressurised image (``[pressure]`` in its sidecar, :mod:`irseg.pairs`) is computed with its
reference, so its fingerprint also covers the reference's bytes and metadata files, and its
task names the reference's file (or why none can be used: the pair then fails alone).
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
from ..metadata import pressure_reference
from ._loop import PAIR_FILES, image_files, image_folder_problem
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
    if record.registration is not None and not all(
        (folder / name).is_file() and (manifest is None or manifest.owns(f"{item.stem}/{name}")) for name in PAIR_FILES
    ):
        return None
    return record


def _pair_reference(item: InputImage,
                    by_folder: dict[str, list[InputImage]]) -> tuple[bool, InputImage | None, str | None]:
    """``(is a pressurised image, its reference, why no reference can be used)`` from its metadata texts."""
    try:
        texts = irio.read_metadata_texts(item.path)
    except InputError:
        return False, None, None  # the metadata stage fails the image itself
    if not any("pressure" in text for _name, text in texts):
        return False, None, None
    name = pressure_reference(texts)
    if name is None:
        return True, None, None  # the section's own problem fails the pair (irseg.metadata._pressure)
    sidecar = f"{Path(item.path).stem}.toml"
    folder = os.path.dirname(item.path)
    matches = [o for o in by_folder.get(folder, []) if Path(o.path).stem == name] \
        or [o for o in by_folder.get(folder, []) if Path(o.path).name == name]
    if len(matches) == 1 and matches[0].path == item.path:
        return True, None, (f"{sidecar}: [pressure] reference = \"{name}\" names this image itself; name the image "
                            "of the same view taken at ambient pressure")
    if len(matches) > 1:
        names = ", ".join(Path(o.path).name for o in matches)
        return True, None, (f"{sidecar}: [pressure] reference = \"{name}\" matches several images ({names}); "
                            "give the reference's file name with its suffix")
    if not matches:
        return True, None, (f"{sidecar}: [pressure] reference = \"{name}\" names no image of this survey in its "
                            "folder; give the stem of the image of the same view taken at ambient pressure, in the "
                            "same folder, and include that image in the run")
    return True, matches[0], None


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
    survey: Sequence[InputImage] | None = None,
) -> SurveyPlan:
    """Fingerprint every image; keep the complete ones when resuming, make tasks of the rest.

    With a ``manifest``, an image whose output folder is in the way fails at ``write`` without
    being computed (:func:`irseg.batch._loop.image_folder_problem`). ``survey`` (default
    ``items``) holds every image of the survey, where pressurised images find their reference.
    """
    plan = SurveyPlan([], [], [], [])
    by_folder: dict[str, list[InputImage]] = {}
    for other in (items if survey is None else survey):
        by_folder.setdefault(os.path.dirname(other.path), []).append(other)
    for item in items:
        base = item.base or root
        problem = image_folder_problem(out_dir, item.stem, manifest) if manifest is not None else None
        if problem is not None:
            failure = ImageFailure(image=item.image, stage="write", message=problem)
            plan.blocked.append(ImageOutcome(item.index, item.image, item.stem, "failed", failure=failure))
            continue
        pressurised, reference, problem = _pair_reference(item, by_folder)
        try:
            fingerprint = fingerprint_input(item.path, settings)
            if reference is not None:  # the pair is computed with this image: its reference counts too
                try:
                    fingerprint = _combined(fingerprint, fingerprint_input(reference.path, settings))
                except InputError as exc:
                    reference, problem = None, escape_text(relativise(str(exc), base))
                    fingerprint = _combined(fingerprint, "unreadable reference")
        except InputError as exc:  # unreadable file: that image alone fails
            message = escape_text(relativise(str(exc), base))
            failure = ImageFailure(image=item.image, stage="read", message=message)
            plan.unreadable.append(ImageOutcome(item.index, item.image, item.stem, "failed", failure=failure))
            continue
        record = load_complete(out_dir, item, fingerprint, manifest) if resume else None
        if record is not None:
            plan.resumed.append(ImageOutcome(item.index, item.image, item.stem, "ok", record=record, skipped=True))
            continue
        task = {
            "index": item.index, "path": item.path, "image": item.image, "rel": item.rel,
            "stem": item.stem, "root": base, "fingerprint": fingerprint, "settings": settings,
        }
        if pressurised:
            task["pair"] = True
            task["reference"] = None if reference is None else {"path": reference.path, "image": reference.image}
            task["reference_problem"] = problem
        plan.tasks.append(task)
    return plan


def _combined(fingerprint: str, reference: str) -> str:
    """A pressurised image's fingerprint: its own and its reference's."""
    digest = hashlib.sha256(b"irseg-pair-1\0" + fingerprint.encode() + b"\0" + reference.encode())
    return "sha256:" + digest.hexdigest()
