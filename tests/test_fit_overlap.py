"""What lets a fit's stages overlap without changing its results: figures drawn by forked drawers
from the moment the chain ends (redrawn here when a drawer fails), the plain likelihood's reused
temporaries, legends placed without matplotlib's search over every point and the command line's
exit without interpreter teardown."""

import os
import pickle
import subprocess
import sys

import numpy as np
import pytest

from cosmogrow.cli.commands import _drawing
from cosmogrow.background import get_cosmology
from cosmogrow.config import RunConfig
from cosmogrow.inference.fit import FitData, build_model, run_fit

from mocks import mock_catalog

TWO_CORES = len(os.sched_getaffinity(0)) >= 2


def _mark(tag):
    """A figure job that writes the pid of the process drawing it; with `tag` "parent only" it fails
    anywhere but in the test's own process."""
    parent = os.getpid()

    def draw(folder, config, data, payload):
        if tag == "parent only" and os.getpid() != parent:
            raise RuntimeError("this drawer cannot draw")
        (folder / payload["file"]).write_text(str(os.getpid()))
    return draw


@pytest.mark.skipif(not TWO_CORES, reason="drawers need a second core")
@pytest.mark.parametrize("tag", ["anywhere", "parent only"])
def test_drawers_draw_in_their_own_processes_and_the_parent_redraws_what_failed(tmp_path, monkeypatch, tag):
    monkeypatch.setattr(_drawing, "FIGURES", {name: _mark(tag) for name in _drawing.DRAWER_OF})
    with _drawing.FigureDrawers(tmp_path, None, None) as drawers:
        assert drawers.process is not None and len(drawers.connections) == 2
        drawers.submit({name: {"file": name} for name in _drawing.DRAWER_OF})
        drawers.finish()
        assert drawers.process is None  # joined
    pids = {int((tmp_path / name).read_text()) for name in _drawing.DRAWER_OF}
    if tag == "anywhere":
        assert len(pids) == 2 and os.getpid() not in pids  # two drawers, the parent drew nothing
    else:
        assert pids == {os.getpid()}


def test_drawers_end_when_the_block_fails(tmp_path):
    with pytest.raises(KeyError):
        with _drawing.FigureDrawers(tmp_path, None, None) as drawers:
            process = drawers.process
            raise KeyError("stop")
    assert process is None or not process.is_alive()


def test_without_processes_every_figure_is_drawn_here(tmp_path, monkeypatch):
    monkeypatch.setattr(_drawing, "FIGURES", {name: _mark("anywhere") for name in _drawing.DRAWER_OF})
    with _drawing.FigureDrawers(tmp_path, None, None, processes=0) as drawers:
        drawers.submit({"corner.png": {"file": "corner.png"}, "crosscheck.png": {"file": "crosscheck.png"}})
        drawers.finish()
    assert {(tmp_path / n).read_text() for n in ("corner.png", "crosscheck.png")} == {str(os.getpid())}


@pytest.fixture(scope="module")
def small_fit_inputs():
    catalog = mock_catalog(np.random.default_rng(11), 1.0, samples=((0.02, 40, "dynamical"), (1.0, 40, "dynamical")))
    return RunConfig().with_overrides(seed=4), FitData(catalog=catalog, files=[], selections={},
                                                       cosmology=get_cosmology())


def test_figures_of_the_chain_are_handed_over_when_it_ends(small_fit_inputs):
    config, data = small_fit_inputs
    seen = []
    result = run_fit(config, data, on_sampled=lambda model, chain: seen.append(_drawing.chain_payloads(model, chain)))
    assert len(seen) == 1 and set(seen[0]) == {"corner.png", "offsets.png", "relation.png"}
    np.testing.assert_array_equal(seen[0]["corner.png"]["samples"], result.chain.samples)
    # the medians the figures are drawn with are the summary's
    assert seen[0]["relation.png"]["summary"]["parameters"] == result.summary["parameters"]


