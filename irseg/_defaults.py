"""Defaults that depend on other settings, resolved by one rule each (a leaf module).

It imports only :mod:`irseg.types`, so the metadata stage, the radiometric correction and
the analysis can all apply the same rule instead of each keeping its own fallback.
"""

from __future__ import annotations

from .types import SurveyMeta

__all__ = ["DEFAULT_REFLECTED_C", "REFLECTED_KEY", "camera_side_air_c", "resolve_reflected_c"]

#: Reflected temperature assumed when neither ``[surface] reflected_c`` nor the air temperature on
#: the camera's side is known, °C (a heated room; common practice).
DEFAULT_REFLECTED_C = 20.0

#: The ``SurveyMeta.assumed`` key of an assumed reflected temperature.
REFLECTED_KEY = "surface.reflected_c"


def camera_side_air_c(meta: SurveyMeta) -> float | None:
    """Air temperature on the camera's side: ``inside_c`` for an interior view, ``outside_c`` otherwise.

    Parameters
    ----------
    meta : SurveyMeta
        The metadata in force.

    Returns
    -------
    float or None
        °C, or None when that air temperature is not given.
    """
    air = meta.air
    return air.inside_c if meta.surface.view == "interior" else air.outside_c


def resolve_reflected_c(meta: SurveyMeta) -> tuple[float, str | None]:
    """Reflected temperature in force and, when it was not given, why this value.

    The rule: ``[surface] reflected_c`` when given; else the air temperature on the
    camera's side (:func:`camera_side_air_c`: the surroundings a camera sees are at
    about the air temperature of the room or street it stands in); else
    :data:`DEFAULT_REFLECTED_C`.

    Parameters
    ----------
    meta : SurveyMeta
        The metadata in force.

    Returns
    -------
    reflected_c : float
        °C.
    reason : str or None
        None when ``[surface] reflected_c`` was given; otherwise a sentence naming the
        value taken and the setting that fixes it. A SurveyMeta from
        :func:`irseg.metadata.load_metadata` already holds the resolved value and records
        it in ``assumed`` (key :data:`REFLECTED_KEY`); the recorded reason is returned
        then, so a None reason always means "given".
    """
    given = meta.surface.reflected_c
    if given is not None:
        recorded = next((a.reason for a in meta.assumed if a.key == REFLECTED_KEY), None)
        return float(given), recorded
    side_air = camera_side_air_c(meta)
    if side_air is not None:
        side = "inside" if meta.surface.view == "interior" else "outside"
        return float(side_air), (
            f"no [surface] reflected_c: reflected temperature taken as the {side} air temperature, "
            f"{float(side_air):g} °C; measure it (reflector method) for an accurate estimate"
        )
    return DEFAULT_REFLECTED_C, (
        "no [surface] reflected_c and no air temperature on the camera's side: reflected "
        f"temperature taken as {DEFAULT_REFLECTED_C:g} °C; measure it (reflector method) for an accurate estimate"
    )
