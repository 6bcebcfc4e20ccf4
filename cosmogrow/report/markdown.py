"""summary.md: the fit's table as a person reads it (also printed by the fit command)."""


def _fmt(value, digits=3):
    if value is None:
        return "n/a"
    if isinstance(value, float) and (abs(value) >= 1e4 or (0 < abs(value) < 1e-3)):
        return f"{value:.{digits}e}"
    return f"{value:.{digits}f}" if isinstance(value, float) else str(value)


def fit_markdown(summary, title="cosmogrow fit"):
    """Markdown text of a fit summary dict."""
    k = summary["k"]
    tests = summary["tests"]
    conv = summary["convergence"]
    lines = [f"# {title}", "",
             f"**k = {k['median']:.2f} +{k['interval68'][1] - k['median']:.2f} "
             f"-{k['median'] - k['interval68'][0]:.2f}** (posterior median of the MCMC draws, 68 %); "
             f"95 %: [{k['interval95'][0]:.2f}, {k['interval95'][1]:.2f}]", "",
             f"Selection modelled: {'yes' if summary['selection']['corrected'] else 'no'}.  "
             f"Converged: {'yes' if conv['converged'] else 'NO'} "
             f"({conv['n_steps']} steps, {_fmt(conv['chain_over_tau'], 1)} autocorrelation times, "
             f"acceptance {conv['acceptance']:.2f}).", "",
             "| parameter | median | 68 % interval | 95 % interval |", "|---|---|---|---|"]
    for name, row in summary["parameters"].items():
        lines.append(f"| {name} | {row['median']:.3f} | [{row['interval68'][0]:.3f}, "
                     f"{row['interval68'][1]:.3f}] | [{row['interval95'][0]:.3f}, {row['interval95'][1]:.3f}] |")
    lines += ["", "| test | value |", "|---|---|",
              f"| P(k ≤ 0 \\| data) | {_fmt(tests['p_k_le_0'], 4)} |",
              f"| profile likelihood vs k = 0 | {_fmt(tests['sigma_vs_k0'], 2)} σ |",
              f"| profile likelihood vs k = 3 | {_fmt(tests['sigma_vs_k3'], 2)} σ |",
              f"| Savage–Dickey B(k=0 : free k) | {_fmt(tests['bayes_factor_k0'])} "
              f"({tests['bayes_factor_method']}) |"]
    crosscheck = summary.get("crosscheck")
    if crosscheck and crosscheck.get("skipped"):
        lines += ["", f"Distribution-matching cross-check skipped: {crosscheck['skipped']}"]
    elif crosscheck:
        lines += ["", "Distribution-matching cross-check (best k; range with p ≥ 0.05):", ""]
        for name, row in crosscheck.get("tests", {}).items():
            rng = row.get("range")
            rng_text = f"[{rng[0]:.2f}, {rng[1]:.2f}]" if rng else "none"
            note = f" (skipped: {row['skipped']})" if row.get("skipped") else ""
            lines.append(f"- {name}: best k = {_fmt(row.get('best_k'), 2)}, range {rng_text}{note}")
    sens = summary.get("degeneracy", {}).get("offset_prior_sensitivity")
    if sens:
        lines += ["", "Width of k against the prior width of the mass-method offsets (Laplace):", "",
                  "| offset prior (dex) | σ(k) |", "|---|---|"]
        lines += [f"| {row['offset_prior_width']:g} | {row['k_std']:.3f} |" for row in sens]
    if summary.get("warnings"):
        lines += ["", "## Warnings", ""] + [f"- {w}" for w in summary["warnings"]]
    lines += ["", "Significances are Wilks equivalents of profile-likelihood ratios and assume the model "
              "(Gaussian scatter, the declared selection) is right; see the README's caveats.", ""]
    return "\n".join(lines)
