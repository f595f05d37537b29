"""Fallback rules for metadata that was not given (a leaf module: imports only irseg.types).

Each rule lives here once, so the metadata stage (which resolves and records it) and
any stage handed a hand-built :class:`~irseg.types.SurveyMeta` apply the same value.
"""

from __future__ import annotations

from .types import SurveyMeta

__all__ = ["DEFAULT_REFLECTED_C", "resolve_reflected_c"]

#: Reflected temperature assumed when neither it nor the air on the camera's side is known:
#: a room temperature (common practice; indoor design temperatures are about 20 °C).
DEFAULT_REFLECTED_C = 20.0


def resolve_reflected_c(meta: SurveyMeta) -> tuple[float, str | None]:
    """The reflected temperature in force, and why when it was not given.

    Rule: ``[surface] reflected_c`` when given; otherwise the air temperature on the
    camera's side (``[air] inside_c`` for an ``"interior"`` view, ``outside_c`` for
    ``"exterior"`` and ``"roof"``); otherwise :data:`DEFAULT_REFLECTED_C` (20 °C).

    Parameters
    ----------
    meta : SurveyMeta
        Metadata in force.

    Returns
    -------
    value : float
        Reflected apparent temperature, °C.
    reason : str or None
        None when ``reflected_c`` was given; otherwise where the value came from
        (``"the inside air"``, ``"the outside air"`` or ``"no air temperature on the
        camera's side either"``).
    """
    given = meta.surface.reflected_c
    if given is not None:
        return float(given), None
    interior = meta.surface.view == "interior"
    side_air = meta.air.inside_c if interior else meta.air.outside_c
    if side_air is not None:
        return float(side_air), "the inside air" if interior else "the outside air"
    return DEFAULT_REFLECTED_C, "no air temperature on the camera's side either"
