"""Mocks of a real catalogue's design: its rows kept, its masses redrawn (docs/method.md#simulator).

`resample_hosts` is the mock of injection-recovery campaigns, null tests and the challenge. Each row
keeps its id, z, errors, sample, method and host type; the black-hole mass is redrawn from the
forward model of `simulation.population` and the row's selection applied by the same probits the
likelihood uses.

What happens to the host depends on how the fit treats it. A sample that is selected on black-hole
mass, fitted with calibrated host errors, has its parent (pre-selection) host distribution
N(mu_h, tau_h^2) estimated by the fit from the hosts that survived the selection
(`model.hostprior`): the hosts carry information about the relation there, so a mock that kept
them, although they were selected under another truth, would not be a draw from the model the fit
assumes, and the fit of such mocks is biased (on a design with a hard cut on the distant sample,
+0.08 in k at k = 0, 1 sigma at 2 x 1000 objects). In those samples the host is therefore redrawn
with the mass: s ~ N(mu_h, tau_h^2) from the truth's `host_priors`, s_obs = s + N(0, log_mstar_err²),
and the pair is selected together. Every other row keeps its observed host and draws its true host
from what the likelihood assumes given it.
"""

import numpy as np

from ..data.catalog import Catalog
from ..errors import ConfigError
from ..model.design import calibrated_hosts
from ..model.likelihood import lever_arm
from ..model.mean import latent_mean
from ..model.truth import parse_truth
from ..seeding import make_rng
from ..selection.compiled import SelectionSet
from .population import true_masses

HOST_ERROR_MODES = ("calibrated", "first_order", "fixed")
_MAX_ROUNDS = 30  # rejection rounds ...
_MAX_COPIES = 4096  # ... each drawing at most this many proposals per pending row
_MAX_BATCH = 2_000_000
# Rows still unselected after this many rejection rounds (acceptance below ~1/15) and subject to a
# single black-hole-mass cut are drawn exactly from the truncated distribution instead.
_EXACT_AFTER_ROUNDS = 4


