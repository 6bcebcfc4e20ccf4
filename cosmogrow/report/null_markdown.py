"""summary.md of the null tests and of a challenge of a claimed k, in plain words."""

from .checks_section import estimator_words


def _p(value):
    if value is None:
        return "n/a"
    return f"{value:.3g}"


def _verdict(row):
    if row["passed"] is None:
        return "not applicable"
    return "pass" if row["passed"] else "**FAIL**"


def nulltests_markdown(result):
    """Markdown text of `nulltests.run_null_tests` results."""
    obs = result["observed"]
    lines = ["# cosmogrow null tests", "",
             f"Data: k = {obs['k']:.3f} ± {obs['k_std']:.3f} ({estimator_words(result)}; "
             f"selection {'modelled' if result['selection_modelled'] else 'not declared'}). "
             f"Each test fails when its p-value is below {result['alpha']:g}; "
             f"{result['repeats']} permutations, splits and k = 0 mocks; seed {result['seed']}.", "",
             "## In plain words", ""]
    lines += [f"- {line}" for line in result["summary"]]
    lines += ["", "## Tests", "", "| test | statistic value | p-value | result |", "|---|---|---|---|"]
    for row in result["tests"].values():
        value = row["value"]
        value_text = f"{value:.3g}" if isinstance(value, (int, float)) else "n/a"
        lines.append(f"| {row['title']} | {value_text} | {_p(row['p_value'])} | {_verdict(row)} |")
    for row in result["tests"].values():
        lines += ["", f"### {row['title']}: {_verdict(row)}", "",
                  f"- Null hypothesis: {row['null_hypothesis']}",
                  f"- Statistic: {row['statistic']}"]
        if row["threshold"]:
            lines.append(f"- Threshold: {row['threshold']}")
        lines.append(f"- {row['note']}")
    lines.append("")
    return "\n".join(lines)


def challenge_markdown(result):
    """Markdown text of `challenge.challenge_claim` results: status words first."""
    obs = result["observed"]
    verdict = result["verdict"]
    lines = [f"# cosmogrow challenge: claimed k = {result['claim']:g}", "",
             f"**Claimed k = {result['claim']:g}: {verdict['claim']['status']}; k = 0: "
             f"{verdict['null']['status']}** (threshold {result['threshold']:g}σ, the fit's).", "",
             f"{result['replicas']} mocks of the data's own design per hypothesis (k by "
             f"{estimator_words(result)}, seed {result['seed']}); a hypothesis is not consistent when "
             f"the mocks put the data beyond {result['threshold']:g}σ (p < {result['alpha']:.3g}), and "
             "its status depends on assumptions when the fit's verdict does "
             "(docs/method.md#challenge).", "",
             "## Verdict", ""]
    lines += [f"- {line}" for line in result["summary"]]
    lines += ["", "## What each hypothesis needs", "",
              "| hypothesis | status | fit's verdict (σ) | offsets the mocks were drawn with (pull) |",
              "|---|---|---|---|"]
    for label, row in result["hypotheses"].items():
        offsets = ", ".join(f"{name} = {row['nuisance_values'][name]:+.2f} dex ({pull:+.1f}σ)"
                            for name, pull in row["nuisance_pulls"].items()) or "none"
        fit = result["fit_verdicts"][label]
        lines.append(f"| k = {row['k']:g} | {verdict[label]['status']} | {fit['verdict']} "
                     f"({fit['sigma']:.1f}σ; {fit['sigma_range'][0]:.1f}-{fit['sigma_range'][1]:.1f}σ "
                     f"over ⅓×-3× the offset width) | {offsets} |")
    lines += ["", "## Distributions of the estimate", "",
              "| hypothesis | fit | median k | 95 % of mocks | bias (σ of mocks) | p (data) | p (empirical) |",
              "|---|---|---|---|---|---|---|"]
    for row in result["hypotheses"].values():
        for estimator in ("selection_aware", "plain"):
            cell = row[estimator]
            lines.append(f"| k = {row['k']:g} | {estimator.replace('_', '-')} | {cell['median']:.3f} | "
                         f"[{cell['interval95'][0]:.3f}, {cell['interval95'][1]:.3f}] | "
                         f"{cell['bias']:+.3f} ({cell['bias_sigma']:+.1f}) | {_p(cell['p_value'])} | "
                         f"{_p(cell['p_value_empirical'])} |")
    lines += ["", f"Data: selection-aware k = {obs['selection_aware']['k']:.3f} ± "
                  f"{obs['selection_aware']['k_std']:.3f}; plain k = {obs['plain']['k']:.3f} ± "
                  f"{obs['plain']['k_std']:.3f}.", "",
              "The verdict compares the data's selection-aware estimate with the selection-aware "
              "distributions; the plain rows show the bias of a fit that ignores the selection (their "
              "p-values place the data's plain estimate, for reference). p-values are two-sided "
              "Student-t predictive values of the mocks' distribution; the empirical Monte Carlo "
              "values cannot go below 2/(n+1). Pulls are offsets over their prior standard deviation.",
              ""]
    return "\n".join(lines)
