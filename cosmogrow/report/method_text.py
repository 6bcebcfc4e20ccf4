"""Fixed wording of the web report: how k is measured, the caveats, and the references.

The full statement of the method, with equations and sources, is docs/method.md; this text is its
summary for the page. The paper titles, and the journal details of the entries marked "[memory]" in
the comments, are recalled rather than read in the papers.
"""

from markupsafe import Markup

# Trusted text of this module, written with a few HTML tags for the formulae.
METHOD = tuple(Markup(text) for text in (
    "A black hole coupled to the expansion grows as M<sub>BH</sub> ∝ <var>a</var><sup><var>k</var></sup> "
    "with <var>a</var> = 1/(1+<var>z</var>) (Croker &amp; Weiner 2019). cosmogrow projects every "
    "black-hole mass to a reference epoch and fits one population relation there: "
    "log M<sub>BH</sub> = <var>α</var> + <var>β</var> (log M<sub>*</sub> − pivot) − <var>k</var> "
    "log<sub>10</sub>[(1+<var>z</var>)/(1+<var>z</var><sub>ref</sub>)] + <var>δ</var><sub>method</sub> "
    "+ <var>δ</var><sub>host type</sub>, with Gaussian intrinsic scatter <var>σ</var><sub>int</sub> and "
    "the black-hole mass error added in quadrature. Host-mass errors are treated by regression "
    "calibration unless a fit says otherwise in its facts (Carroll et al. 2006): each observed host "
    "mass is replaced by its expectation given its sample's parent host distribution, which removes "
    "the bias first-order errors in variables leave in <var>k</var> (Kelly 2007 treats them exactly). "
    "In the ratio "
    "form <var>β</var> = 1 and the statistic is log(M<sub>BH</sub>/M<sub>*</sub>), as in the study of "
    "elliptical hosts by Farrah et al. (2023).",
    "When a sample's selection is declared, the likelihood of each object is conditioned on it having "
    "been selected: a probit in the latent black-hole mass for a mass cut, an AGN flux limit or the "
    "resolution of the sphere of influence. A fit that ignores selection on black-hole mass is biased, "
    "and the bias has the sign of a growth signal when the high-redshift sample is flux-limited.",
    "The posterior is sampled with an affine-invariant ensemble sampler (emcee) started at the "
    "maximum a posteriori point and run to at least 50 integrated autocorrelation times. Significances "
    "against <var>k</var> = 0 and <var>k</var> = 3 are profile-likelihood ratios turned into Gaussian σ "
    "(Wilks 1938); the Bayes factor is the Savage–Dickey density ratio under the stated uniform prior "
    "on <var>k</var>.",
    "Calibration simulates the data's own design (sizes, redshifts, errors, selection) for a grid of "
    "injected <var>k</var> and fits every mock like the data; simulation-based calibration checks the "
    "whole posterior (Talts et al. 2018). The dark-energy budget integrates black-hole formation over "
    "the cosmic star-formation history (Madau &amp; Dickinson 2014) with coupled growth after formation.",
))

CAVEATS = (
    "Every significance assumes the model is right: Gaussian scatter about one relation, the declared "
    "selection and the mass-method offsets. Non-Gaussian tails, outliers or an undeclared selection "
    "move k more than its quoted interval suggests; compare with the distribution-matching "
    "cross-check and the calibration before quoting a number.",
    "When all high-redshift masses come from one method and all local masses from another, k is "
    "degenerate with that method's offset: the interval of k then reflects the offset prior, not the "
    "data (see the table of σ(k) against the offset prior width).",
    "Host galaxies grow too. Only k − β γ is identified by masses alone; a fixed host growth γ moves k "
    "one for one (in the ratio form).",
    "A selection that is declared but approximate (a soft threshold, an Eddington-ratio distribution, "
    "an M–σ relation) carries its own systematic error, which the posterior does not include. Virial "
    "masses use the same luminosity that selects the sample, so their errors correlate with selection.",
    "Calibration is only as good as the simulated design: it tests the pipeline under the model, not "
    "the model itself.",
    "The budget counts only stellar-remnant black holes formed from the cosmic star-formation history; "
    "its answer scales with ε_BH, uncertain by factors of a few, and ignores the back-reaction on the "
    "expansion.",
)

