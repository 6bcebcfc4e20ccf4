"""`cosmogrow budget`: the dark-energy budget of coupled stellar-remnant black holes."""

import numpy as np

from ... import background, outputs, validate
from ...consequences import budget, imf, sfr
from ...errors import ConfigError
from ._common import add_force_option, claim_out, read_k_samples

#: k beyond this is outside the fit's default prior, and (a/a_f)^k overflows the formation integral.
K_LIMIT = 10.0
#: Omega_BH above this many times Omega_Lambda: the k is excluded by the expansion history itself.
EXCESS_FACTOR = 100.0
EXIT_NON_PHYSICAL = 3

ASSUMPTIONS = (
    "Every stellar-remnant black hole is assumed to couple, growing as a^k from its formation on; "
    "supermassive black holes are not counted.",
    "Mergers, accretion and ejection are ignored: each black hole's mass changes only by coupling.",
    "The black-hole mass per unit stellar mass formed (eps_BH) sets the result linearly; its inputs "
    "(IMF, minimum progenitor mass, remnant fraction) are uncertain by factors of a few and dominate "
    "the error budget.",
    "The Madau & Dickinson 2014 star-formation history is for a Salpeter IMF (0.1-100 Msun); it is "
    "not rescaled when another IMF is chosen, and a user table should use the same IMF as --imf.",
    "No black holes form before z_max or after z_floor; the star-formation history is extrapolated "
    "beyond the redshifts where it is measured (z <~ 8).",
    "Omega_BH is compared with Omega_Lambda of the chosen cosmology, which is held fixed: the "
    "black holes' back-reaction on the expansion is not modelled.",
)


def register(subparsers):
    parser = subparsers.add_parser(
        "budget", help="density today of coupled stellar-remnant black holes against dark energy",
        description="Integrate black-hole formation from the cosmic star-formation history with "
                    "coupled growth (a/a_f)^k and compare Omega_BH today with Omega_Lambda.")
    source = parser.add_mutually_exclusive_group(required=True)
    source.add_argument("--k", type=float, help="coupling exponent")
    source.add_argument("--posterior", metavar="FIT_DIR",
                        help="output directory of `cosmogrow fit` (reads samples.npz, array k)")
    parser.add_argument("--z-max", type=float, default=budget.DEFAULT_Z_MAX,
                        help="redshift at which black-hole formation starts (default %(default)g)")
    parser.add_argument("--z-floor", type=float, default=0.0,
                        help="no black holes form after this redshift (default %(default)g: until today)")
    parser.add_argument("--imf", choices=sorted(imf.IMFS), default=None,
                        help="initial mass function (default salpeter, the IMF of Madau & Dickinson 2014)")
    parser.add_argument("--min-progenitor", type=float, default=None,
                        help=f"least initial mass of a black-hole progenitor, Msun "
                             f"(default {imf.DEFAULT_MIN_PROGENITOR:g})")
    parser.add_argument("--remnant-fraction", type=float, default=None,
                        help=f"black-hole mass per unit progenitor mass (default {imf.DEFAULT_REMNANT_FRACTION:g})")
    parser.add_argument("--eps-bh", type=float, default=None,
                        help="black-hole mass per unit stellar mass formed, given directly (skips the IMF)")
    parser.add_argument("--sfr-table", metavar="FILE",
                        help="CSV with columns z, psi (Msun/yr/Mpc^3, comoving) instead of Madau & Dickinson 2014")
    parser.add_argument("--cosmology", default=None, help="astropy realisation name (default Planck18)")
    parser.add_argument("--out", required=True, metavar="DIR", help="output directory")
    add_force_option(parser)
    parser.set_defaults(run=run)


def _check_options(args):
    """Every numeric option finite and in its physical range, before any work."""
    if args.k is not None:
        validate.number(args.k, "--k", low=-K_LIMIT, high=K_LIMIT)
    if args.eps_bh is not None:  # black-hole mass per stellar mass formed cannot exceed the stars
        validate.number(args.eps_bh, "--eps-bh", low=0, low_open=True, high=1)
    if args.remnant_fraction is not None:
        validate.number(args.remnant_fraction, "--remnant-fraction", low=0, low_open=True, high=1)
    if args.min_progenitor is not None:
        validate.number(args.min_progenitor, "--min-progenitor", low=0, low_open=True, unit="Msun")
    validate.number(args.z_max, "--z-max", low=0, low_open=True, high=100)
    validate.number(args.z_floor, "--z-floor", low=0)
    if not args.z_floor < args.z_max:
        raise ConfigError(f"--z-floor: expected below --z-max ({args.z_max:g}), got {args.z_floor:g}")


def _eps_bh(args):
    """eps_BH and how it was obtained."""
    imf_options = (args.imf, args.min_progenitor, args.remnant_fraction)
    if args.eps_bh is not None:
        if any(option is not None for option in imf_options):
            raise ConfigError("--eps-bh: give eps_BH directly or the IMF options "
                              "(--imf, --min-progenitor, --remnant-fraction), not both")
        return args.eps_bh, {"given_directly": True}
    chosen = imf.get_imf(args.imf or "salpeter")
    m_min = imf.DEFAULT_MIN_PROGENITOR if args.min_progenitor is None else args.min_progenitor
    fraction = imf.DEFAULT_REMNANT_FRACTION if args.remnant_fraction is None else args.remnant_fraction
    value = imf.eps_bh(chosen, m_min, fraction)
    return value, {"given_directly": False, "imf": chosen.describe(), "min_progenitor_msun": m_min,
                   "mass_fraction_above_min_progenitor": chosen.mass_fraction_above(m_min),
                   "remnant_fraction": fraction,
                   "remnant_fraction_source": "default, common practice (order of magnitude)"
                   if args.remnant_fraction is None else "user",
                   "black_holes_per_msun_formed": chosen.number_per_mass(m_min)}


