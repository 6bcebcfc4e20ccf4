"""The population simulator (docs/method.md#simulator): mock catalogues drawn like real ones.

Forward model of one object of a sample with mass method j, at a redshift z and with true host
stellar mass s at the observed epoch (log10 Msun); x = log10((1+z)/(1+z_ref)):
- s from the stellar mass function between the sample's log_mstar_min and log_mstar_max
  (massfunction; default Baldry et al. 2012), z uniform in comoving volume over z_range;
- host at the reference epoch s_ref = s + gamma x; m_ref = alpha + beta (s_ref - s_pivot)
  + delta_host[type] + eps, eps ~ N(0, sigma_int²) (with probability f_out an extra N(0, sigma_out²));
  delta_host is the host-type shift (0 for the zero-point type and for "unspecified");
- true black-hole mass at the observed epoch m = m_ref - k x;
- catalogue values m_obs = m + delta_j + N(0, log_mbh_err²), s_obs = s + N(0, log_mstar_err²);
- the sample's selection applied by random draws with the probits the likelihood uses
  (`SelectionSet.draw_selected`; flux and sphere-of-influence cuts act on m, host cuts on s_obs).
Candidates are drawn in batches until each sample holds its requested number of selected objects.

`simulate_population` does this for a configuration (simulate_config); `simulation.resample`
redraws the masses of a real catalogue, keeping its design.
"""

from dataclasses import replace
from typing import NamedTuple

import numpy as np

from .. import __version__
from ..background import comoving_volume_element, describe
from ..data.catalog import Catalog
from ..errors import ConfigError
from .massfunction import HostMassSampler, inverse_cdf_table
from ..model.likelihood import lever_arm
from ..model.mean import latent_mean
from ..seeding import child_seed, make_rng
from ..selection.compiled import SelectionSet
from ..model.truth import Truth, parse_truth
from .plan import SimConfig, parse_sim_config

_FIRST_BATCH = 4096
_MAX_BATCH = 2_000_000
#: At most this many candidates per sample; beyond, the selection is called absurdly tight.
MAX_CANDIDATES = 50_000_000
_CHECK_AFTER = 100_000  # candidates drawn before the projected total is checked against the cap


class SimulationResult(NamedTuple):
    """What `simulate_population` returns; unpacks as ``catalog, truth = ...``.

    ``truth`` is the JSON record written as truth.json: `Truth.to_dict` plus seed, cosmology,
    mass function and per-sample facts; `parse_truth` reads it back into a `Truth`."""

    catalog: Catalog
    truth: dict


class RedshiftSampler:
    """Redshifts uniform in comoving volume over [z_lo, z_hi]: inverse of the cumulative
    ∫ dV_c/dz dz (trapezoid on 4097 points of astropy's differential comoving volume)."""

    def __init__(self, cosmo, z_lo, z_hi, n_grid=4097):
        self.grid = np.linspace(z_lo, z_hi, n_grid)
        dvdz = comoving_volume_element(cosmo, self.grid)
        cumulative = np.concatenate([[0.0], np.cumsum(0.5 * (dvdz[1:] + dvdz[:-1]) * np.diff(self.grid))])
        self.cdf_grid = cumulative / cumulative[-1]
        self._inverse = inverse_cdf_table(self.cdf_grid, self.grid)

    def cdf(self, z):
        """Fraction of the comoving volume below z."""
        return np.interp(z, self.grid, self.cdf_grid)

    def draw(self, n, rng):
        """n redshifts from a numpy Generator."""
        return self._inverse(rng.random(n))


