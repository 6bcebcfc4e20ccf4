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
    lines = [f"# {title}", ""] + verdict_lines(summary) + [
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
              *significance_rows(summary),
              f"| Savage–Dickey B(k=0 : free k), uniform k prior of width W = "
              f"{_fmt(tests.get('bayes_factor_prior_width'), 0)} (B ∝ W) | "
              f"{_fmt(tests['bayes_factor_k0'])} ({tests['bayes_factor_method']}) |"]
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
    lines += sensitivity_lines(summary)
    sens = summary.get("degeneracy", {}).get("offset_prior_sensitivity")
    if sens:
        lines += ["", "Width of k against the prior width of the mass-method offsets (Laplace):", "",
                  "| offset prior (dex) | σ(k) |", "|---|---|"]
        lines += [f"| {row['offset_prior_width']:g} | {row['k_std']:.3f} |" for row in sens]
    if summary.get("warnings"):
        lines += ["", "## Warnings", ""] + [f"- {w}" for w in summary["warnings"]]
    lines += ["", "Significances are the σ-equivalents √Λ of profile-likelihood ratios (Wilks), labelled "
              "by what constrains the offsets; they assume the model (Gaussian scatter, the declared "
              "selection) is right. See docs/method.md#verdicts and the README's caveats.", ""]
    return "\n".join(lines)


def _sigma_cell(value, verdict=None):
    """σ with its range and verdict words whenever the verdict depends on assumptions."""
    text = f"{_fmt(value, 2)} σ"
    if verdict and verdict["verdict"] == "depends on assumptions":
        low, high = verdict["sigma_range"]
        text += f" (range {_fmt(low, 1)}–{_fmt(high, 1)} σ: {verdict['verdict']})"
    return text


def verdict_lines(summary):
    """The headline: verdict words first, each reason, and the data-alone statement."""
    verdicts = summary.get("verdicts") or []
    if not verdicts:
        return []
    lines = [f"**Verdicts: {summary.get('headline', '')}**", ""]
    for row in verdicts:
        alone = f" {row['data_alone']}" if row.get("data_alone") else ""
        lines.append(f"- **k = {row['k_ref']:g}: {row['verdict']}.** {row['reason']}{alone}")
    info = (summary.get("information") or {}).get("text")
    lines += ["", info, ""] if info else [""]
    return lines


def significance_rows(summary):
    """Table rows of both significances, each labelled with what constrains the offsets."""
    tests = summary["tests"]
    verdicts = {row["k_ref"]: row for row in summary.get("verdicts") or []}
    method = tests.get("significance_method", "profile likelihood")
    free = tests.get("significance_method_unconstrained")
    rows = []
    for k_ref in (0, 3):
        rows.append(f"| {method}, vs k = {k_ref} | "
                    f"{_sigma_cell(tests[f'sigma_vs_k{k_ref}'], verdicts.get(float(k_ref)))} |")
        if free and free != method:
            rows.append(f"| {free}, vs k = {k_ref} | {_fmt(tests[f'sigma_vs_k{k_ref}_unconstrained'], 2)} σ |")
    return rows


def sensitivity_lines(summary):
    """The sensitivity table: each assumption, k, both significances and B01 with its prior width."""
    rows = summary.get("sensitivity") or []
    if not rows:
        return []
    lines = ["", "Sensitivity to assumptions (docs/method.md#verdicts):", "",
             "| assumption | k median | 68 % interval | σ vs k = 0 | σ vs k = 3 | B01 (k prior width W) | how |",
             "|---|---|---|---|---|---|---|"]
    for row in rows:
        interval = row.get("k_interval68")
        interval_text = f"[{interval[0]:.2f}, {interval[1]:.2f}]" if interval else "not identified"
        lines.append(f"| {row['label']} | {_fmt(row.get('k_median'), 2)} | {interval_text} | "
                     f"{_fmt(row.get('sigma_vs_k0'), 2)} | {_fmt(row.get('sigma_vs_k3'), 2)} | "
                     f"{_fmt(row.get('bayes_factor_k0'))} (W = {_fmt(row['k_prior_width'], 0)}) | "
                     f"{row['method']} |")
    return lines