@pytest.mark.parametrize("form", ["ratio", "relation"])
def test_plain_likelihood_reuses_its_temporaries_without_changing_values(small_fit_inputs, form):
    config, data = small_fit_inputs
    model = build_model(RunConfig().with_overrides(form=form), data)
    moments = model._moments
    rng = np.random.default_rng(0)
    thetas = [model.initial_guess() + 0.01 * rng.normal(size=(w, model.ndim)) for w in (16, 16, 32, 1, 16)]
    first = [moments.log_likelihood(t.copy()).copy() for t in thetas]
    again = [moments.log_likelihood(t.copy()) for t in reversed(thetas)][::-1]
    for a, b in zip(first, again):
        np.testing.assert_array_equal(a, b)
    assert moments._scratch[0].shape == (32, moments.n_obj)  # grown to the largest call, reused by smaller ones
    assert pickle.loads(pickle.dumps(moments))._scratch is None  # buffers are not shipped


def test_console_exits_with_mains_code_and_flushed_output(tmp_path):
    env = {**os.environ, "PYTHONPATH": os.pathsep.join(sys.path)}
    done = subprocess.run([sys.executable, "-m", "cosmogrow.cli", "fit", str(tmp_path / "missing.csv"),
                           "--out", str(tmp_path / "res")], capture_output=True, text=True, env=env)
    assert done.returncode == 2
    assert done.stderr.startswith("cosmogrow fit: error:") and "missing.csv" in done.stderr
    assert not (tmp_path / "res").exists()


def test_legend_goes_to_the_emptiest_corner_of_a_large_scatter():
    from cosmogrow.report.style import legend_place, plt

    rng = np.random.default_rng(2)
    x = rng.uniform(0, 1, 5000)
    y = np.clip(x + rng.normal(0, 0.05, x.size), 0, 1)  # a rising diagonal: upper left and lower right empty
    x[:1500], y[:1500] = rng.uniform(0.6, 1.0, 1500), rng.uniform(0.0, 0.4, 1500)  # fill the lower right
    fig, ax = plt.subplots()
    ax.scatter(x, y)
    assert legend_place(ax, x[:100], y[:100]) == "best"  # few points: matplotlib's own search
    assert legend_place(ax, x, y) == "upper left"
    plt.close(fig)


@pytest.mark.parametrize("form", ["ratio", "relation"])
def test_rows_with_equal_weights_share_their_sums_in_large_catalogues(form):
    # a gradient's or Hessian's points move one parameter at a time: at N >= 20 000 rows with the
    # same scatter (and beta) share the O(N) weighted sums; values equal those of one row at a time
    from cosmogrow.data.catalog import Catalog
    from cosmogrow.model.likelihood import CoupledGrowthModel, build_design
    from cosmogrow.model.moments import SHARED_SUMS_MIN_OBJECTS
    from cosmogrow.config import ModelOptions

    rng = np.random.default_rng(5)
    n = SHARED_SUMS_MIN_OBJECTS
    z = np.where(np.arange(n) < n // 2, 0.02, 1.0)
    s = rng.normal(11, 0.3, n)
    catalog = Catalog.from_columns(z=z, log_mbh=8.5 + (s - 11) + rng.normal(0, 0.3, n), log_mbh_err=rng.uniform(0.05, 0.3, n),
                                   log_mstar=s, log_mstar_err=np.full(n, 0.1), sample=np.where(z < 0.1, "a", "b"),
                                   method=np.where(rng.random(n) < 0.5, "dynamical", "virial"))
    options = ModelOptions(form=form)
    model = CoupledGrowthModel(build_design(catalog, options), options)
    centre = model.initial_guess()
    points = np.repeat(centre[None, :], 2 * model.ndim + 1, axis=0)
    for i in range(model.ndim):
        points[1 + i, i] += 1e-4
        points[1 + model.ndim + i, i] -= 1e-4
    shared = model._moments.log_likelihood(points.copy())
    one_by_one = np.array([model._moments.log_likelihood(row[None, :].copy())[0] for row in points])
    np.testing.assert_allclose(shared, one_by_one, rtol=1e-12, atol=0)
    assert len(np.unique(points[:, model._moments._weight_columns], axis=0)) < len(points)
