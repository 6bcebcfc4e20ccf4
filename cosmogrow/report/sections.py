"""The kinds of results the web report knows, in page order: one `SectionKind` per kind.

A kind names the file that marks its folder, its words and colour on the page, the function that
turns its results file into the data of its template (templates/sections/<kind>.html.j2), the
function listing its warnings, an optional one-line glance for the headline, and its figures.
"""

from dataclasses import dataclass
from typing import Callable

from . import budget_section, calibration_section, checks_section, fit_section
from .style import PALETTE

TEAL, OCHRE, PLUM, SLATE, BRICK, OLIVE = PALETTE


@dataclass(frozen=True)
class SectionKind:
    """One kind of results section.

    Attributes
    ----------
    kind : str, key and template name (templates/sections/<kind>.html.j2)
    marker : str, the JSON file that marks a folder of this kind (fit and campaign share summary.json)
    name : str, the kind in words ("null tests")
    title : str, the section's heading
    colour : str, CSS colour of the section's accent
    context : callable(document, folder) -> dict, the data of the section's template
    warnings : callable(document) -> list of str
    glance : callable(document) -> str, or None; one line in the headline
    figures : tuple of (file name, caption, full width), the section's own PNGs in order
    """

    kind: str
    marker: str
    name: str
    title: str
    colour: str
    context: Callable
    warnings: Callable
    glance: Callable | None = None
    figures: tuple = ()


SECTIONS = (
    SectionKind("fit", "summary.json", "fit", "Posterior of k", TEAL, fit_section.fit_context,
                fit_section.fit_warnings, None, (
                    ("corner.png", "Posterior of every parameter; lines mark the 16th, 50th and 84th "
                                   "percentiles.", True),
                    ("relation.png", "Black-hole against host stellar mass by sample, with the fitted "
                                     "relation drawn at each sample's median redshift.", False),
                    ("offsets.png", "Offsets of the black-hole masses from the reference-epoch relation "
                                    "against redshift, with the posterior curve −k log₁₀(1+z).", False),
                    ("crosscheck.png", "Distribution-matching cross-check: p-value of each two-sample "
                                       "test against k, with the posterior of k for comparison.", True))),
    SectionKind("campaign", "summary.json", "calibration campaign", "Calibration by injection and recovery",
                PLUM, calibration_section.campaign_context, calibration_section.campaign_warnings,
                calibration_section.campaign_glance, (
                    ("recovery.png", "Recovered against injected k; the dashed line is an unbiased "
                                     "estimator.", False),
                    ("coverage.png", "Coverage of the 68 % and 95 % intervals against injected k, with "
                                     "binomial 3σ bands around the nominal level.", False),
                    ("sbc_ranks.png", "Simulation-based calibration: ranks of the true k among the "
                                      "posterior draws, flat for a calibrated posterior.", False))),
    SectionKind("nulltests", "nulltests.json", "null tests", "Null tests", OLIVE,
                checks_section.nulltests_context, checks_section.nulltests_warnings,
                checks_section.nulltests_glance, (
                    ("nulltests.png", "Null tests: the data's statistic against its distribution under "
                                      "each null hypothesis.", True),)),
    SectionKind("challenge", "challenge.json", "challenge", "Does a claimed k survive the selection?", BRICK,
                checks_section.challenge_context, checks_section.challenge_warnings,
                checks_section.challenge_glance, (
                    ("challenge.png", "The observed k among mocks simulated under the claimed k and under "
                                      "k = 0, fitted plainly and with the selection modelled.", True),)),
    SectionKind("budget", "budget.json", "budget", "Dark-energy budget of coupled black holes", OCHRE,
                budget_section.budget_context, budget_section.budget_warnings,
                budget_section.budget_glance, (
                    ("budget.png", "Density of the coupled black-hole population against redshift, "
                                   "compared with dark energy, and its effective equation of state.", True),)),
    SectionKind("remnants", "remnants.json", "remnants", "Stellar-remnant test", SLATE,
                budget_section.remnants_context, budget_section.remnants_warnings,
                budget_section.remnants_glance, (
                    ("remnants.png", "Birth masses of the stellar-mass black holes against the "
                                     "neutron-star limit.", True),)),
)
BY_KIND = {section.kind: section for section in SECTIONS}
KIND_ORDER = tuple(BY_KIND)
