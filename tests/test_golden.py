"""Golden numbers: the demo fit and two seeded mocks give the same summary as when they were pinned.

The restructuring of the package (and any change meant to keep behaviour) must leave these numbers
identical. A change that is *meant* to move one of them regenerates the file on purpose:

    .venv/bin/python tests/test_golden.py   # rewrites tests/data/golden/golden.json

and says why in its commit message.
"""

import hashlib
import json
import sys
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
GOLDEN = ROOT / "tests" / "data" / "golden" / "golden.json"
MOCK_SEEDS = (101, 202)
# Reduced copy of the demo scenario for the mocks: fewer objects, same selections.
MOCK_SCENARIO = """
seed = 1
[cosmology]
name = "Planck18"
[truth]
k = 1.0
alpha = 8.69
beta = 1.0
sigma_int = 0.28
delta = { virial = 0.15 }
[[sample]]
name = "near"
n = 60
z_range = [0.004, 0.03]
method = "dynamical"
log_mstar_min = 10.3
selection = { kind = "sphere_of_influence", resolution_arcsec = 0.1 }
[[sample]]
name = "far"
n = 80
z_range = [1.0, 1.8]
method = "virial"
log_mstar_min = 10.5
selection = { kind = "flux_limit", flux_limit = 1e-13, bolometric_correction = 10.0 }
"""
MOCK_RUN = """
seed = {seed}
[model]
form = "ratio"
zero_point_method = "dynamical"
[[sample]]
name = "near"
path = "near.csv"
selection = {{ kind = "sphere_of_influence", resolution_arcsec = 0.1 }}
[[sample]]
name = "far"
path = "far.csv"
selection = {{ kind = "flux_limit", flux_limit = 1e-13, bolometric_correction = 10.0 }}
"""


def _numbers(summary):
    """The pinned part of a fit summary: posterior, MAP, convergence."""
    conv = {key: value for key, value in summary["convergence"].items() if key != "tau"}
    return {"k": summary["k"], "parameters": summary["parameters"], "map": summary["map"],
            "convergence": conv}


def _run(argv):
    from cosmogrow.cli.dispatch import main
    code = main(argv)
    assert code in (0, 3), f"{argv[0]} exited {code}"


def compute(tmp):
    """Every pinned number, computed afresh into the folder `tmp`."""
    tmp = Path(tmp)
    result = {}
    _run(["fit", "--config", str(ROOT / "demo_data" / "run.toml"), "--out", str(tmp / "demo"), "--quiet"])
    result["demo_fit"] = _numbers(json.loads((tmp / "demo" / "summary.json").read_text()))
    (tmp / "scenario.toml").write_text(MOCK_SCENARIO)
    for seed in MOCK_SEEDS:
        mock = tmp / f"mock{seed}"
        _run(["simulate", "--config", str(tmp / "scenario.toml"), "--out", str(mock), "--seed", str(seed)])
        digest = hashlib.sha256(b"".join((mock / f"{n}.csv").read_bytes() for n in ("near", "far")))
        (mock / "run.toml").write_text(MOCK_RUN.format(seed=seed))
        _run(["fit", "--config", str(mock / "run.toml"), "--out", str(mock / "fit"), "--quiet"])
        result[f"mock_{seed}"] = {"catalog_sha256": digest.hexdigest(),
                                  **_numbers(json.loads((mock / "fit" / "summary.json").read_text()))}
    return result


def _compare(got, want, where=""):
    if isinstance(want, dict):
        assert set(got) == set(want), f"{where}: keys {sorted(got)} != {sorted(want)}"
        for key in want:
            _compare(got[key], want[key], f"{where}.{key}")
    elif isinstance(want, list):
        assert len(got) == len(want), where
        for i, (g, w) in enumerate(zip(got, want)):
            _compare(g, w, f"{where}[{i}]")
    elif isinstance(want, float):
        assert np.isclose(got, want, rtol=1e-9, atol=1e-12), f"{where}: {got!r} != pinned {want!r}"
    else:
        assert got == want, f"{where}: {got!r} != pinned {want!r}"


def test_golden_numbers_unchanged(tmp_path):
    want = json.loads(GOLDEN.read_text())
    _compare(compute(tmp_path), want)


if __name__ == "__main__":  # regenerate on purpose
    import tempfile
    with tempfile.TemporaryDirectory() as tmp:
        GOLDEN.write_text(json.dumps(compute(tmp), indent=1, sort_keys=True) + "\n")
    print(f"wrote {GOLDEN}", file=sys.stderr)