def simulate_population(sim_config: dict | SimConfig, seed=None) -> SimulationResult:
    """Simulate every sample of a configuration.

    Parameters
    ----------
    sim_config : dict
        Parsed TOML: ``seed``, ``[cosmology]`` (default Planck18), ``[mass_function]`` (default
        Baldry et al. 2012), ``[truth]`` and ``[[sample]]`` tables (full reference in
        `cosmogrow.simulation.plan`). Defaults: truth k = 0, alpha = 8.69, beta = 1,
        sigma_int = 0.28 dex, gamma = 0, s_pivot = 11, z_ref = 0, delta = {} (0 for every
        method), f_out = 0, sigma_out = 1 dex; per sample (name, n, z_range = [lo, hi] and method
        required) log_mbh_err = 0.1 / 0.2 / 0.4 dex for dynamical / reverberation / virial,
        log_mstar_err = 0.15 dex, log_mstar_min = 10.0, log_mstar_max = 12.5, no selection.
    seed : int, SeedSequence or Generator, optional
        Wins over the configuration's ``seed``; with neither, fresh entropy is drawn and recorded.
        Sample i draws from the stream ``child_seed(seed, i)``, independent of the other samples
        (a Generator is used for every sample in turn, and the recorded seed is None).

    Returns
    -------
    SimulationResult (catalog, truth)
        catalog : Catalog of every sample (ids ``<sample>-000001`` ...)
        truth : dict with the parameters (k, alpha, beta, sigma_int, gamma, s_pivot, z_ref,
        delta = {method: dex}, f_out, sigma_out) and ``seed``, ``cosmology``, ``mass_function``,
        ``samples`` (each sample's settings, candidates drawn and acceptance).

    Raises
    ------
    ConfigError
        A bad configuration, or a selection so tight that a sample would need more than
        `MAX_CANDIDATES` candidates.
    """
    return Simulator(sim_config).simulate(seed)


class Simulator:
    """A simulator configuration parsed once, with each sample's host-mass and redshift samplers
    built once: draws many mocks of one design (campaigns) without repeating that work.

    Parameters
    ----------
    sim_config : dict (parsed TOML, see `simulate_population`) or plan.SimConfig
    """

    def __init__(self, sim_config):
        self.config = sim_config if isinstance(sim_config, SimConfig) else parse_sim_config(sim_config)
        self._samplers = tuple(
            (HostMassSampler(self.config.mass_function, spec.log_mstar_min, spec.log_mstar_max),
             RedshiftSampler(self.config.cosmology, spec.z_lo, spec.z_hi))
            for spec in self.config.samples)

    @property
    def truth(self) -> Truth:
        """The configuration's own truth."""
        return self.config.truth

    def simulate(self, seed=None, truth: Truth | None = None) -> SimulationResult:
        """One mock of every sample (seeds and returns: `simulate_population`); `truth` replaces
        the configuration's."""
        config = self.config if truth is None else replace(self.config, truth=parse_truth(truth))
        if seed is None:
            seed = config.seed
        if seed is None:
            seed = int(np.random.SeedSequence().entropy)
        shared = seed if isinstance(seed, np.random.Generator) else None
        catalogs, infos = [], []
        for i, (spec, samplers) in enumerate(zip(config.samples, self._samplers)):
            rng = shared if shared is not None else make_rng(child_seed(seed, i))
            catalog, info = _simulate_sample(spec, config, samplers, rng)
            catalogs.append(catalog)
            infos.append(info)
        seed_record = seed.entropy if isinstance(seed, np.random.SeedSequence) else seed
        seed_record = None if shared is not None else seed_record
        record = {**config.truth.to_dict(), "seed": seed_record, "cosmology": describe(config.cosmology),
                  "mass_function": config.mass_function.to_dict(), "samples": infos,
                  "cosmogrow_version": __version__}
        return SimulationResult(Catalog.concat(catalogs), record)


