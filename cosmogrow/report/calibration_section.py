"""The web report's part for an injection-recovery campaign (summary.json of `cosmogrow inject`).

Per estimator and injected k: bias, RMSE, interval width, 68/95 % coverage with binomial errors
(cells outside the binomial 3σ band are flagged) and the power to exclude k = 0 and k = 3; the
simulation-based-calibration rank test. Every key is optional. `campaign_context` gives the data
of the template sections/campaign.html.j2.
"""

from .formatting import Cell, as_float, dig, fmt, fmt_p, table

# |bias| above this fraction of the typical posterior width is flagged (the campaign issue's
# acceptance criterion for an unbiased estimator).
BIAS_LIMIT_SIGMA = 0.2
# SBC rank histograms less uniform than this (chi-square p-value) are flagged.
SBC_P_LIMIT = 0.01


def _blocks(summary):
    """(estimator, block) pairs of the recovery table."""
    recovery = dig(summary, "recovery")
    if not isinstance(recovery, dict):
        return []
    return [(name, block) for name, blocks in recovery.items() if isinstance(blocks, list)
            for block in blocks if isinstance(block, dict)]


def coverage_off(block, level):
    """True when the coverage lies outside nominal ± its 3σ binomial band; None if unknown."""
    value = as_float(dig(block, f"coverage{level}"))
    nominal = as_float(dig(block, f"coverage{level}_nominal"))
    band = as_float(dig(block, f"coverage{level}_band3"))
    if value is None or nominal is None or band is None:
        return None
    return abs(value - nominal) > band


def bias_off(block):
    """|bias| above BIAS_LIMIT_SIGMA of sigma_k and also more than 3 of its own standard errors
    (with 40 mocks per k the standard error alone is ~0.16 sigma_k, so the size limit by itself
    would flag noise)."""
    ratio = as_float(dig(block, "bias_over_sigma"))
    if ratio is None:
        return None
    bias, error = as_float(dig(block, "bias")), as_float(dig(block, "bias_error"))
    significant = bias is None or error is None or error <= 0 or abs(bias) > 3 * error
    return abs(ratio) > BIAS_LIMIT_SIGMA and significant


def _coverage_cell(block, level):
    value, error = dig(block, f"coverage{level}"), dig(block, f"coverage{level}_error")
    off = coverage_off(block, level)
    text = f"{fmt(value)} ± {fmt(error)}" if as_float(error) is not None else fmt(value)
    title = (f"nominal {fmt(dig(block, f'coverage{level}_nominal'), 2)}, 3σ band "
             f"± {fmt(dig(block, f'coverage{level}_band3'))}")
    return Cell(text, "bad" if off else None, title)


def calibration_table(summary):
    rows = []
    for name, block in _blocks(summary):
        if not dig(block, "n"):
            rows.append([name, fmt(dig(block, "k_injected"), 2), fmt(dig(block, "n"))] + ["–"] * 6)
            continue
        failed = dig(block, "n_failed") or 0
        unconverged = dig(block, "n_not_converged") or 0
        count = fmt(dig(block, "n")) + (f" ({fmt(failed)} failed)" if failed else "") + \
            (f" ({fmt(unconverged)} unconv.)" if unconverged else "")
        bias = (f"{fmt(dig(block, 'bias'), signed=True)} ± {fmt(dig(block, 'bias_error'))} "
                f"({fmt(dig(block, 'bias_over_sigma'), 2, signed=True)} σ)")
        rows.append([name, fmt(dig(block, "k_injected"), 2), count,
                     Cell(bias, "bad" if bias_off(block) else None),
                     fmt(dig(block, "rmse")), _coverage_cell(block, "68"), _coverage_cell(block, "95"),
                     fmt(dig(block, "power_exclude_k0"), 2), fmt(dig(block, "power_exclude_k3"), 2)])
    if not rows:
        return None
    return table(["estimator", "injected k", "mocks", "bias ± error (in units of σ_k)", "RMSE",
                  "68 % coverage", "95 % coverage", "P(exclude k = 0)", "P(exclude k = 3)"], rows,
                 numeric=range(1, 9),
                 caption="Recovery of injected k, per estimator. Coverage is the fraction of mocks "
                         "whose interval holds the truth (± binomial error); red cells lie outside "
                         f"the binomial 3σ band or have |bias| > {BIAS_LIMIT_SIGMA} σ_k. Power: fraction "
                         "of 95 % intervals excluding k = 0 or k = 3.")


