"""Estimating k from one catalogue: the maximum a posteriori and its Laplace approximation,
profiles, the emcee ensemble sampler, one fit reduced to k (k_estimate), the summary of a fit, the
distribution-matching cross-check, and the fit pipeline from a run configuration to a summary
(docs/method.md#estimators).
"""
