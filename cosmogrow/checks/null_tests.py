"""The null tests (docs/method.md#null-tests), in the order they run. Each takes a
`context.NullContext` and returns one result (`context.make_result`): null hypothesis, statistic,
value, one p-value, threshold, passed (True / False, or None with the reason when the test cannot
fail for its stated reason on these data) and a plain-words note.

The resampling tests live in `resampling`, the subset tests in `subsets`.
"""

from .resampling import k0_false_exclusions, k0_with_selection, redshift_permutation, reference_split
from .subsets import host_mass_matching, leave_samples_out, leave_sources_out, single_method

TESTS = {"redshift_permutation": redshift_permutation, "reference_split": reference_split,
         "leave_samples_out": leave_samples_out, "leave_sources_out": leave_sources_out,
         "host_mass_matching": host_mass_matching, "single_method": single_method,
         "k0_with_selection": k0_with_selection, "k0_false_exclusions": k0_false_exclusions}

#: Tests whose null hypothesis includes k = 0 (they fail on a real coupling).
SIGNAL_TESTS = ("redshift_permutation", "k0_with_selection")
#: Tests of the estimator's calibration on the data's design.
CALIBRATION_TESTS = ("k0_false_exclusions",)
