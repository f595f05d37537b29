"""Defaults resolved once, in the metadata stage, and recorded as assumptions.

A value no metadata layer gave is assumed here, recorded in ``SurveyMeta.assumed`` and
announced with one :class:`~irseg.errors.MetadataWarning`, so every later stage reads the
value in force from the SurveyMeta and none re-derives it with a fallback of its own.
"""

from __future__ import annotations

import dataclasses
import warnings
from collections.abc import Mapping
from typing import Any

from .._defaults import REFLECTED_KEY, resolve_reflected_c
from ..errors import MetadataWarning
from ..types import Assumption, SurveyMeta

__all__: list[str] = []


def _md_assume(meta: SurveyMeta, surface_given: Mapping[str, Any]) -> SurveyMeta:
    """``meta`` with view, emissivity and reflected temperature resolved and their assumptions recorded.

    Parameters
    ----------
    meta : SurveyMeta
        Built from the merged layers (dataclass defaults where no layer gave a key).
    surface_given : mapping
        The ``[surface]`` keys the layers gave (a None value counts as not given).
    """
    assumed: list[Assumption] = []
    surface = meta.surface
    if surface_given.get("view") is None:
        assumed.append(Assumption("surface.view", surface.view, "the default"))
        _md_warn(
            f'no [surface] view given: view taken as "{surface.view}" (the default); '
            'set view = "exterior" or "roof" for shots taken from outside'
        )
    if surface_given.get("emissivity") is None:
        reason = "the default, typical of painted and mineral building surfaces"
        assumed.append(Assumption("surface.emissivity", surface.emissivity, reason))
        _md_warn(
            f"no [surface] emissivity given: emissivity taken as {surface.emissivity:g} ({reason}); "
            "give the material's long-wave emissivity"
        )
    reflected_c, reason = resolve_reflected_c(meta)
    if reason is not None:  # the reason names the value taken and how to give it
        surface = dataclasses.replace(surface, reflected_c=reflected_c)
        assumed.append(Assumption(REFLECTED_KEY, reflected_c, reason))
        _md_warn(reason)
    return dataclasses.replace(meta, surface=surface, assumed=(*meta.assumed, *assumed))


def _md_warn(message: str) -> None:
    # stacklevel: _md_warn <- _md_assume <- merge_metadata <- load_metadata <- the caller
    warnings.warn(message, MetadataWarning, stacklevel=5)
