"""What keeps the command line quick to answer, and the stage timings a fit reports.

Speeds themselves are measured by analysis/bench_command.py, never asserted here; these tests check
the causes: help texts import no numerical library, and every stage of a fit is timed.
"""

import json
import subprocess
import sys

import numpy as np
import pytest

from cosmogrow.cli import dispatch

from mocks import mock_catalog, write_csv

HEAVY = ("numpy", "scipy", "astropy", "pandas", "matplotlib", "emcee", "h5py")
PROBE = ("import sys\nfrom cosmogrow.cli import main\ntry:\n    main({argv!r})\nexcept SystemExit:\n"
         "    pass\nprint('LOADED', sorted({{m.split('.')[0] for m in sys.modules}} & set({heavy!r})))")


@pytest.mark.parametrize("argv", [["--help"], ["fit", "--help"]])
def test_help_imports_no_numerical_library(argv):
    code = PROBE.format(argv=argv, heavy=HEAVY)
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert "usage: cosmogrow" in out
    assert out.strip().splitlines()[-1] == "LOADED []"


def test_top_level_help_lists_every_command_with_its_own_summary(capsys):
    with pytest.raises(SystemExit):
        dispatch.main(["--help"])
    listing = capsys.readouterr().out
    for name, summary in dispatch.COMMANDS.items():
        parser = dispatch.build_parser(name)
        registered = parser._subparsers._group_actions[0]._choices_actions[0].help
        assert registered == summary, name  # the module's own line, so the listing cannot drift
        assert name in listing and " ".join(summary.split()[:3]) in " ".join(listing.split())


def test_fit_times_its_stages_and_prints_them_when_verbose(tmp_path, capsys):
    cat = mock_catalog(np.random.default_rng(3), 1.0, samples=((0.02, 40, "dynamical"), (1.0, 40, "dynamical")))
    local = write_csv(cat.subset(cat.sample == "S0"), tmp_path / "local.csv")
    far = write_csv(cat.subset(cat.sample == "S1"), tmp_path / "far.csv")
    out = tmp_path / "res"
    assert dispatch.main(["fit", str(local), str(far), "--out", str(out), "--seed", "2", "--quiet",
                          "--verbose"]) == 0
    timings = json.loads((out / "summary.json").read_text())["timings"]
    stages = ("imports", "read", "map", "sampling", "sensitivity", "crosscheck", "significance", "figures",
              "writing")
    assert set(stages) <= set(timings)
    assert all(timings[name] >= 0 for name in stages)
    assert timings["total"] == pytest.approx(sum(timings[name] for name in timings
                                                 if name not in ("total", "beside")), abs=0.01)
    assert timings["sampling"] > 0 and timings["figures"] > 0
    assert "beside" not in timings  # a small catalogue: nothing runs beside the stages
    printed = capsys.readouterr().out
    assert "stage timings (s): total" in printed and "crosscheck" in printed
