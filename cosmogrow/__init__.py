"""cosmogrow: measure and calibrate cosmologically coupled black-hole growth, M_BH ∝ a^k.

Scope: fits k from catalogues of black-hole and host masses with selection effects in the
likelihood, calibrates the fit by simulation, checks it with null tests, forecasts planned
observations and reports it. It does not estimate black-hole masses from spectra, nor fit
cosmological parameters. The method is stated in docs/method.md.

The public names below load on first use, so ``import cosmogrow`` stays light::

    import cosmogrow
    config = cosmogrow.run_config([{"name": "local", "data": local_frame, "method": "dynamical"},
                                   {"name": "distant", "data": distant_frame, "method": "virial"}],
                                  seed=1)
    result = cosmogrow.fit(config)
    result.summary["verdicts"]
"""

from importlib import import_module

__version__ = "0.1.0"

#: Public name -> module that defines it (relative to this package).
_EXPORTS = {
    "run_config": "api", "fit": "api", "simulate": "api", "calibrate": "api",
    "Catalog": "data.catalog",
    "read_catalog": "data.readers", "read_catalogs": "data.readers", "read_frame": "data.frames",
    "write_catalog": "data.readers",
    "RunConfig": "config", "read_run_config": "config",
    "load_data": "inference.fit", "build_model": "inference.fit", "run_fit": "inference.fit",
    "FitData": "inference.fit", "FitResult": "inference.fit",
    "run_null_tests": "checks.null_suite", "challenge_claim": "checks.challenge",
    "read_plan": "forecast.plan", "run_forecast": "forecast.run",
    "get_cosmology": "background",
    "CosmogrowError": "errors", "ConfigError": "errors", "InputError": "errors",
}
__all__ = ["__version__", *_EXPORTS]


def __getattr__(name):
    if name not in _EXPORTS:
        raise AttributeError(f"module 'cosmogrow' has no attribute {name!r}")
    value = getattr(import_module(f".{_EXPORTS[name]}", __name__), name)
    globals()[name] = value
    return value


def __dir__():
    return sorted(__all__)
