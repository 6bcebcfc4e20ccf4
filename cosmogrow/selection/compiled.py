"""Selection compiled for one catalogue: the likelihood's correction and the simulator's draws.

The latent (intrinsic) mass of object i at its observed epoch is m ~ N(mu_true, var_lat) and the
catalogue holds m_obs = m + delta + N(0, m_err²). Each selection cut is a probit (selection_physics);
on the "intrinsic" mass it is Φ((m - m_lim)/w), on the "observed" mass Φ((m_obs - m_lim)/w).
`SelectionSet.log_correction` returns, per object, log[p(m_obs | S, ...) / N(m_obs; mu_true + delta,
var_lat + m_err²)] (docs/method.md#selection): the numerator's probit factor minus log P(S | s, z).

Several cuts multiply. Hard cuts (w = 0) on the same mass merge exactly into one at the largest
threshold. One remaining cut has the closed forms of docs/method.md#selection. Two remaining cuts are exact too:
each cut is a hard cut on a Gaussian variable (m - w ε or m_obs - w ε), so P(S) is a bivariate
normal orthant probability (probit.log_upper_orthant), with covariance var_lat between two cuts
that share only m and var_lat + m_err² between two observed cuts; the numerator is the same with
m | m_obs ~ N(mu_p, v). Observed-mass factors of the numerator do not depend on the parameters
and are dropped. More than two cuts left after merging is refused (ConfigError).
Host-mass cuts act on the observed host mass, which the fit conditions on: no likelihood term.
"""

from dataclasses import dataclass

import numpy as np

from ..errors import ConfigError
from ..seeding import make_rng
from .terms import BoundCorrection, GroupTerms, pick
from .physics import (  # noqa: F401  (re-exported API)
    SELECTION_KINDS, FluxLimit, HostMassCut, MassCut, SphereOfInfluence, build_selection,
    describe_selection)

_NONE, _INTRINSIC, _OBSERVED, _HOST = 0, 1, 2, 3
_ON_CODE = {"intrinsic": _INTRINSIC, "observed": _OBSERVED, "host": _HOST}


@dataclass(frozen=True)
class _Group:
    """Objects sharing one structure of effective cuts: "i", "o", "ii", "io" or "oo"."""

    kind: str
    rows: object  # slice(None) when the group is the whole catalogue, else an index array
    lim: tuple  # per cut: threshold per object, log10 Msun
    w2: tuple  # per cut: width² per object, dex²


