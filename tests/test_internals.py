"""The shared internals: parameter layout, Truth, the immutable model, seeds, refused keys."""

import pickle

import numpy as np
import pytest

from cosmogrow.config import ModelOptions, parse_run_config
from cosmogrow.errors import ConfigError
from cosmogrow.model.layout import OffsetGroup, ParameterLayout
from cosmogrow.model.likelihood import CoupledGrowthModel, build_design
from cosmogrow.model.truth import Truth, parse_truth
from cosmogrow.seeding import child_seed, child_seeds

from mocks import mock_catalog


def full_layout():
    groups = (OffsetGroup("method", ("dynamical", "virial")), OffsetGroup("host_type", ("quiescent", "agn")))
    return ParameterLayout(relation=True, scatter_names=("a", "b"), offset_groups=groups, outliers=True)


def test_layout_names_positions_and_round_trip():
    layout = full_layout()
    assert layout.names == ("k", "alpha", "beta", "sigma_int[a]", "sigma_int[b]", "delta[virial]",
                            "delta_host[agn]", "f_out", "sigma_out")
    assert (layout.index_k, layout.index_alpha, layout.index_beta) == (0, 1, 2)
    assert layout.scatter == slice(3, 5) and layout.offsets == slice(5, 7) and layout.outlier == slice(7, 9)
    assert layout.group_slice("host_type") == slice(6, 7)
    assert [(e.kind, e.label, e.index, e.zero_point) for e in layout.offset_entries()] == [
        ("method", "virial", 5, "dynamical"), ("host_type", "agn", 6, "quiescent")]
    theta = np.arange(9.0) / 10
    assert np.array_equal(layout.from_dict(layout.to_dict(theta)), theta)
    assert layout.offsets_by_label(theta, "host_type") == {"quiescent": 0.0, "agn": 0.6}
    assert layout.scatter_by_name(theta) == {"a": 0.3, "b": 0.4}
    lower, upper = layout.bounds({"k": (-1, 1), "sigma_int": (0, 2), "alpha": (0, 15), "beta": (-3, 5),
                                  "f_out": (0, 0.5), "sigma_out": (0.1, 5)})
    assert lower[5] == -np.inf and upper[6] == np.inf and upper[4] == 2 and lower[0] == -1
    with pytest.raises(ConfigError, match=r"unknown parameter 'delta\[spectral\]'; expected one of k, "):
        layout.index("delta[spectral]")
    with pytest.raises(ConfigError, match=r"parameters: missing 'k'"):
        layout.from_dict({})


def test_model_is_immutable_once_built():
    cat = mock_catalog(np.random.default_rng(0), 0.0)
    model = CoupledGrowthModel(build_design(cat, ModelOptions()), ModelOptions(), map_start=[0.1, 8.5, 0.3])
    assert np.array_equal(model.map_start, [0.1, 8.5, 0.3]) and model.host_priors == {}
    with pytest.raises(AttributeError, match="immutable once built; cannot set 'map_start'"):
        model.map_start = None


def test_truth_is_validated_and_round_trips():
    truth = parse_truth({"k": 2.0, "delta[virial]": 0.2, "delta_host": {"agn": -0.5},
                         "sigma_int": {"near": 0.3}, "host_priors": {"near": [10.8, 0.09]}, "seed": 4})
    assert truth.offset_of("virial") == 0.2 and truth.host_offset_of("agn") == -0.5
    assert truth.host_priors == {"near": (10.8, 0.09)}
    assert parse_truth(truth.to_dict()) == truth
    assert parse_truth(truth) is truth
    with pytest.raises(ConfigError, match=r"truth.sigma_out: expected a finite number > 0, got 0"):
        Truth(sigma_out=0)
    with pytest.raises(ConfigError, match=r"truth.delta_host.agn: expected a finite number, got 'x'"):
        Truth(delta_host={"agn": "x"})
    with pytest.raises(ConfigError, match=r"truth.host_priors.near: expected a finite number > 0"):
        Truth(host_priors={"near": (10.8, -1.0)})


def test_child_seeds_match_child_seed_and_spawn():
    parent = np.random.SeedSequence(11, spawn_key=(3,))
    a, b = child_seeds(parent, 2)
    assert a.spawn_key == (3, 0) and b.spawn_key == (3, 1) and a.entropy == 11
    assert child_seeds(5, 2)[1].generate_state(2).tolist() == child_seed(5, 1).generate_state(2).tolist()
    # the same streams as SeedSequence.spawn of a fresh parent (what the fit used before)
    spawned = np.random.SeedSequence(5).spawn(2)
    assert [c.generate_state(1)[0] for c in child_seeds(5, 2)] == [c.generate_state(1)[0] for c in spawned]


@pytest.mark.parametrize("raw, message", [
    ({"out": "results"}, r"key 'out' is not read: the results folder is given on the command line with --out"),
    ({"sampler": {"progress": True}}, r"key 'sampler.progress' is not read: progress lines are printed"),
])
def test_keys_without_effect_are_refused(raw, message):
    with pytest.raises(ConfigError, match=message):
        parse_run_config(raw, source="run.toml")


def test_simulator_is_picklable_and_reuses_its_samplers():
    from cosmogrow.simulation.population import Simulator

    config = {"truth": {"k": 1.0}, "sample": [{"name": "s", "n": 20, "z_range": [0.5, 1.0],
                                                "method": "virial"}]}
    simulator = pickle.loads(pickle.dumps(Simulator(config)))
    first = simulator.simulate(seed=3)
    moved = simulator.simulate(seed=3, truth=Truth(k=2.0))
    # same seed, same draws: only the coupling term differs, by -(2 - 1) log10(1 + z)
    np.testing.assert_allclose(moved.catalog.log_mbh - first.catalog.log_mbh,
                               -np.log10(1 + first.catalog.z), atol=1e-12)
    assert moved.truth["k"] == 2.0
