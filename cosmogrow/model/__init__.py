"""The likelihood of coupled growth: the parameter layout, the design arrays, the vectorised log
posterior with mass-method offsets, host-error treatment and selection terms, and the parent host
distribution of selected samples (docs/method.md#model).
"""