class SelectionSet:
    """The selection of every sample of one catalogue, with thresholds precomputed per object.

    Build it with `SelectionSet.compile(selections_by_sample, catalog, cosmo)`.

    Attributes
    ----------
    has_selection : bool, any sample has a selection model (host-mass cuts included)
    corrects_likelihood : bool, `log_correction` is not identically zero
    rows_failing_hard_cuts : ndarray of int, catalogue rows that fail a hard cut on the observed
        black-hole or host mass (such rows cannot belong to the selected sample); `compile` only
    host_pass : ndarray of bool, rows that pass every host-mass cut (these cuts are hard)
    """

    def __init__(self, *, n_rows, samples, slots, log_mstar, groups, failing):
        self.n_rows = n_rows
        self._samples = samples  # name -> (models, rows)
        self._slot_on, self._slot_lim, self._slot_width = slots
        self._log_mstar = log_mstar
        self._groups = groups
        # each row's group (-1: none) and its position within the group's arrays
        self._row_group = np.full(n_rows, -1)
        self._row_position = np.zeros(n_rows, dtype=np.intp)
        for i, group in enumerate(groups):
            index = np.arange(n_rows) if isinstance(group.rows, slice) else group.rows
            self._row_group[index] = i
            self._row_position[index] = np.arange(len(index))
        self.rows_failing_hard_cuts = failing
        host = (self._slot_on == _HOST) & (log_mstar[None, :] < self._slot_lim)
        self.host_pass = ~np.any(host, axis=0)

    @classmethod
    def compile(cls, selections_by_sample, catalog, cosmo):
        """Precompute every object's thresholds.

        Parameters
        ----------
        selections_by_sample : dict, sample name -> selection (a TOML table, a list of them, or
            models from `build_selection`); samples not listed have no selection
        catalog : Catalog
        cosmo : astropy cosmology (for d_L and D_A)

        Raises
        ------
        ConfigError
            A sample name absent from the catalogue, a bad selection table, or more than two cuts
            on the black-hole mass left after merging hard cuts.
        """
        out = cls.from_arrays(selections_by_sample, z=catalog.z, log_mstar=catalog.log_mstar,
                              sample=catalog.sample, cosmo=cosmo)
        on, lim, width = out._slot_on, out._slot_lim, out._slot_width
        log_mbh = np.asarray(catalog.log_mbh, dtype=float)[None, :]
        fails = (width == 0) & (((on == _OBSERVED) & (log_mbh < lim))
                                | ((on == _HOST) & (out._log_mstar[None, :] < lim)))
        out.rows_failing_hard_cuts = np.flatnonzero(np.any(fails, axis=0))
        return out

    @classmethod
    def from_arrays(cls, selections_by_sample, *, z, log_mstar, sample, cosmo):
        """Like `compile`, from arrays: z, log_mstar (observed host mass, log10 Msun) and sample
        (labels, or one string for every row)."""
        z = np.asarray(z, dtype=float)
        n = len(z)
        log_mstar = np.asarray(log_mstar, dtype=float)
        single = isinstance(sample, str)
        labels = None if single else np.asarray(sample)
        selections = dict(selections_by_sample or {})
        present = (sample,) if single else tuple(dict.fromkeys(labels.tolist()))
        samples = {}
        for name, spec in selections.items():
            where = f"sample '{name}'"
            models = build_selection(spec, where=where)
            if models and name not in present:
                raise ConfigError(f"{where}: a selection is given but the catalogue has no such "
                                  f"sample; samples: {', '.join(map(str, present))}")
            if models:
                rows = slice(None) if single else np.flatnonzero(labels == name)
                samples[name] = (models, rows)
        n_slots = max((len(models) for models, _ in samples.values()), default=0)
        on = np.zeros((n_slots, n), dtype=np.int8)
        lim = np.full((n_slots, n), -np.inf)
        width = np.zeros((n_slots, n))
        pending = {}
        for name, (models, rows) in samples.items():
            cuts = []
            for j, model in enumerate(models):
                on[j, rows] = _ON_CODE[model.on]
                if model.on == "host":
                    lim[j, rows] = model.log_mstar_min
                    continue
                m_lim, w = model.threshold(z[rows], log_mstar[rows], cosmo)
                lim[j, rows], width[j, rows] = m_lim, w
                cuts.append((model.on, lim[j, rows], width[j, rows]))
            kind, cut_lim, cut_w2 = _effective_cuts(cuts, name)
            if kind:
                pending.setdefault(kind, []).append((rows, cut_lim, cut_w2))
        groups = tuple(_merge_groups(kind, parts, n) for kind, parts in pending.items())
        return cls(n_rows=n, samples=samples, slots=(on, lim, width), log_mstar=log_mstar,
                   groups=groups, failing=np.zeros(0, dtype=int))

    @property
    def has_selection(self):
        return bool(self._samples)

    @property
    def corrects_likelihood(self):
        return bool(self._groups)

    def log_correction(self, mu_true, delta, var_lat, m_obs, m_err):
        """log[p(m_obs | S, s, z) / N(m_obs; mu_true + delta, var_lat + m_err²)] per object.

        Parameters
        ----------
        mu_true : array_like, mean latent log M_BH at the observed epoch (log10 Msun), e.g.
            shape (n_walkers, N); objects on the last axis
        delta : array_like, mass-method offset of each object (dex), (N,) or (n_walkers, N)
        var_lat : array_like, variance of the latent mass given the host (dex²)
        m_obs : array_like (N,), catalogue log M_BH
        m_err : array_like (N,), its error (dex)

        Returns
        -------
        ndarray of the broadcast shape (objects last, N = catalogue rows); 0 for objects whose
        sample has no black-hole-mass cut.
        """
        shape = np.broadcast_shapes(*(np.shape(a) for a in (mu_true, delta, var_lat, m_obs, m_err)),
                                    (self.n_rows,))
        out = np.zeros(shape)
        for group in self._groups:
            rows = group.rows
            terms = GroupTerms(group.kind, group.lim, group.w2, pick(m_obs, rows), pick(m_err, rows) ** 2)
            part = np.empty(shape[:-1] + (len(group.lim[0]),))
            out[..., rows] = terms.write(pick(mu_true, rows), pick(delta, rows), pick(var_lat, rows), part)
        return out

    def bind(self, m_obs, m_err, latent=None) -> BoundCorrection:
        """The correction bound to fixed data (m_obs, m_err: arrays (N,), log10 Msun and dex), with
        every parameter-free quantity precomputed: `BoundCorrection(mu, delta, var)` on its
        `rows` equals `log_correction(...)[..., rows]`, bit for bit. `latent`: the per-object
        features of an affine latent mass (see `BoundCorrection.from_coefficients`), optional."""
        return BoundCorrection(self._groups, m_obs, m_err, self.n_rows, latent=latent)

    def log_probability(self, mu_true, delta, var_lat, m_err, rows=None):
        """log P(S | s, z) from the black-hole-mass cuts alone (the likelihood's normaliser).

        With `rows` (catalogue row indices), the inputs hold those rows on their last axis and so
        does the result; else every row."""
        n = self.n_rows if rows is None else len(rows)
        shape = np.broadcast_shapes(*(np.shape(a) for a in (mu_true, delta, var_lat, m_err)), (n,))
        out = np.zeros(shape)
        for i, group in enumerate(self._groups):
            lim, w2, where = group.lim, group.w2, group.rows
            if rows is not None:
                where = np.flatnonzero(self._row_group[rows] == i)
                at = self._row_position[np.asarray(rows)[where]]
                lim, w2 = tuple(a.take(at) for a in lim), tuple(a.take(at) for a in w2)
            terms = GroupTerms(group.kind, lim, w2, 0.0, pick(m_err, where) ** 2)
            _, norm = terms(pick(mu_true, where), pick(delta, where), pick(var_lat, where), numerator=False)
            out[..., where] = norm
        return out

    def probability(self, mu_true, delta, var_lat, m_err):
        """P(S | s, z): `log_probability`, times 0 for objects failing a host-mass cut."""
        return np.exp(self.log_probability(mu_true, delta, var_lat, m_err)) * self.host_pass

    def draw_selected(self, m_true, m_obs, rng=None, *, rows=None, log_mstar=None):
        """Apply every cut by random draws with the same probits.

        Parameters
        ----------
        m_true, m_obs : array_like (n,), intrinsic and observed log M_BH (log10 Msun) of the
            catalogue rows `rows` (all rows when None)
        rng : seed or numpy Generator
        rows : array of int, optional
        log_mstar : array_like (n,), optional; observed host masses to apply host-mass cuts to
            (default: the compiled rows' own; black-hole-mass thresholds depend on z only)

        Returns
        -------
        ndarray of bool (n,): selected.
        """
        rng = make_rng(rng)
        m_true = np.asarray(m_true, dtype=float)
        m_obs = np.asarray(m_obs, dtype=float)
        pick = slice(None) if rows is None else np.asarray(rows)
        host = self._log_mstar[pick] if log_mstar is None else np.asarray(log_mstar, dtype=float)
        keep = np.ones(m_true.shape, dtype=bool)
        for on, lim, width in zip(self._slot_on, self._slot_lim, self._slot_width):
            on, lim, width = on[pick], lim[pick], width[pick]
            value = np.where(on == _INTRINSIC, m_true, np.where(on == _OBSERVED, m_obs, host))
            noise = rng.standard_normal(m_true.shape)
            keep &= (on == _NONE) | (value - width * noise >= lim)
        return keep

    def has_host_cut(self, rows) -> np.ndarray:
        """Whether each row of `rows` (catalogue row indices) has a host-mass cut."""
        return np.any(self._slot_on[:, np.asarray(rows)] == _HOST, axis=0)

    def single_mass_cut_rows(self, rows) -> np.ndarray:
        """The rows (of `rows`, catalogue row indices) whose selection is exactly one probit cut
        on the black-hole mass (intrinsic or observed); host-mass cuts do not count."""
        rows = np.asarray(rows)
        on = self._slot_on[:, rows]
        mass_cuts = np.sum((on == _INTRINSIC) | (on == _OBSERVED), axis=0)
        return rows[mass_cuts == 1]

    def single_mass_cut(self, rows) -> tuple:
        """The one black-hole-mass cut of each row of `rows` (see `single_mass_cut_rows`).

        Returns
        -------
        on_observed : ndarray of bool, the cut acts on the observed (not the latent) mass
        threshold : ndarray, m_lim (log10 Msun)
        width : ndarray, probit width w (dex)
        """
        rows = np.asarray(rows)
        on = self._slot_on[:, rows]
        slot = np.argmax((on == _INTRINSIC) | (on == _OBSERVED), axis=0)
        cols = np.arange(len(rows))
        return (on[slot, cols] == _OBSERVED, self._slot_lim[:, rows][slot, cols],
                self._slot_width[:, rows][slot, cols])

    def describe(self):
        """JSON-friendly description: per sample, its models (`to_dict`, which `build_selection`
        reads back), the mass each acts on, the range of its thresholds (log10 Msun; log_mstar_min
        for host cuts) and its probit width (dex)."""
        out = []
        for name, (models, rows) in self._samples.items():
            cuts = []
            for j, model in enumerate(models):
                lim, width = self._slot_lim[j, rows], self._slot_width[j, rows]
                cuts.append({**model.to_dict(), "on": model.on, "threshold_min": float(np.min(lim)),
                             "threshold_max": float(np.max(lim)), "probit_width": float(np.max(width))})
            n_rows = self.n_rows if isinstance(rows, slice) else len(rows)
            out.append({"sample": name, "n_rows": int(n_rows), "selection": cuts})
        return out


