"""Words shared by the null tests: thresholds, verdicts, convergence, floors, pull combination."""

from .context import MIN_DIFFERENCE_VARIANCE, bonferroni, nested_pull, two_sided_p


def threshold_text(alpha):
    """The threshold of a test at level `alpha`, in words."""
    return f"passes when p >= {alpha:g}"


def pass_words(passed):
    """"passes" or "FAILS"."""
    return "passes" if passed else "FAILS"


def convergence_words(unsound, total):
    """A sentence on fits that did not converge (empty when all did)."""
    if not unsound:
        return ""
    return (f" {unsound} of {total} fits did not converge (an unsound Laplace approximation or a "
            "capped chain); they are included.")


def floor_words(passed, passed_unfloored, what):
    """A sentence when a variance floor decides the verdict (the verdicts with and without it differ)."""
    if passed == passed_unfloored:
        return ""
    return (f" The verdict rests on a variance floor: {what} is floored, and without the floor the "
            f"test would {'fail' if passed else 'pass'}.")


def pull_row(fit, observed, **labels):
    """One subset's row: its k, k_std, pull against the full k, p-value, and the same unfloored."""
    pull = nested_pull(fit, observed)
    raw = nested_pull(fit, observed, floor=False)
    return {**labels, "k": fit["k"], "k_std": fit["k_std"], "pull": pull, "p": two_sided_p(pull),
            "p_unfloored": two_sided_p(raw)}


def combined_pulls(rows, alpha):
    """Bonferroni-combined p of per-subset pulls, whether it passes, the worst subset, and a
    sentence when the difference-variance floor decides the verdict."""
    p = bonferroni([row["p"] for row in rows])
    raw = bonferroni([row["p_unfloored"] for row in rows])
    passed = p >= alpha
    floor = floor_words(passed, raw >= alpha, "the variance of k_subset - k_full (at "
                        f"{100 * MIN_DIFFERENCE_VARIANCE:g} % of σ_subset², for subsets that are "
                        "almost the whole data)")
    return p, passed, max(rows, key=lambda row: abs(row["pull"])), floor
