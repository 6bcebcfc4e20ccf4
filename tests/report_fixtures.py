"""Results folders for the report tests: fit, null tests, challenge, budget and remnants run through
the command line on small inputs, and a campaign folder whose calibration blocks come from
`cosmogrow.campaigns.coverage` on synthetic estimates (a real campaign takes too long for this file).

Hostile text is planted on purpose: an object id, a sample name and a mass-method name (which ends
up in a degeneracy warning) all carry a <script> tag; the report must show them escaped.
"""

import json
import shutil

import numpy as np

from cosmogrow.campaigns.coverage import recovery_block, sbc_block
from cosmogrow.cli.dispatch import main

from mocks import mock_catalog

EVIL_ID = '<script>alert("id")</script>'
EVIL_SAMPLE = '<script>alert("sample")</script>'
EVIL_METHOD = 'virial<script>alert("method")</script>'
EVIL_REMNANT = '<script>alert("remnant")</script>'
EVIL_TEST_NOTE = '<img src=x onerror="alert(1)">'

_CACHE = {}


def build_fit(folder):
    """`cosmogrow fit` on a small mock whose high-z sample uses another mass method (a degeneracy)."""
    catalog = mock_catalog(np.random.default_rng(11), 2.0,
                           samples=((0.02, 40, "dynamical"), (1.0, 40, EVIL_METHOD)))
    frame = catalog.to_dataframe()
    frame.loc[frame["sample"] == "S1", "sample"] = EVIL_SAMPLE
    frame.loc[0, "id"] = EVIL_ID
    path = folder / "mock.csv"
    frame.to_csv(path, index=False)
    out = folder / "fit"
    code = main(["fit", str(path), "--out", str(out), "--seed", "3", "--quiet"])
    assert code in (0, 3), code
    return out


def build_remnants(folder):
    path = folder / "remnants.csv"
    path.write_text("id,mass,mass_err,z_obs,z_form\n"
                    f"\"{EVIL_REMNANT.replace(chr(34), chr(34) * 2)}\",5.0,0.5,0.0,2.0\n"
                    "BH-2,7.5,0.8,0.01,1.0\n")
    out = folder / "remnants"
    assert main(["remnants", str(path), "--k", "1.0", "--out", str(out)]) == 0
    return out


def build_budget(folder):
    out = folder / "budget"
    assert main(["budget", "--k", "3", "--out", str(out)]) == 0
    return out


def _png_from(fit_dir, target):
    """A stand-in figure: a copy of one of the fit's PNGs under the other command's file name."""
    shutil.copy2(fit_dir / "relation.png", target)


def _run_config(folder):
    path = folder / "run.toml"
    if not path.exists():
        path.write_text('seed = 4\n[[sample]]\npath = "mock.csv"\n')
    return path


def build_nulltests(folder):
    """`cosmogrow nulltest` on the fit's catalogue (few repeats), then one test's result replaced by
    a planted failure whose note carries markup."""
    out = folder / "nulltests"
    assert main(["nulltest", "--config", str(_run_config(folder)), "--out", str(out), "--repeats", "2",
                 "--quiet"]) == 0
    path = out / "nulltests.json"
    document = json.loads(path.read_text())
    name = next(iter(document["tests"]))
    document["tests"][name].update({"passed": False, "p_value": 0.003, "note": EVIL_TEST_NOTE,
                                    "skipped": None})
    path.write_text(json.dumps(document, indent=2))
    return out


def build_challenge(folder):
    """`cosmogrow challenge` of a claimed k = 3 with three mocks per hypothesis."""
    out = folder / "challenge"
    assert main(["challenge", "--config", str(_run_config(folder)), "--claim", "3", "--out", str(out),
                 "--replicas", "3", "--quiet"]) == 0
    return out


def build_campaign(folder, fit_dir):
    """summary.json of a campaign, its blocks computed by cosmogrow.calibration on synthetic mocks."""
    out = folder / "campaign"
    out.mkdir()
    rng = np.random.default_rng(2)
    recovery = {}
    for name, shift in (("selection_aware", 0.0), ("plain", -0.8)):
        blocks = []
        for k in (0.0, 3.0):
            est = k + shift + rng.normal(0, 0.5, 200)
            std = np.full(200, 0.5)
            blocks.append(recovery_block(k, est, std, est - 0.5, est + 0.5, est - 1.0, est + 1.0,
                                         np.ones(200, bool)))
        recovery[name] = blocks
    ranks = rng.integers(0, 100, 120)
    document = {"campaign": {"seed": 17, "grid": {"k": [0.0, 3.0], "realisations": 200}},
                "mode": "fast", "estimators": ["selection_aware", "plain"], "n_mocks": 800,
                "n_errors": 0, "recovery": recovery,
                "sbc": {"selection_aware": sbc_block(ranks, 99, (-2.0, 6.0))},
                "design": {"n_objects": 80}, "versions": {"cosmogrow": "0.1.0"}}
    (out / "summary.json").write_text(json.dumps(document, indent=2))
    for name in ("recovery.png", "coverage.png", "sbc_ranks.png"):
        _png_from(fit_dir, out / name)
    return out


def results_folders(tmp_path_factory):
    """Every kind of results folder (built once per test session)."""
    if "folders" not in _CACHE:
        root = tmp_path_factory.mktemp("report_results")
        fit_dir = build_fit(root)
        _CACHE["folders"] = {"fit": fit_dir, "campaign": build_campaign(root, fit_dir),
                             "nulltests": build_nulltests(root),
                             "challenge": build_challenge(root),
                             "budget": build_budget(root), "remnants": build_remnants(root)}
    return _CACHE["folders"]
