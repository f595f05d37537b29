"""The words irseg uses everywhere: causes, their labels and colours, stage names, views, cautions.

A leaf module: it imports nothing from irseg, so the report, the survey summary, the
overlay renderer and the command line can all share one vocabulary without loading
each other (``import irseg.report`` must not load OpenCV or the analysis).
"""

from __future__ import annotations

from types import MappingProxyType

__all__ = [
    "CAUSES",
    "CAUSE_LABELS",
    "CAUSE_COLOURS",
    "VIEWS",
    "HEAT_FLOWS",
    "STAGES",
    "CAUTIONS",
    "CAUTION_LINE",
    "REPEAT_MARK",
]

#: Probable causes of an anomaly, in the order the report lists them (an interface: CSV values).
CAUSES: tuple[str, ...] = ("missing_insulation", "thermal_bridge", "air_leakage", "moisture", "unclassified")

#: Human-readable cause names (legend, report).
CAUSE_LABELS = MappingProxyType(
    {
        "missing_insulation": "missing insulation",
        "thermal_bridge": "thermal bridge",
        "air_leakage": "air leakage",
        "moisture": "moisture",
        "unclassified": "unclassified",
    }
)

#: Outline colour (R, G, B) of each cause. Light, saturated hues, each at least 25 CIEDE2000 units
#: from every other (moisture orange and missing-insulation yellow far apart; no green, which
#: vanishes in turbo's middle). The overlay draws every outline over a black casing, so an
#: outline stays readable where the colour map passes through the same hue.
CAUSE_COLOURS = MappingProxyType(
    {
        "missing_insulation": (255, 230, 0),  # yellow
        "thermal_bridge": (0, 225, 255),  # cyan
        "air_leakage": (255, 60, 255),  # magenta
        "moisture": (140, 170, 255),  # periwinkle blue (no colour map passes near it)
        "unclassified": (255, 255, 255),  # white
    }
)

#: Which side the camera looks at: ``[surface] view``.
VIEWS: tuple[str, ...] = ("interior", "exterior", "roof")

#: Direction of heat flow through the element: ``[surface] heat_flow``.
HEAT_FLOWS: tuple[str, ...] = ("horizontal", "upward", "downward")

#: Stage names, in order, as they appear in failures.csv (``worker``: the worker process died).
STAGES: tuple[str, ...] = ("read", "metadata", "calibrate", "segment", "analyse", "render", "write", "worker")

#: Safety and estimate cautions every report carries (``summary["cautions"]`` may add more).
CAUTIONS: tuple[str, ...] = (
    "Working at height: roofs, ladders and scaffolds are dangerous, above all at night. Never go on "
    "a roof alone: work in a team of at least two, with edge protection or fall arrest in place, and "
    "make sure the deck will carry you (wet or decayed decks may not).",
    "Electrical equipment: keep a safe distance from energised panels, cables and switchgear; only a "
    "qualified person opens an electrical enclosure for imaging.",
    "Combustion appliances: before a building is depressurised with a fan for air-leakage imaging, "
    "make sure stoves, fireplaces, boilers and other open-flued appliances are off and cold; "
    "depressurisation can draw flue gases, embers and ash into the rooms.",
    "All figures are estimates. Areas, heat flows and yearly energy come from surface temperatures "
    "measured at one moment and from the stated emissivity, reflected temperature, distance, "
    "surface heat-transfer coefficient and degree-days. The low–high bands cover the stated "
    "uncertainties of those inputs only; they do not cover unsteady weather, earlier sun, wind "
    "gusts, stored heat or construction hidden from the camera.",
    "Confirm before acting: check each anomaly on site by contact or invasive means (moisture meter, "
    "contact thermometer, inspection opening or borescope) before ordering repairs or budgets.",
    "Temperature factor: f_Rsi here is computed from the temperatures measured during the survey, "
    "with the real surface resistance at that time. The design check in building codes uses "
    "R_si = 0.25 m²K/W and standard climate values, so the on-site figure differs from the design "
    "value (it is usually higher) and is an indication only.",
    "This report does not replace an assessment under local building codes and regulations, nor "
    "the judgement of licensed engineers, surveyors and contractors; defer to them and to local "
    "practice.",
    "Thermograms of occupied buildings can show people, belongings and routines; share them only "
    "with the consent of the occupants.",
)

#: The one-line caution printed after every command-line summary.
CAUTION_LINE = (
    "All figures are estimates: confirm each defect on site before repairs or budgets, follow local "
    "codes and licensed practice, and mind the safety cautions in the report."
)

#: Words a survey row's reason ends with when the anomaly was found again in the image of a pair taken
#: under a pressure difference: the ambient image of the same view counts it, so the pressurised image's
#: own anomalies are neither ranked, nor totalled, nor repair items (irseg.batch, irseg.report, irseg.repairs).
REPEAT_MARK = "counted with the same view at ambient pressure"
