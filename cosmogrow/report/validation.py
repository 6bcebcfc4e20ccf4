"""What the web report expects of each results file, checked before anything is drawn.

A results file that parses but holds nonsense (k as text or NaN, a budget whose numbers are lists,
a campaign table that is not Parquet) must not produce a page that reads as all clear. Each kind
lists the keys it reads with the type it needs; `check_document` returns one line per departure,
naming the file, the key and the value. Absent optional keys and JSON nulls are not departures.
"""

import math

# key path (dots; "*" for every key of a mapping) -> expected type; "!" marks a required key.
# Types: number (finite), real (not NaN; ±inf allowed), count (integer ≥ 0), bool, text,
# mapping, list, pair (two finite numbers, ordered), texts (list of text).
_FIT = {
    "k": "mapping!", "k.median": "number!", "k.mean": "number", "k.std": "number",
    "k.interval68": "pair", "k.interval95": "pair",
    "parameters": "mapping!", "parameters.*": "mapping!", "parameters.*.median": "number",
    "parameters.*.interval68": "pair", "parameters.*.interval95": "pair",
    "tests": "mapping", "tests.p_k_le_0": "number", "tests.sigma_vs_k0": "real", "tests.sigma_vs_k3": "real",
    "tests.bayes_factor_k0": "real", "tests.log10_bayes_factor_k0": "real",
    "convergence": "mapping", "convergence.converged": "bool", "convergence.n_steps": "count",
    "convergence.n_walkers": "count", "convergence.tau_max": "real", "convergence.chain_over_tau": "real",
    "convergence.acceptance": "number", "convergence.n_samples": "count",
    "map": "mapping", "map.theta": "mapping", "map.theta.*": "number",
    "selection": "mapping", "selection.corrected": "bool", "selection.samples": "mapping",
    "data": "mapping", "data.*": "mapping!", "data.*.n": "count", "data.*.z_median": "number",
    "warnings": "texts", "crosscheck": "mapping", "degeneracy": "mapping", "inputs": "list",
    "versions": "mapping", "config": "mapping",
}
_CAMPAIGN = {
    "recovery": "mapping", "recovery.*": "list", "sbc": "mapping", "sbc.*": "mapping",
    "sbc.*.p_value": "number", "n_mocks": "count", "n_errors": "count", "estimators": "texts",
    "campaign": "mapping", "warnings": "texts", "versions": "mapping",
}
_NULLTESTS = {
    "tests": "mapping!", "tests.*": "mapping!", "tests.*.passed": "bool", "tests.*.p_value": "number",
    "tests.*.value": "real", "tests.*.interval": "pair", "observed": "mapping", "observed.k": "number",
    "observed.k_std": "number", "alpha": "number", "repeats": "count", "summary": "texts",
    "warnings": "texts", "failed": "texts",
}
_CHALLENGE = {
    "claim": "number!", "hypotheses": "mapping!", "hypotheses.*": "mapping!", "hypotheses.*.k": "number",
    "verdict": "mapping", "verdict.*": "mapping", "verdict.*.text": "text", "verdict.*.consistent": "bool",
    "observed": "mapping", "observed.*": "mapping", "observed.*.k": "number", "alpha": "number",
    "replicas": "count", "summary": "texts", "warnings": "texts",
}
_BUDGET = {
    "omega_bh": "number!", "omega_lambda": "number", "fraction_of_lambda": "number", "k": "number!",
    "rho_bh_comoving_today": "number", "rho_crit0": "number", "eps_bh": "number",
    "k_summary": "mapping", "omega_bh_summary": "mapping", "assumptions": "texts", "warnings": "texts",
}
_REMNANTS = {
    "k": "number!", "limit_msun": "number!", "joint_probability": "number", "k_max_95": "real",
    "objects": "list!", "objects.*": "mapping!", "objects.*.mass": "number", "objects.*.birth_mass": "number",
    "objects.*.p_above_limit": "number", "assumptions": "texts", "warnings": "texts",
}
EXPECTED = {"fit": _FIT, "campaign": _CAMPAIGN, "nulltests": _NULLTESTS, "challenge": _CHALLENGE,
            "budget": _BUDGET, "remnants": _REMNANTS}

_WORDS = {"number": "a finite number", "real": "a number", "count": "a whole number ≥ 0",
          "bool": "true or false", "text": "a text", "mapping": "a JSON object", "list": "a JSON list",
          "pair": "two finite numbers [low, high]", "texts": "a list of texts"}


def _is_number(value):
    return isinstance(value, (int, float)) and not isinstance(value, bool)


def _fits(value, kind):
    """True when `value` has the expected type."""
    if kind == "number":
        return _is_number(value) and math.isfinite(value)
    if kind == "real":
        return _is_number(value) and not math.isnan(value)
    if kind == "count":
        return isinstance(value, int) and not isinstance(value, bool) and value >= 0
    if kind == "pair":
        return (isinstance(value, list) and len(value) == 2 and all(_fits(v, "number") for v in value)
                and value[0] <= value[1])
    if kind == "texts":
        return isinstance(value, list) and all(isinstance(v, str) for v in value)
    return isinstance(value, {"bool": bool, "text": str, "mapping": dict, "list": list}[kind])


def _values(document, path):
    """(concrete key path, value or a missing marker) for a dotted path with "*" wildcards."""
    found = [("", document)]
    for part in path.split("."):
        step = []
        for where, value in found:
            if value is _MISSING or value is None:
                continue
            prefix = f"{where}." if where else ""
            if part == "*":
                items = value.items() if isinstance(value, dict) else (
                    enumerate(value) if isinstance(value, list) else ())
                step += [(f"{prefix}{key}" if isinstance(value, dict) else f"{where}[{key}]", item)
                         for key, item in items]
            else:
                step.append((f"{prefix}{part}", value.get(part, _MISSING) if isinstance(value, dict) else _MISSING))
        found = step
    return found


_MISSING = object()


def _shown(value):
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def check_document(kind, name, document):
    """Departures of one results file from what the report reads.

    Parameters
    ----------
    kind : str, the kind of results (a key of EXPECTED)
    name : str, the file's name or path as it should appear in the message
    document : dict, the parsed JSON

    Returns
    -------
    list of str, one line per departure: "<name>: key <path>: expected <type>, got <value>"
    """
    problems = []
    for path, spec in EXPECTED.get(kind, {}).items():
        expected, required = spec.rstrip("!"), spec.endswith("!")
        for where, value in _values(document, path):
            if value is _MISSING or value is None:
                if required:
                    problems.append(f"{name}: key {where} is missing; expected {_WORDS[expected]}")
            elif not _fits(value, expected):
                problems.append(f"{name}: key {where}: expected {_WORDS[expected]}, got {_shown(value)}")
    return problems


def check_parquet(path):
    """None when `path` is a readable Parquet file, else the reason (one line)."""
    import pyarrow.parquet as pq

    try:
        pq.read_metadata(path)
    except (OSError, ValueError) as exc:
        return f"{path.name}: not a readable Parquet table ({str(exc).splitlines()[0] if str(exc) else type(exc).__name__})"
    return None
