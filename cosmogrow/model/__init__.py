"""The likelihood of coupled growth: the parameter layout (layout), the design arrays (design), the
latent mean shared with the simulator (mean), the vectorised log posterior with mass-method and
host-type offsets, host-error treatment and selection terms (likelihood), the true parameters of
mocks (truth), and the parent host distribution of selected samples (hostprior)
(docs/method.md#model).
"""
