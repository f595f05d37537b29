"""The thermographer's controls: zones, reviews, job and image details, visible photos.

No automatic method is right about every object in a room, and a thermographer signs the
report. This package holds what lets them correct and complete irseg's results:

- **zones** (``[[zone]]`` in ``survey.toml`` or a sidecar): ``exclude`` zones are left out of
  the analysis (neither anomaly nor sound reference, no edge), ``material`` zones get their own
  emissivity and reflected temperature (:mod:`._zones`, effects on the analysis in
  :mod:`._zone_effects`);
- **reviews** (``review.toml`` or the review setting): reject, accept or relabel single
  anomalies, applied to the survey's records without computing any image again (:mod:`._review`);
- **details** (``[survey]``, ``[image]``) and the visible photo of an image (:mod:`._details`).

The records (:class:`~irseg.types.Zone`, :class:`~irseg.types.SurveyDetails`,
:class:`~irseg.types.ImageDetails`) live in :mod:`irseg.types` with the rest of ``SurveyMeta``.
"""

from __future__ import annotations

from ..types import ImageDetails, SurveyDetails, Zone
from ._details import (
    DETAIL_SECTIONS,
    PHOTO_SUFFIXES,
    check_details,
    details_from,
    find_photo,
    photo_candidates,
    photo_files,
    photo_thumbnail,
)
from ._review import (
    REVIEW_ACTIONS,
    REVIEW_FILE,
    REVIEW_STATES,
    ReviewEntry,
    ReviewResult,
    apply_review,
    load_review,
    parse_review_text,
)
from ._zone_effects import convective_coefficient, mark_zones
from ._zones import (
    ZONE_KEYS,
    ZONE_KINDS,
    ZoneLayer,
    ZoneMask,
    check_zone_tables,
    material_maps,
    zone_layer,
    zone_to_dict,
)

__all__ = [
    "Zone",
    "SurveyDetails",
    "ImageDetails",
    "ZONE_KINDS",
    "ZONE_KEYS",
    "ZoneMask",
    "ZoneLayer",
    "check_zone_tables",
    "zone_to_dict",
    "zone_layer",
    "material_maps",
    "mark_zones",
    "convective_coefficient",
    "REVIEW_FILE",
    "REVIEW_ACTIONS",
    "REVIEW_STATES",
    "ReviewEntry",
    "ReviewResult",
    "parse_review_text",
    "load_review",
    "apply_review",
    "DETAIL_SECTIONS",
    "PHOTO_SUFFIXES",
    "check_details",
    "details_from",
    "photo_candidates",
    "find_photo",
    "photo_files",
    "photo_thumbnail",
]
