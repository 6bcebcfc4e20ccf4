"""`cosmogrow remnants`: are stellar-mass black holes born above the neutron-star limit for this k?"""

import numpy as np

from ... import background, outputs, validate
from ...consequences import remnants
from ...consequences.budget import summarise_samples
from ...errors import ConfigError
from ._common import add_force_option, claim_out, positive, read_k_samples

#: As for the budget: beyond the fit's default prior on k.
K_LIMIT = 10.0

ASSUMPTIONS = (
    "Each black hole grew only by coupling, M ∝ a^k, from its formation epoch to its observation; "
    "accretion from a companion and mergers are ignored (both would make the birth mass smaller still).",
    "Mass errors are Gaussian in mass and independent between objects; the present true mass has a "
    "Gaussian distribution centred on the measured mass (flat prior).",
    "The formation epoch is taken as exact; a system age is converted with the chosen cosmology.",
    "The limit is the approximate maximum mass of a non-rotating neutron star (Rezzolla et al. 2018: "
    "2.16 +0.17/-0.15 Msun); a remnant born below it would not be a black hole.",
)


def register(subparsers):
    parser = subparsers.add_parser(
        "remnants", help="birth masses of stellar-mass black holes under coupled growth",
        description="Birth mass M_obs ((1+z_obs)/(1+z_form))^k of each black hole, the probability "
                    "that it exceeds the neutron-star limit, and the largest k allowed at 95 %.")
    parser.add_argument("catalog", metavar="CATALOG",
                        help="CSV or ECSV: mass, mass_err (Msun), optional id and z_obs, and z_form or age_gyr")
    parser.add_argument("--k", type=float, help="coupling exponent to evaluate")
    parser.add_argument("--posterior", metavar="FIT_DIR",
                        help="output directory of `cosmogrow fit` (samples.npz, array k): average over it")
    parser.add_argument("--limit", type=float, default=remnants.DEFAULT_LIMIT,
                        help="least birth mass of a black hole, Msun (default %(default)g)")
    parser.add_argument("--cosmology", default=None, help="astropy realisation name (default Planck18)")
    parser.add_argument("--out", required=True, metavar="DIR", help="output directory")
    add_force_option(parser)
    parser.set_defaults(run=run)


def run(args):
    if args.k is None and args.posterior is None:
        raise ConfigError("remnants: expected --k K, --posterior FIT_DIR, or both")
    if args.k is not None:
        validate.number(args.k, "--k", low=-K_LIMIT, high=K_LIMIT)
    positive("--limit", args.limit)
    with validate.in_file("--cosmology"):
        cosmo = background.get_cosmology(args.cosmology)
    samples = read_k_samples(args.posterior) if args.posterior else None
    catalog = remnants.read_remnants(args.catalog, cosmo)
    claim_out(args, "remnants")
    k_summary = summarise_samples(samples) if samples is not None else None
    k_eval = float(args.k) if args.k is not None else k_summary["median"]
    births = remnants.birth_mass(catalog.mass, catalog.z_obs, catalog.z_form, k_eval)
    birth_errs = remnants.birth_mass(catalog.mass_err, catalog.z_obs, catalog.z_form, k_eval)
    probs = remnants.prob_above_limit(catalog, k_eval, args.limit)
    k_each = remnants.k_max_per_object(catalog, args.limit)
    k_joint = remnants.k_max_joint(catalog, args.limit)
    post = remnants.posterior_probabilities(catalog, samples, args.limit) if samples is not None else None
    objects = []
    for i in range(len(catalog)):
        entry = {"id": str(catalog.ids[i]), "mass": catalog.mass[i], "mass_err": catalog.mass_err[i],
                 "z_obs": catalog.z_obs[i], "z_form": catalog.z_form[i],
                 "formation_from": str(catalog.formation_from[i]), "age_gyr": catalog.age_gyr[i],
                 "growth_ratio": catalog.growth_ratio[i], "birth_mass": births[i],
                 "birth_mass_err": birth_errs[i], "p_above_limit": probs[i], "k_max_95": k_each[i]}
        if post is not None:
            entry["posterior"] = {name: post[name][i] for name in
                                  ("p_above_limit", "birth_mass_median", "birth_mass_p16", "birth_mass_p84")}
        objects.append(entry)
    report = {
        "command": "remnants",
        "k": k_eval,
        "k_is": "given with --k" if args.k is not None else "posterior median",
        "limit_msun": args.limit,
        "limit_reference": "approximate maximum neutron-star mass, Rezzolla et al. 2018 (2.16 +0.17/-0.15 Msun)",
        "joint_probability": float(np.prod(probs)),
        "k_max_95": k_joint,
        "objects": objects,
        "definitions": {
            "birth_mass": "mass ((1+z_obs)/(1+z_form))^k, Msun; birth_mass_err scales mass_err alike",
            "p_above_limit": "Phi((mass - limit ((1+z_form)/(1+z_obs))^k) / mass_err)",
            "joint_probability": "product of p_above_limit over objects (independent errors)",
            "k_max_95": "largest k with joint probability >= 0.95 (top level) or with the object's "
                        "probability >= 0.95 (per object); null when no k reaches 0.95",
        },
        "assumptions": list(ASSUMPTIONS),
        "inputs": {"catalog": str(args.catalog), "catalog_sha256": outputs.sha256_file(args.catalog),
                   "n_objects": len(catalog), "k": args.k,
                   "posterior": str(args.posterior) if args.posterior else None,
                   "cosmology": background.describe(cosmo)},
        "versions": outputs.package_versions(),
    }
    if post is not None:
        report["posterior"] = {"k_summary": k_summary, "joint_probability_mean": post["joint_probability"],
                               "meaning": "probabilities averaged over the chain of k"}
    from ...report.budget_figures import plot_remnants

    band = (k_summary["p16"], k_summary["p84"]) if k_summary else None
    with outputs.staged_directory(args.out) as tmp:
        outputs.write_json(tmp / "remnants.json", report)
        plot_remnants(catalog, tmp / "remnants.png", limit=args.limit, k=k_eval, k_band=band,
                      k_max=k_joint if np.isfinite(k_joint) else None)
    k_text = f"{k_joint:.3g}" if np.isfinite(k_joint) else "none (no k reaches 95 %)"
    print(f"cosmogrow remnants: {len(catalog)} black holes; at k = {k_eval:.3g} the joint probability "
          f"of births above {args.limit:g} Msun is {report['joint_probability']:.3g}; "
          f"largest k at 95 %: {k_text}; wrote {args.out}")
    return 0
