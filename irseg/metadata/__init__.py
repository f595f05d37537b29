"""Survey metadata: ``survey.toml`` folder defaults, ``<stem>.toml`` sidecars, overrides.

Layers are applied key by key in this order: the folder's ``survey.toml``, the image's
sidecar ``<stem>.toml``, then ``overrides`` (source name "command line"). Every key is
checked for type and range where it is read, so a message names the file, the key, the
value and the fix, e.g.
``survey.toml: [surface] emissivity = 1.7 is outside (0, 1]; use the material's long-wave emissivity``.

Defaults are resolved once, here: the reflected temperature (given, else the air on the
camera's side, else 20 °C), and the emissivity and view when no layer gave them. Each
assumed value is recorded in ``SurveyMeta.assumed`` and announced with a
:class:`~irseg.errors.MetadataWarning`. Missing geometry is not an error here; the
analysis warns about what it cannot compute.

Every number has an accepted range, what a building survey can have, with its reason
(:data:`BOUNDS`, listed in ``docs/guide.md``). Across the images of one folder,
:func:`survey_condition_warnings` reports air temperatures that contradict each other.

Modules: ``_bounds`` (ranges and their reasons), ``_checks`` (value checks), ``_schema``
(sections, keys, renamed keys, validation), ``_assume`` (defaults resolved and recorded),
``_load`` (parse, merge, load, JSON round trip), ``_survey`` (checks across images), ``_pressure``
(the ``[pressure]`` section of a pair, whose problems fail the pair only).
"""

from __future__ import annotations

from ..io import SURVEY_FILE
from ._bounds import BAND_LIMITS_UM, BOUNDS, MIN_AIR_DIFFERENCE_K, SURFACE_C, SURFACE_REASON, Bound
from ._load import (
    check_overrides,
    load_metadata,
    merge_metadata,
    meta_from_dict,
    meta_to_dict,
    parse_metadata_text,
)
from ._details import DETAIL_SECTIONS, check_details, details_from
from ._survey import survey_condition_warnings
from ._pressure import PRESSURE_BOUNDS, PRESSURE_KEYS, check_pressure, pressure_reference, pressure_to_dict
from ._zones import ZONE_KEYS, ZONE_KINDS, check_zone_tables, zone_to_dict

__all__ = [
    "load_metadata",
    "parse_metadata_text",
    "check_overrides",
    "merge_metadata",
    "meta_to_dict",
    "meta_from_dict",
    "SURVEY_FILE",
    "survey_condition_warnings",
    "check_pressure",
    "pressure_reference",
    "pressure_to_dict",
    "PRESSURE_BOUNDS",
    "PRESSURE_KEYS",
    "BOUNDS",
    "Bound",
    "BAND_LIMITS_UM",
    "SURFACE_C",
    "SURFACE_REASON",
    "MIN_AIR_DIFFERENCE_K",
    "DETAIL_SECTIONS",
    "check_details",
    "details_from",
    "ZONE_KEYS",
    "ZONE_KINDS",
    "check_zone_tables",
    "zone_to_dict",
]