def _simulate_sample(spec, config, samplers, rng):
    hosts, redshifts = samplers
    parts, n_have, n_tried = [], 0, 0
    while n_have < spec.n:
        rate = (n_have + 1.0) / (n_tried + 2.0) if n_tried else 1.0
        size = int(min(_MAX_BATCH, max(_FIRST_BATCH, 1.2 * (spec.n - n_have) / rate + 100)))
        batch = _draw_candidates(spec, config.truth, hosts, redshifts, rng, size)
        selection = SelectionSet.from_arrays({spec.name: spec.selection}, z=batch["z"],
                                             log_mstar=batch["log_mstar"], sample=spec.name,
                                             cosmo=config.cosmology)
        keep = selection.draw_selected(batch.pop("m_true"), batch["log_mbh"], rng)
        parts.append({key: value[keep] for key, value in batch.items()})
        n_have += int(keep.sum())
        n_tried += size
        projected = n_tried * spec.n / max(n_have, 1)
        if n_have < spec.n and (n_tried >= MAX_CANDIDATES
                                or (n_tried >= _CHECK_AFTER and projected > MAX_CANDIDATES)):
            raise ConfigError(f"sample '{spec.name}': selection acceptance {n_have / n_tried:.2g} after "
                              f"{n_tried} candidates; {spec.n} objects would need ~{projected:.2g} "
                              f"candidates (cap {MAX_CANDIDATES:.0e}); loosen the selection or change "
                              "the redshift or host-mass range")
    columns = {key: np.concatenate([p[key] for p in parts])[:spec.n] for key in parts[0]}
    n = spec.n
    catalog = Catalog(
        ids=np.array([f"{spec.name}-{i + 1:06d}" for i in range(n)], dtype=object), z=columns["z"],
        log_mbh=columns["log_mbh"], log_mbh_err=np.full(n, spec.log_mbh_err),
        log_mstar=columns["log_mstar"], log_mstar_err=np.full(n, spec.log_mstar_err),
        sample=_labels(n, spec.name), method=_labels(n, spec.method), host_type=_labels(n, spec.host_type),
        files=(f"simulated sample '{spec.name}'",))
    info = {**spec.to_dict(), "n_candidates": n_tried, "acceptance": n_have / n_tried}
    return catalog, info


def _labels(n, text):
    out = np.empty(n, dtype=object)
    out[:] = text
    return out


def _draw_candidates(spec, truth, hosts, redshifts, rng, size):
    """One batch of candidates before selection: z, m_true, log_mbh (observed), log_mstar (observed)."""
    s_true = hosts.draw(size, rng)
    z = redshifts.draw(size, rng)
    m_true = true_masses(truth, s_true, z, truth.scatter_of(spec.name), rng,
                          truth.host_offset_of(spec.host_type))
    m_obs = m_true + truth.offset_of(spec.method) + spec.log_mbh_err * rng.standard_normal(size)
    s_obs = s_true + spec.log_mstar_err * rng.standard_normal(size)
    return {"z": z, "m_true": m_true, "log_mbh": m_obs, "log_mstar": s_obs}


def true_masses(truth: Truth, s_true: np.ndarray, z: np.ndarray, sigma_int, rng: np.random.Generator,
                host_offset=0.0) -> np.ndarray:
    """True log M_BH at the observed epoch (log10 Msun): the shared latent mean plus a scatter draw.

    Parameters
    ----------
    truth : Truth
    s_true : ndarray, true host masses at the observed epoch (log10 Msun)
    z : ndarray, redshifts
    sigma_int : float or ndarray, intrinsic scatter (dex)
    rng : numpy Generator
    host_offset : float or ndarray, host-type shifts (dex)
    """
    x = lever_arm(z, truth.z_ref)
    scatter = np.asarray(sigma_int) * rng.standard_normal(len(z))
    if truth.f_out > 0:
        outlier = rng.random(len(z)) < truth.f_out
        scatter = scatter + outlier * truth.sigma_out * rng.standard_normal(len(z))
    # the host at the reference epoch, s + gamma x, so the coupling term is k itself
    return latent_mean(truth.alpha, truth.beta, truth.k, s_true + truth.gamma * x - truth.s_pivot, x,
                       host_offset=host_offset, scatter=scatter)
