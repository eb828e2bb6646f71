"""The cautions that travel with every product, map and report.

Wording is ours; the content is the trade's (see docs/cautions.md): a
screening result is not a site investigation, and decisions defer to licensed
professionals, official warnings and local codes.
"""

SHORT = ("Screening result only, not a site investigation or design; decisions rest with "
         "licensed geotechnical engineers or engineering geologists, official warnings "
         "and local codes.")
"""One-line caution for map footers and raster metadata."""

CAUTIONS = (
    "Screening only: this is a planning-level map of relative susceptibility made from "
    "generalised soil parameters and a DEM. It does not predict whether, where or when a "
    "particular slope will fail.",
    "Not a site investigation: it does not replace field reconnaissance, subsurface "
    "investigation, laboratory testing or a slope-stability analysis of a specific site.",
    "Defer to professionals and local codes: decisions on design, permitting, construction, "
    "land use or remediation must be made by licensed geotechnical engineers or engineering "
    "geologists under the codes and regulations that apply locally.",
    "Not for emergency decisions: do not use it to decide on evacuation, road closure or other "
    "life-safety actions; follow official warnings and the responsible authorities.",
    "Model limits: infinite-slope stability with steady or one-dimensional transient "
    "hydrology; suction, bedrock flow, spatial variability of soil and seismic loading are "
    "ignored. Results depend on DEM resolution and accuracy; depression filling can misroute "
    "flow at culverts and road fills. Parameters are estimates; a probability of failure is "
    "per cell and conditional on the assumed parameter distributions. Runout reach uses an "
    "empirical angle of reach along one steepest-descent path per source: real runout can "
    "go farther, spread wider or follow other paths; a corridor segment not reached is not "
    "shown to be safe.",
    "Inputs travel with the map: the parameter values, rain cases, conventions (vertical "
    "depth, transmissivity definition, flow width, routing method) and software version are "
    "recorded in manifest.json and the report.",
)
"""Full cautions, in the order they are shown."""


def run_cautions(scenario) -> tuple[str, ...]:
    """:data:`CAUTIONS` and the cautions that only some runs need, in the order shown.

    A run whose DEM was made after its mapped landslides (``dem_date`` later
    than ``[inventory] date``) adds that its scars are in the DEM.
    """
    extra = []
    inv = getattr(scenario, "inventory", None)
    made = getattr(scenario, "dem_date", None)
    if inv is not None and inv.date is not None and made is not None and made > inv.date:
        extra.append(
            f"DEM after the landslides: the DEM ({made.isoformat()}) was made after the mapped "
            f"landslides ({inv.date.isoformat()}), so their scars and deposits are in it; the "
            "slope, flow paths and wetness at those landslides are of the ground after failure, "
            "and the agreement with them may be over- or understated.")
    return CAUTIONS + tuple(extra)
