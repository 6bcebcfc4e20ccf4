"""cosmogrow: measure and calibrate cosmologically coupled black-hole growth, M_BH ∝ a^k.

Scope: fits k from catalogues of black-hole and host masses with selection effects in the
likelihood, calibrates the fit by simulation, and reports it. It does not estimate black-hole
masses from spectra, nor fit cosmological parameters. The method is stated in docs/method.md.
"""

__version__ = "0.1.0"