def _distribution(result, samples):
    """Point values (posterior medians) plus summaries of every quantity over the chain."""
    point, summaries = {}, {}
    for name in ("rho_bh_comoving_today", "omega_bh", "fraction_of_lambda"):
        if samples is None:
            point[name] = float(result[name])
        else:
            summaries[name + "_summary"] = budget.summarise_samples(result[name])
            point[name] = summaries[name + "_summary"]["median"]
    return point, summaries


def run(args):
    _check_options(args)
    with validate.in_file("--cosmology"):
        cosmo = background.get_cosmology(args.cosmology)
    samples = read_k_samples(args.posterior) if args.posterior else None
    if samples is not None and np.any(np.abs(samples) > K_LIMIT):
        raise ConfigError(f"--posterior {args.posterior}: samples of k reach {np.max(np.abs(samples)):.3g}; "
                          f"expected |k| <= {K_LIMIT:g}")
    claim_out(args, "budget")
    k = samples if samples is not None else args.k
    star_formation = sfr.get_sfr(args.sfr_table)
    eps, eps_details = _eps_bh(args)
    history = budget.formation_history(cosmo, star_formation, eps_bh=eps, z_max=args.z_max,
                                       z_floor=args.z_floor)
    result = budget.evaluate_budget(history, k, cosmo)
    curve = budget.budget_curve(history, k, cosmo)
    point, summaries = _distribution(result, samples)
    if not all(np.isfinite(point[name]) for name in point):
        raise ConfigError(f"budget: Omega_BH is not finite for these inputs ({point['omega_bh']}); "
                          "nothing written")
    k_summary = budget.summarise_samples(samples) if samples is not None else None
    report = {
        "command": "budget",
        "omega_bh": point["omega_bh"],
        "omega_lambda": result["omega_lambda"],
        "fraction_of_lambda": point["fraction_of_lambda"],
        "rho_bh_comoving_today": point["rho_bh_comoving_today"],
        "rho_crit0": result["rho_crit0"],
        "eps_bh": eps,
        "k": k_summary["median"] if samples is not None else float(k),
        "point_values_are": "posterior medians" if samples is not None else "values at --k",
        **({"k_summary": k_summary} if k_summary else {}),
        **summaries,
        "units": {"rho_bh_comoving_today": "Msun Mpc^-3 (comoving)", "rho_crit0": "Msun Mpc^-3",
                  "eps_bh": "Msun of black holes per Msun of stars formed",
                  "budget_curve.csv densities": "Msun Mpc^-3 (physical)"},
        "eps_bh_details": eps_details,
        "inputs": {"k": None if samples is not None else float(k),
                   "posterior": str(args.posterior) if args.posterior else None,
                   "z_max": args.z_max, "z_floor": args.z_floor,
                   "star_formation": sfr.describe_sfr(star_formation),
                   "cosmology": background.describe(cosmo), "n_grid": len(history.x)},
        "definitions": {
            "rho_bh_comoving": "∫ eps_BH psi(t_f) (a/a_f)^k dt_f over formation from z_max to "
                               "max(z, z_floor), dt = dz / ((1+z) H(z))",
            "omega_bh": "rho_bh_comoving(z=0) / rho_crit,0",
            "fraction_of_lambda": "omega_bh / omega_lambda",
            "w_eff": "-1 - (1/3) dln rho_phys / dln a = -k/3 - (formation per ln a) / (3 rho_bh_comoving)",
        },
        "assumptions": list(ASSUMPTIONS),
        "warnings": _warnings(point),
        "files": {"budget_curve.csv": "z, densities (Msun Mpc^-3) and w_eff of the population, "
                                      "with dark energy; *_p16/_p84 over the posterior of k",
                  "budget.png": "physical density and w_eff against redshift"},
        "versions": outputs.package_versions(),
    }
    from ...report.budget_figures import plot_budget

    with outputs.staged_directory(args.out) as tmp:
        outputs.write_json(tmp / "budget.json", report)
        _write_curve(tmp / "budget_curve.csv", curve)
        plot_budget(curve, tmp / "budget.png", title=_title(report, samples is not None))
    print(f"cosmogrow budget: Omega_BH = {report['omega_bh']:.4g} "
          f"({100 * report['fraction_of_lambda']:.3g} % of Omega_Lambda = {report['omega_lambda']:.4g}); "
          f"eps_BH = {eps:.4g}; wrote {args.out}")
    for warning in report["warnings"]:
        print(f"cosmogrow budget: warning: {warning}")
    return EXIT_NON_PHYSICAL if report["warnings"] else 0


def _warnings(point):
    """Non-physical outcomes, said plainly (the command then exits with code 3)."""
    if point["fraction_of_lambda"] > EXCESS_FACTOR:
        return [f"Omega_BH is {point['fraction_of_lambda']:.3g} times Omega_Lambda: a population this "
                "dense would dominate the expansion history, which the fixed background cosmology "
                "does not allow; this k (with this eps_BH) is excluded by the expansion itself, not "
                "measured"]
    return []


def _title(report, is_posterior):
    k_text = f"median k = {report['k']:.3g}" if is_posterior else f"k = {report['k']:.3g}"
    return f"{k_text}, eps_BH = {report['eps_bh']:.3g}: Omega_BH = {report['omega_bh']:.3g}"


def _write_curve(path, curve):
    import pandas as pd

    pd.DataFrame({name: np.asarray(values) for name, values in curve.items()}).to_csv(
        path, index=False, float_format="%.8g")