def sbc_table(summary):
    sbc = dig(summary, "sbc")
    if not isinstance(sbc, dict) or not sbc:
        return None
    rows = []
    for name, block in sbc.items():
        p_value = as_float(dig(block, "p_value"))
        rows.append([name, fmt(dig(block, "n")), fmt(dig(block, "n_draws")),
                     f"{fmt(dig(block, 'chi2'), 1)} / {fmt(dig(block, 'dof'))}",
                     Cell(fmt_p(p_value), "bad" if p_value is not None and p_value < SBC_P_LIMIT else None),
                     fmt(dig(block, "mean_normalised_rank"))])
    return table(["estimator", "mocks", "draws per mock", "χ² / dof", "p (uniform ranks)",
                  "mean normalised rank"], rows,
                 caption="Simulation-based calibration (Talts et al. 2018): k drawn from the prior; "
                         "the rank of the truth among the posterior draws is uniform for a calibrated "
                         "posterior. A mean normalised rank above 0.5 means estimates run low.")


def campaign_facts(summary):
    campaign = dig(summary, "campaign", default={})
    grid = dig(campaign, "grid", "k", default=dig(campaign, "grid"))
    grid_text = ", ".join(fmt(v, 2) for v in grid) if isinstance(grid, list) else fmt(grid)
    estimators = dig(summary, "estimators")
    pairs = [("estimator mode", fmt(dig(summary, "mode"))),
             ("estimators", ", ".join(map(str, estimators)) if isinstance(estimators, list) else "–"),
             ("injected k", grid_text),
             ("realisations per k", fmt(dig(campaign, "grid", "realisations",
                                            default=dig(campaign, "realisations")))),
             ("mock fits", fmt(dig(summary, "n_mocks"))),
             ("failed fits", fmt(dig(summary, "n_errors"))),
             ("objects per mock (median)", fmt(dig(summary, "design", "n_objects"))),
             ("seed", fmt(dig(campaign, "seed")))]
    return [(a, b) for a, b in pairs if b != "–"]


def campaign_context(summary, folder=None):
    """Data of the template sections/campaign.html.j2: facts, recovery and SBC tables."""
    return {"facts": campaign_facts(summary), "recovery": calibration_table(summary),
            "sbc": sbc_table(summary)}


def campaign_warnings(summary):
    """One warning per estimator that is off at some injected k, plus SBC and failed fits."""
    out = [str(w) for w in dig(summary, "warnings", default=[]) or [] if w]
    problems = {}
    for name, block in _blocks(summary):
        faults = [f"{level} % coverage {fmt(dig(block, f'coverage{level}'))} (nominal "
                  f"{fmt(dig(block, f'coverage{level}_nominal'), 2)})"
                  for level in ("68", "95") if coverage_off(block, level)]
        if bias_off(block):
            faults.append(f"bias {fmt(dig(block, 'bias_over_sigma'), 2, signed=True)} σ_k")
        if faults:
            problems.setdefault(name, []).append(f"at k = {fmt(dig(block, 'k_injected'), 2)}: "
                                                 + ", ".join(faults))
    for name, faults in problems.items():
        out.append(f"estimator '{name}' is not calibrated for this design: " + "; ".join(faults))
    sbc = dig(summary, "sbc")
    for name, block in (sbc.items() if isinstance(sbc, dict) else []):
        p_value = as_float(dig(block, "p_value"))
        if p_value is not None and p_value < SBC_P_LIMIT:
            out.append(f"estimator '{name}': SBC ranks are not uniform (p = {fmt_p(p_value)})")
    errors = dig(summary, "n_errors")
    if isinstance(errors, int) and errors > 0:
        out.append(f"{errors} mock fits failed (see results.parquet, column error)")
    return out


def campaign_glance(summary):
    blocks = [b for _, b in _blocks(summary) if dig(b, "n")]
    flagged = sum(bool(coverage_off(b, "68") or coverage_off(b, "95") or bias_off(b)) for b in blocks)
    return (f"{fmt(dig(summary, 'n_mocks'))} mock fits; {len(blocks) - flagged} of {len(blocks)} "
            f"(estimator, k) cells calibrated (coverage within binomial 3σ; no bias above "
            f"{BIAS_LIMIT_SIGMA} σ that is significant at 3 standard errors)")
