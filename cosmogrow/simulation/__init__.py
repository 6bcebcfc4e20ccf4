"""The population simulator: a simulator configuration (truth and planned samples), the stellar
mass function of hosts, and the forward model drawing hosts, redshifts, black-hole masses,
selection and measurement noise (docs/method.md#simulator).
"""