# (authors and year, title or subject, journal reference)
REFERENCES = (
    ("Croker, K. S. & Weiner, J. L. 2019", "Implications of symmetry and pressure in Friedmann "
     "cosmology. I. Formalism; cosmologically coupled growth M ∝ a^k", "ApJ 882, 19"),
    ("Farrah, D. et al. 2023", "Observational evidence for cosmological coupling of black holes and "
     "its implications for an astrophysical source of dark energy; k = 3.11 +1.19/−1.33 (90 %)",
     "ApJL 944, L31"),
    ("Kelly, B. C. 2007", "Some aspects of measurement error in linear regression of astronomical data",
     "ApJ 665, 1489"),
    ("Carroll, R. J., Ruppert, D., Stefanski, L. A. & Crainiceanu, C. M. 2006",
     "Measurement error in nonlinear models, 2nd ed., ch. 4: regression calibration of host masses",
     "Chapman & Hall/CRC"),  # [memory]
    ("Reines, A. E. & Volonteri, M. 2015", "Relations between central black holes and stellar mass in "
     "low-redshift galaxies: AGN hosts lie below quiescent early types (host-type offsets)",
     "ApJ 813, 82"),
    ("Cowan, G., Cranmer, K., Gross, E. & Vitells, O. 2011", "Asymptotic formulae for likelihood-based "
     "tests of new physics: offsets entered as constraint terms", "EPJC 71, 1554"),  # [memory]
    ("Talts, S., Betancourt, M., Simpson, D., Vehtari, A. & Gelman, A. 2018",
     "Validating Bayesian inference algorithms with simulation-based calibration", "arXiv:1804.06788"),
    ("Madau, P. & Dickinson, M. 2014", "Cosmic star-formation history (Eq. 15 is the default "
     "star-formation-rate density)", "ARA&A 52, 415"),
    ("Planck Collaboration 2020", "Planck 2018 results. VI. Cosmological parameters (astropy's Planck18)",
     "A&A 641, A6"),
    ("Foreman-Mackey, D., Hogg, D. W., Lang, D. & Goodman, J. 2013", "emcee: the MCMC hammer",
     "PASP 125, 306"),  # [memory]
    ("Wilks, S. S. 1938", "The large-sample distribution of the likelihood ratio for testing composite "
     "hypotheses", "Ann. Math. Statist. 9, 60"),  # [memory]
    ("Kormendy, J. & Ho, L. C. 2013", "Coevolution (or not) of supermassive black holes and host "
     "galaxies; the M–σ relation of the sphere-of-influence selection", "ARA&A 51, 511"),
    ("Shankar, F. et al. 2016", "Selection bias in dynamically measured supermassive black hole samples",
     "MNRAS 460, 3119"),
    ("Lauer, T. R. et al. 2007", "Selection bias in observing the cosmological evolution of the "
     "M•–σ and M•–L relationships", "ApJ 670, 249"),
    ("Baldry, I. K. et al. 2012", "Galaxy and Mass Assembly: the galaxy stellar mass function "
     "(the simulator's host masses)", "MNRAS 421, 621"),
    ("Salpeter, E. E. 1955; Kroupa, P. 2001", "The initial mass functions of the budget",
     "ApJ 121, 161; MNRAS 322, 231"),
    ("Rezzolla, L., Most, E. R. & Weih, L. R. 2018", "Maximum mass of a non-rotating neutron star, "
     "2.16 +0.17/−0.15 M☉ (the remnant test's limit)", "ApJL 852, L25"),  # [memory]
    ("Hogg, D. W. 1999", "Distance measures in cosmology", "astro-ph/9905116"),
)