def resample_hosts(catalog: Catalog, truth, selections_by_sample: dict, cosmo, seed=None, *,
                   host_errors: str = "calibrated") -> Catalog:
    """Redraw the black-hole masses of a catalogue (and the hosts of samples the fit re-estimates).

    Every row keeps its id, z, errors, sample, method and host type. The true host mass behind
    each row is drawn from the distribution the fit's likelihood assumes for it (`host_errors`, as
    the run configuration's model.host_errors):
    - "calibrated" (the fit's default): regression calibration, s ~ N(calibrated mean,
      calibrated error²) from `cosmogrow.model.design.calibrated_hosts`; in a sample named in the
      truth's `host_priors` (a selected sample whose parent hosts the fit estimates) the host is
      redrawn instead, s ~ N(mu_h, tau_h²) and s_obs = s + N(0, log_mstar_err²) (module note);
    - "first_order": s = log_mstar + N(0, log_mstar_err²) (a flat prior on the true host);
    - "fixed": s = log_mstar (host errors then enter only the likelihood).
    Then m follows the forward model of `simulation.population` and m_obs = m + delta +
    N(0, log_mbh_err²). With selection, each row is redrawn until it is selected (vectorised
    rejection over the rows still pending), so each row is a draw from p(m_obs | S, s_obs, z), or
    from p(m_obs, s_obs | S, z) where the host is redrawn. A row gets up to ~8e4 proposals; rows
    with a single black-hole-mass cut that are still pending after a few rounds are drawn exactly
    from the truncated distribution; rows accepted less often than ~1e-5 raise.

    Parameters
    ----------
    catalog : Catalog
    truth : Truth, or a [truth] table or truth record returned by `simulate_population`
    selections_by_sample : dict, sample name -> selection (tables or models); may be empty
    cosmo : astropy cosmology
    seed : int, SeedSequence or Generator, optional
    host_errors : "calibrated", "first_order" or "fixed"

    Returns
    -------
    Catalog

    Raises
    ------
    ConfigError
        An unknown `host_errors`, or rows that the selection essentially never accepts (e.g.
        failing a hard host-mass cut).
    """
    truth = parse_truth(truth)
    rng = make_rng(seed)
    selection = SelectionSet.compile(selections_by_sample or {}, catalog, cosmo)
    host_mean, host_err, redraw = _latent_hosts(catalog, host_errors, truth.host_priors)
    if not np.all(selection.host_pass | redraw):
        bad = np.flatnonzero(~(selection.host_pass | redraw))
        raise ConfigError(f"resample_hosts: {len(bad)} row(s) fail a host_mass_cut of their sample and "
                          f"can never be selected (e.g. id '{catalog.ids[bad[0]]}', sample "
                          f"'{catalog.sample[bad[0]]}', log_mstar {catalog.log_mstar[bad[0]]:.3f})")
    rows_of = _RowTerms(catalog, truth, host_mean, host_err)
    m_obs = np.full(len(catalog), np.nan)
    s_obs = np.array(catalog.log_mstar, dtype=float)
    pending = np.arange(len(catalog))
    for round_index in range(_MAX_ROUNDS):
        if round_index == _EXACT_AFTER_ROUNDS and truth.f_out == 0:
            exact = selection.single_mass_cut_rows(pending)
            exact = exact[~(redraw[exact] & selection.has_host_cut(exact))]
            if len(exact):
                m_obs[exact], s_true = _draw_truncated(rows_of, selection, exact, rng)
                move = exact[redraw[exact]]
                s_obs[move] = s_true[redraw[exact]] + catalog.log_mstar_err[move] * rng.standard_normal(len(move))
                pending = np.setdiff1d(pending, exact, assume_unique=True)
        if not len(pending):
            return catalog.replace(log_mbh=m_obs, log_mstar=s_obs)
        copies = int(min(2**round_index, _MAX_COPIES, max(1, _MAX_BATCH // len(pending))))
        rows = np.repeat(pending, copies)
        s_true = host_mean[rows] + host_err[rows] * rng.standard_normal(len(rows))
        s_draw = np.where(redraw[rows], s_true + catalog.log_mstar_err[rows] * rng.standard_normal(len(rows)),
                          s_obs[rows])
        m_true = true_masses(truth, s_true, catalog.z[rows], rows_of.sigma[rows], rng, rows_of.shift[rows])
        m_draw = m_true + rows_of.delta[rows] + catalog.log_mbh_err[rows] * rng.standard_normal(len(rows))
        keep = selection.draw_selected(m_true, m_draw, rng, rows=rows, log_mstar=s_draw)
        accepted_rows, first = np.unique(rows[keep], return_index=True)
        chosen = np.flatnonzero(keep)[first]
        m_obs[accepted_rows], s_obs[accepted_rows] = m_draw[chosen], s_draw[chosen]
        pending = np.setdiff1d(pending, accepted_rows, assume_unique=True)
        if not len(pending):
            return catalog.replace(log_mbh=m_obs, log_mstar=s_obs)
    names = sorted(set(catalog.sample[pending].tolist()))
    raise ConfigError(f"resample_hosts: {len(pending)} row(s) of sample(s) {', '.join(names)} were never "
                      f"selected in {_MAX_ROUNDS} rounds of redraws (e.g. id '{catalog.ids[pending[0]]}'); "
                      "the selection rejects them under this truth (check host-mass cuts and thresholds)")


class _RowTerms:
    """Per-row truth terms: scatter, method offset, host-type shift, and the true-host law."""

    def __init__(self, catalog, truth, host_mean, host_err):
        n = len(catalog)
        self.catalog, self.truth = catalog, truth
        self.host_mean, self.host_err = host_mean, host_err
        self.sigma, self.delta, self.shift = np.empty(n), np.empty(n), np.empty(n)
        for name in catalog.sample_names:
            self.sigma[catalog.sample == name] = truth.scatter_of(name)
        for method in catalog.method_names:
            self.delta[catalog.method == method] = truth.offset_of(method)
        for host_type in catalog.host_type_names:
            self.shift[catalog.host_type == host_type] = truth.host_offset_of(host_type)


def _draw_truncated(terms: _RowTerms, selection, rows, rng):
    """Exact draws of (m_obs, true host) given selection for rows with a single probit cut.

    The latent mass is Gaussian, m ~ N(mu, v) with the host uncertainty folded in; a probit cut on
    a Gaussian variable y (m, or m_obs = m + delta + e) keeps it when u = y - w eps >= m_lim, so
    u is drawn from its truncated normal and y | u from the conditional normal; for a cut on m,
    m_obs = m + delta + e afterwards. The true host s, jointly Gaussian with y (covariance
    beta tau², tau the host spread), is drawn from s | y. No rejection, so rows of tiny acceptance
    cost nothing extra.

    Returns
    -------
    m_obs, s_true : ndarrays over `rows`
    """
    from scipy import stats

    truth, catalog = terms.truth, terms.catalog
    x = lever_arm(catalog.z[rows], truth.z_ref)
    host_mean, host_var = terms.host_mean[rows], terms.host_err[rows] ** 2
    mu = latent_mean(truth.alpha, truth.beta, truth.k, host_mean + truth.gamma * x - truth.s_pivot,
                     x, host_offset=terms.shift[rows])
    var = terms.sigma[rows] ** 2 + truth.beta**2 * host_var
    err = catalog.log_mbh_err[rows]
    observed, lim, width = selection.single_mass_cut(rows)
    width2 = width**2
    centre = mu + np.where(observed, terms.delta[rows], 0.0)
    var_y = var + np.where(observed, err**2, 0.0)
    spread_u = np.sqrt(var_y + width2)
    low = (lim - centre) / spread_u
    u = centre + spread_u * stats.truncnorm.rvs(low, np.inf, random_state=rng)
    gain = var_y / (var_y + width2)
    y = centre + gain * (u - centre) + np.sqrt(var_y * (1 - gain)) * rng.standard_normal(len(rows))
    m_obs = np.where(observed, y, y + terms.delta[rows] + err * rng.standard_normal(len(rows)))
    slope = truth.beta * host_var / var_y
    s_true = host_mean + slope * (y - centre) + np.sqrt(np.clip(host_var - slope * truth.beta * host_var, 0, None)) \
        * rng.standard_normal(len(rows))
    return m_obs, s_true


def _latent_hosts(catalog, mode, host_priors=None):
    """Mean and spread (log10 Msun, dex) of each row's true host, and which rows redraw their host.

    With "calibrated", rows of samples named in `host_priors` ({sample: (mean, variance)}, the
    parent hosts of selected samples as the fit estimated them; a truth table's "host_priors")
    draw their true host from that parent distribution and their observed host with it (module
    note); the other rows draw it given their observed host.
    """
    if mode not in HOST_ERROR_MODES:
        raise ConfigError(f"resample_hosts: host_errors: expected one of {', '.join(HOST_ERROR_MODES)}, "
                          f"got {mode!r}")
    redraw = np.zeros(len(catalog), dtype=bool)
    if mode == "fixed":
        return np.asarray(catalog.log_mstar, dtype=float), np.zeros(len(catalog)), redraw
    mean, spread = calibrated_hosts(catalog, mode, host_priors)
    if mode == "calibrated":
        for name, (centre, variance) in (host_priors or {}).items():
            rows = catalog.sample == name
            mean[rows], spread[rows], redraw[rows] = centre, np.sqrt(variance), True
    return mean, spread, redraw