def _effective_cuts(cuts, sample):
    """Merge hard cuts on the same mass (largest threshold); intrinsic cuts first."""
    merged = []
    for on in ("intrinsic", "observed"):
        hard = [lim for o, lim, w in cuts if o == on and not np.any(w)]
        soft = [(lim, w) for o, lim, w in cuts if o == on and np.any(w)]
        if hard:
            soft.append((np.maximum.reduce(hard), np.zeros_like(hard[0])))
        merged += [(on[0], lim, w) for lim, w in soft]
    if len(merged) > 2:
        raise ConfigError(f"sample '{sample}': {len(merged)} cuts act on the black-hole mass after "
                          "merging hard cuts on the same mass; at most two are supported")
    kind = "".join(code for code, _, _ in merged)
    return kind, tuple(lim for _, lim, _ in merged), tuple(w**2 for _, _, w in merged)


def _merge_groups(kind, parts, n):
    if len(parts) == 1 and isinstance(parts[0][0], slice):
        return _Group(kind=kind, rows=slice(None), lim=parts[0][1], w2=parts[0][2])
    rows = np.concatenate([p[0] for p in parts])
    lim = tuple(np.concatenate([p[1][j] for p in parts]) for j in range(len(kind)))
    w2 = tuple(np.concatenate([p[2][j] for p in parts]) for j in range(len(kind)))
    if len(rows) == n and np.array_equal(rows, np.arange(n)):
        rows = slice(None)
    return _Group(kind=kind, rows=rows, lim=lim, w2=w2)
