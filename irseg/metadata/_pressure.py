"""``[pressure]``: the sidecar of an image taken under a pressure difference names its partner.

::

    [pressure]
    reference = "lounge_north_0pa"   # stem of the same view at ambient pressure (same folder)
    difference_pa = 50               # pressure difference during this image, Pa
    minutes = 15                     # time at that difference when the image was taken (optional)

The section is checked here like every other, but a problem never fails the image: it is
recorded in :attr:`irseg.types.Pressure.problem` (file, key, value and fix) and fails the
*pair* only, so both images keep their single-image results. Whether the reference exists
and is itself at ambient pressure is known only across the folder; the survey run checks it
(:mod:`irseg.batch`).
"""

from __future__ import annotations

import difflib
import tomllib
from collections.abc import Mapping, Sequence
from typing import Any

from ..errors import MetadataError
from ..types import Pressure
from ._bounds import Bound, _b
from ._checks import _md_fail, _md_range, _md_show

__all__ = ["PRESSURE_BOUNDS", "PRESSURE_KEYS", "check_pressure", "pressure_to_dict", "pressure_reference"]

#: The range of each number of ``[pressure]``, with its reason.
PRESSURE_BOUNDS: dict[str, Bound] = {
    "difference_pa": _b(1, 100, unit="Pa", reason=(
        "ISO 9972 tests at 50 Pa (and a series of pressure differences up to about 100 Pa); below 1 Pa "
        "the wind and the stack effect of the building alone are as large (common practice)")),
    "minutes": _b(0, None, unit="min", reason="a time since the fan reached the difference cannot be negative"),
}

#: The keys of ``[pressure]``, in the order the guide lists them.
PRESSURE_KEYS = ("reference", "difference_pa", "minutes")

_FIXES = {
    "difference_pa": "give the pressure difference across the envelope in Pa, e.g. 50 (ISO 9972's test pressure)",
    "minutes": "give the minutes the building had been at that difference when the image was taken, or leave it out",
}


def _check_reference(src: str, value: Any) -> str:
    fix = ('give the stem of the same view taken at ambient pressure, in the same folder, e.g. '
           'reference = "lounge_north_0pa"')
    if not isinstance(value, str) or not value.strip():
        raise _md_fail(src, "pressure", "reference", value, "is not an image's name", fix)
    text = value.strip()
    if "/" in text or "\\" in text or text in (".", ".."):
        raise _md_fail(src, "pressure", "reference", value, "is a path, not an image in the same folder", fix)
    return text


def _checked(source: str, table: Any) -> Pressure:
    if not isinstance(table, Mapping):
        raise MetadataError(f"{source}: pressure = {_md_show(table)} should be a section [pressure] holding "
                            f"{', '.join(PRESSURE_KEYS)}")
    for key in table:
        if key not in PRESSURE_KEYS:
            near = difflib.get_close_matches(str(key), PRESSURE_KEYS, n=1, cutoff=0.6)
            hint = f"did you mean {near[0]!r}? " if near else ""
            raise MetadataError(f"{source}: [pressure] has no key {str(key)!r}; {hint}valid keys: "
                                f"{', '.join(PRESSURE_KEYS)}")
    for key in ("reference", "difference_pa"):
        if key not in table:
            raise MetadataError(f"{source}: [pressure] needs {key}; " + (
                "name the image of the same view at ambient pressure (its stem)" if key == "reference"
                else _FIXES[key]))
    reference = _check_reference(source, table["reference"])
    difference = _md_range(PRESSURE_BOUNDS["difference_pa"], fix=_FIXES["difference_pa"])(
        source, "pressure", "difference_pa", table["difference_pa"])
    minutes = _md_range(PRESSURE_BOUNDS["minutes"], fix=_FIXES["minutes"], optional=True)(
        source, "pressure", "minutes", table.get("minutes"))
    return Pressure(reference=reference, difference_pa=difference, minutes=minutes)


def check_pressure(source: str, table: Any) -> Pressure:
    """The ``[pressure]`` section as a :class:`~irseg.types.Pressure`; never raises.

    Parameters
    ----------
    source : str
        The file's name, for messages.
    table : Any
        The parsed section.

    Returns
    -------
    Pressure
        With ``problem`` set (file, key, value and fix) when the section cannot be used; the
        values that could be read are kept (``reference`` above all, for the pair's name).
    """
    try:
        return _checked(source, table)
    except MetadataError as exc:
        reference = table.get("reference") if isinstance(table, Mapping) else None
        reference = reference.strip() if isinstance(reference, str) and reference.strip() else None
        return Pressure(reference=reference, problem=str(exc))


def pressure_to_dict(pressure: Pressure | None) -> dict[str, Any]:
    """The keys given (``{}`` for an image without ``[pressure]``), JSON-ready."""
    if pressure is None:
        return {}
    out = {"reference": pressure.reference, "difference_pa": pressure.difference_pa, "minutes": pressure.minutes}
    return {k: v for k, v in out.items() if v is not None}


def pressure_reference(texts: Sequence[tuple[str, str]]) -> str | None:
    """The reference named by the last metadata text with a ``[pressure]`` section, leniently.

    For the survey run's planning (which files a pair's fingerprint covers): a text that does
    not parse, or a section without a usable ``reference``, gives None here; the metadata stage
    reports the problem.
    """
    found = None
    for _name, text in texts:
        try:
            tree = tomllib.loads(text)
        except (tomllib.TOMLDecodeError, ValueError, RecursionError):
            continue
        table = tree.get("pressure")
        if isinstance(table, Mapping):
            value = table.get("reference")
            found = value.strip() if isinstance(value, str) and value.strip() else None
    return found
