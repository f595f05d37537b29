"""Plain frozen data passed between the stages of irseg.

Data flows one way::

    read_thermogram -> RawFrame
    load_metadata   -> SurveyMeta (every default resolved once, assumptions recorded)
    calibrate(RawFrame, SurveyMeta) -> ThermalFrame
    segment(ThermalFrame.temperature_c, mask=ThermalFrame.mask) -> Segmentation
    analyse(ThermalFrame, Segmentation, SurveyMeta) -> Analysis
    render / write (irseg.render, irseg.io, irseg.report, irseg.batch)

A frame is data only (temperatures, mask, counts, warnings); the settings travel
explicitly as the SurveyMeta argument of each stage.

Arrays are ``(M, N)``: rows, columns. Every temperature array passed between
stages is in degrees Celsius (float32 or float64). Fields documented here are an
interface: later code may add fields; a rename or removal is announced in the
changelog (old TOML key names keep working with a warning).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

__all__ = [
    "Camera",
    "Surface",
    "Air",
    "AnalysisSettings",
    "SegmentSettings",
    "Assumption",
    "SurveyDetails",
    "ImageDetails",
    "Costs",
    "Zone",
    "Pressure",
    "SurveyMeta",
    "RawFrame",
    "ThermalFrame",
]


# --------------------------------------------------------------------------- metadata
# These mirror the TOML schema of survey.toml / <stem>.toml, section by section.


@dataclass(frozen=True)
class Camera:
    """``[camera]``: geometry and encoding of the shot.

    Attributes
    ----------
    hfov_deg : float or None
        Horizontal field of view, degrees.
    distance_m : float or None
        Camera to surface distance, metres.
    pixel_m : float or None
        One pixel's side on the surface, metres (instead of hfov_deg + distance_m).
    tilt_deg : float
        Angle between line of sight and surface normal, degrees, in [0, 80].
    units : str
        ``"celsius"`` or ``"kelvin"``: units of the stored values after scale/offset.
    scale, offset : float
        Integer images: value = raw * scale + offset (in ``units``).
    band_um : tuple of float
        Camera spectral band (low, high), micrometres.
    netd_k : float
        Noise-equivalent temperature difference, K (used for confidence bands).
    export_emissivity : float
        Emissivity the exported temperatures already apply (1.0 = apparent temperature).
    export_reflected_c : float or None
        Reflected temperature the export already applies (ignored when export_emissivity is 1).
    transmittance : float
        Atmospheric transmittance of the path, (0, 1].
    atmosphere_c : float or None
        Air temperature along the path (None: use air.outside_c for exterior/roof, inside_c for interior).
    """

    hfov_deg: float | None = None
    distance_m: float | None = None
    pixel_m: float | None = None
    tilt_deg: float = 0.0
    units: str = "celsius"
    scale: float = 1.0
    offset: float = 0.0
    band_um: tuple[float, float] = (7.5, 14.0)
    netd_k: float = 0.05
    export_emissivity: float = 1.0
    export_reflected_c: float | None = None
    transmittance: float = 1.0
    atmosphere_c: float | None = None


@dataclass(frozen=True)
class Surface:
    """``[surface]``: the imaged surface.

    Attributes
    ----------
    emissivity : float
        Long-wave emissivity, (0, 1].
    reflected_c : float or None
        Reflected apparent temperature, °C. Never None in a SurveyMeta from
        :func:`irseg.metadata.load_metadata`: when not given it is resolved there
        (:func:`irseg._defaults.resolve_reflected_c`) and recorded in ``SurveyMeta.assumed``.
        None only in hand-built objects, meaning "not known".
    view : str
        ``"interior"``, ``"exterior"`` or ``"roof"``.
    heat_flow : str or None
        ``"horizontal"`` (walls), ``"upward"`` (ceilings, roofs) or ``"downward"`` (floors);
        None: horizontal for interior/exterior, upward for roof.
    emissivity_uncertainty_abs : float
        ± absolute uncertainty of the emissivity, for confidence bands.
    """

    emissivity: float = 0.93
    reflected_c: float | None = None
    view: str = "interior"
    heat_flow: str | None = None
    emissivity_uncertainty_abs: float = 0.02


@dataclass(frozen=True)
class Air:
    """``[air]``: conditions at survey time. None where not known.

    Attributes
    ----------
    inside_c, outside_c : float or None
        Inside and outside air temperature, °C.
    wind_m_s : float or None
        Wind speed at the surface, m/s.
    """

    inside_c: float | None = None
    outside_c: float | None = None
    wind_m_s: float | None = None


@dataclass(frozen=True)
class AnalysisSettings:
    """``[analysis]``: how anomalies are judged and measured.

    Attributes
    ----------
    degree_days : float
        Heating degree-days, K·d per year (3000: common practice for a temperate climate).
    frsi_limit : float
        Mould-risk limit of the temperature factor (0.70 DIN 4108-2; 0.75 UK practice).
    distance_uncertainty_rel : float
        Relative uncertainty of the distance (0.05 = ±5 %).
    h_uncertainty_rel : float
        Relative uncertainty of the surface heat-transfer coefficient (0.20 = ±20 %).
    max_wind_m_s : float
        Wind above this raises a conditions warning (ASTM C1060: 6.7 m/s).
    min_delta_t_k : float
        Inside-outside difference below this raises a conditions warning (EN 13187: 10 K).
    min_contrast_k : float or None
        Smallest |delta_k| kept as an anomaly (None: derived from the noise).
    seed : int
        Seed of the Monte Carlo confidence bands.
    """

    degree_days: float = 3000.0
    frsi_limit: float = 0.70
    distance_uncertainty_rel: float = 0.05
    h_uncertainty_rel: float = 0.20
    max_wind_m_s: float = 6.7
    min_delta_t_k: float = 10.0
    min_contrast_k: float | None = None
    seed: int = 0


@dataclass(frozen=True)
class SegmentSettings:
    """``[segment]``: thermographer-facing knobs of the Ambrosio–Tortorelli solver.

    Attributes
    ----------
    noise_k : float or None
        Noise level, K (None: estimated robustly from the image).
    min_step_k : float
        Smallest temperature step that should make an edge, K.
    min_feature_px : float
        Smallest feature worth separating, pixels.
    """

    noise_k: float | None = None
    min_step_k: float = 0.5
    min_feature_px: float = 4.0


@dataclass(frozen=True)
class Assumption:
    """A value the metadata stage assumed because no metadata file or override gave it.

    Attributes
    ----------
    key : str
        ``"section.key"``, e.g. ``"surface.reflected_c"``.
    value : Any
        The value assumed (and in force in the SurveyMeta).
    reason : str
        Where it came from, e.g. ``"the inside air"`` or ``"the default"``.
    """

    key: str
    value: Any
    reason: str


@dataclass(frozen=True)
class SurveyDetails:
    """``[survey]`` (``survey.toml`` only): the job, as free text shown on the report's first page.

    Every attribute is optional free text (None when not given): ``site``, ``client``,
    ``reference``, ``date``, ``inspector``, ``camera``, ``weather``, ``purpose``, ``notes``.
    """

    site: str | None = None
    client: str | None = None
    reference: str | None = None
    date: str | None = None
    inspector: str | None = None
    camera: str | None = None
    weather: str | None = None
    purpose: str | None = None
    notes: str | None = None


@dataclass(frozen=True)
class ImageDetails:
    """``[image]`` (a sidecar ``<stem>.toml`` only): what one image shows, as free text.

    Attributes
    ----------
    title, element, time, notes : str or None
        Shown on the image's section of the report; ``title`` and ``element`` are also
        columns of ``anomalies.csv``.
    photo : str or None
        A visible-light photo of the same view (JPEG or PNG), relative to the image's folder;
        when not given, ``<stem>_photo.jpg`` / ``.jpeg`` / ``.png`` beside the image is used.
    """

    title: str | None = None
    element: str | None = None
    time: str | None = None
    photo: str | None = None
    notes: str | None = None


@dataclass(frozen=True)
class Costs:
    """``[costs]`` (``survey.toml`` only): the user's own prices for the repair plan (irseg ships none).

    Every price is None when not given; a survey without prices gets quantities only
    (:mod:`irseg.repairs`).

    Attributes
    ----------
    currency : str or None
        Free text, shown as given (``"EUR"``).
    energy_price_per_kwh : float or None
        Price of one kWh of heating energy, in ``currency``.
    missing_insulation_per_m2, moisture_per_m2 : float or None
        Unit costs of a repair per m² (quantity with the working margin).
    thermal_bridge_per_m : float or None
        Unit cost of a thermal-bridge repair per metre of its length.
    air_leakage_per_item : float or None
        Unit cost of sealing one leak.
    uncertainty : float
        Relative band on the unit costs (0.25: costs from 0.75 to 1.25 times the estimate).
    """

    currency: str | None = None
    energy_price_per_kwh: float | None = None
    missing_insulation_per_m2: float | None = None
    moisture_per_m2: float | None = None
    thermal_bridge_per_m: float | None = None
    air_leakage_per_item: float | None = None
    uncertainty: float = 0.25


@dataclass(frozen=True)
class Zone:
    """One ``[[zone]]`` table: an area of the image the thermographer marks.

    Attributes
    ----------
    label : str
        Free text, shown on the overlay and in the report.
    kind : {"exclude", "material"}
        ``exclude``: the pixels are neither anomaly nor sound reference and carry no edge.
        ``material``: the zone's emissivity (and reflected temperature) replace ``[surface]``'s there.
    box : (int, int, int, int) or None
        ``(row0, col0, row1, col1)`` in pixels, row1/col1 exclusive (like the CSV's bbox columns).
    polygon : tuple of (float, float) or None
        ``(row, col)`` vertices, instead of ``box``.
    emissivity : float or None
        ``material`` zones: long-wave emissivity in (0, 1] (None: ``[surface] emissivity``).
    reflected_c : float or None
        ``material`` zones: reflected temperature, °C (None: ``[surface] reflected_c``).
    source : str
        The metadata file that gave the zone (named in messages; not compared).
    """

    label: str
    kind: str
    box: tuple[int, int, int, int] | None = None
    polygon: tuple[tuple[float, float], ...] | None = None
    emissivity: float | None = None
    reflected_c: float | None = None
    source: str = field(default="", compare=False)


@dataclass(frozen=True)
class Pressure:
    """``[pressure]`` of a pressurised image's sidecar: the pair it forms (irseg.pairs).

    Attributes
    ----------
    reference : str or None
        Stem of the same view at ambient pressure, in the same folder.
    difference_pa : float or None
        Pressure difference during this image, Pa (inside lower than outside), 1-100.
    minutes : float or None
        Time at that difference when the image was taken, minutes (>= 0; optional).
    problem : str or None
        What is wrong with the section (file, key, value and fix), None when it is usable. A
        problem fails the pair only: the image keeps its single-image results.
    """

    reference: str | None = None
    difference_pa: float | None = None
    minutes: float | None = None
    problem: str | None = None


@dataclass(frozen=True)
class SurveyMeta:
    """All metadata in force for one image, after folder defaults, sidecar and overrides.

    Attributes
    ----------
    camera, surface, air, analysis, segment
        One object per TOML section.
    sources : tuple of str
        The metadata files that were read, in the order applied (folder first).
    assumed : tuple of Assumption
        The values no metadata layer gave and the metadata stage assumed, in this order:
        view, emissivity, reflected temperature; empty when all were given.
    survey : SurveyDetails
        ``[survey]`` of the folder's ``survey.toml`` (free text; empty when not given).
    image : ImageDetails
        ``[image]`` of the image's sidecar (free text; empty when not given).
    zones : tuple of Zone
        ``[[zone]]`` tables: the folder's first, then the sidecar's (a sidecar's zones add to
        the folder's).
    costs : Costs
        ``[costs]`` of the folder's ``survey.toml`` (no prices when not given).
    pressure : Pressure or None
        ``[pressure]`` of a pressurised image's sidecar (None for any other image).
    """

    camera: Camera = field(default_factory=Camera)
    surface: Surface = field(default_factory=Surface)
    air: Air = field(default_factory=Air)
    analysis: AnalysisSettings = field(default_factory=AnalysisSettings)
    segment: SegmentSettings = field(default_factory=SegmentSettings)
    sources: tuple[str, ...] = ()
    assumed: tuple[Assumption, ...] = ()
    survey: SurveyDetails = field(default_factory=SurveyDetails)
    image: ImageDetails = field(default_factory=ImageDetails)
    zones: tuple[Zone, ...] = ()
    costs: Costs = field(default_factory=Costs)
    pressure: Pressure | None = None


# --------------------------------------------------------------------------- frames


@dataclass(frozen=True)
class RawFrame:
    """An image as stored in its file, before any correction.

    Attributes
    ----------
    path : str
        The input file.
    data : (M, N) ndarray
        The stored values, dtype as stored (integer or float), never rescaled.
    format : str
        Name of the reader that decoded it (``"tiff"``, ``"png"``, ``"csv"``, ``"npy"``).
    metadata : dict
        The format's own tags, untouched (free form).
    """

    path: str
    data: np.ndarray
    format: str
    metadata: dict[str, Any] = field(default_factory=dict)


@dataclass(frozen=True)
class ThermalFrame:
    """A corrected thermogram: surface temperature in °C plus its validity mask.

    Attributes
    ----------
    path : str
        The input file.
    temperature_c : (M, N) float32 or float64 ndarray
        Object (surface) temperature, °C, after emissivity/reflected correction
        (:func:`irseg.radiometry.calibrate` gives float32: micro-kelvin steps, half the
        memory). Masked pixels hold a finite fill value (local median), never NaN.
    mask : (M, N) bool ndarray
        True where the pixel is invalid (NaN, dead/hot pixel, saturated).
    n_dead : int
        Isolated dead/hot pixels detected and masked.
    n_nan : int
        Non-finite pixels masked.
    warnings : tuple of str
        Human-readable warnings raised while reading and correcting.
    """

    path: str
    temperature_c: np.ndarray
    mask: np.ndarray
    n_dead: int = 0
    n_nan: int = 0
    warnings: tuple[str, ...] = ()
