"""Conditions that contradict each other between the images of one survey folder.

Each image's metadata is checked on its own when it is loaded; this module looks across
images. The images of one folder are one survey session (one ``survey.toml`` describes
them), taken within an hour or two: their outside air temperatures should agree within a
few kelvin, and their inside air temperatures within the spread of the heated rooms of
one building. A larger spread is most often a typing error in a sidecar, or sidecars
copied from another night, and it changes every per-kelvin figure (kWh/year, f_Rsi).

The function is pure (no files, no warnings module): the caller puts the messages where
the survey's warnings go.
"""

from __future__ import annotations

from collections.abc import Mapping
from pathlib import PurePath

from ..types import SurveyMeta
from ._bounds import INSIDE_SPREAD_K, OUTSIDE_SPREAD_K

__all__ = ["survey_condition_warnings"]

#: Images named per temperature value in a message before "and N more".
_NAMES_SHOWN = 3


def survey_condition_warnings(metas: Mapping[str, SurveyMeta]) -> list[str]:
    """Warnings about air temperatures that disagree between the images of one folder.

    Images are grouped by the folder part of their name (``PurePath(name).parent``). In
    each folder, the outside air temperatures given (``[air] outside_c``) may spread by at
    most :data:`~irseg.metadata._bounds.OUTSIDE_SPREAD_K` (3 K) and the inside ones
    (``[air] inside_c``) by at most :data:`~irseg.metadata._bounds.INSIDE_SPREAD_K`
    (5 K); beyond that one warning per folder and key names the values, the images that
    have them and the fix. Images without the key are left out.

    Parameters
    ----------
    metas : mapping of str to SurveyMeta
        The metadata in force for each image, keyed by the image's name or path (as the
        caller shows images in its outputs, e.g. relative to the survey root).

    Returns
    -------
    list of str
        Messages in folder order, outside air before inside air; empty when all agree.
    """
    folders: dict[str, list[tuple[str, SurveyMeta]]] = {}
    for name in sorted(metas):
        folders.setdefault(str(PurePath(name).parent), []).append((name, metas[name]))
    out: list[str] = []
    for folder in sorted(folders):
        items = folders[folder]
        for key, limit, why in (
            ("outside_c", OUTSIDE_SPREAD_K, "one session's outside air changes by a degree or two"),
            ("inside_c", INSIDE_SPREAD_K, "the heated rooms of one building differ by a few kelvin"),
        ):
            values: dict[float, list[str]] = {}
            for name, meta in items:
                v = getattr(meta.air, key)
                if v is not None:
                    values.setdefault(float(v), []).append(PurePath(name).name)
            if len(values) < 2:
                continue
            spread = max(values) - min(values)
            if spread <= limit:
                continue
            where = "the images" if folder == "." else f"the images of {folder}"
            listed = "; ".join(f"{v:g} °C in {_names(names)}" for v, names in sorted(values.items()))
            out.append(
                f"[air] {key} differs by {spread:.1f} K between {where} ({listed}), more than the "
                f"{limit:g} K one survey session allows ({why}); check {key} in survey.toml and the "
                "sidecars: a typing error or a sidecar from another night changes every per-kelvin "
                "figure (kWh/year, f_Rsi)"
            )
    return out


def _names(names: list[str]) -> str:
    shown = ", ".join(names[:_NAMES_SHOWN])
    more = len(names) - _NAMES_SHOWN
    return f"{shown} and {more} more" if more > 0 else shown
