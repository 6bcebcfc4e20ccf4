"""Small synthetic catalogues written for the tests (independent of cosmogrow.simulate).

Truth: m_ref = ALPHA + beta (s - 11) + N(0, SIGMA^2); m = m_ref - k log10(1+z);
observed with Gaussian errors. Hosts s ~ N(11, 0.3^2).
"""

import numpy as np

from cosmogrow.data.catalog import Catalog

ALPHA = 8.5
SIGMA = 0.3


def mock_catalog(rng, k, *, beta=1.0, samples=((0.02, 60, "dynamical"), (1.0, 60, "dynamical")),
                 m_err=0.1, s_err=0.1, offsets=None, z_spread=0.1):
    """A catalogue with one sample per (median z, n, method) entry."""
    parts = []
    for j, (z_mid, n, method) in enumerate(samples):
        z = np.clip(z_mid + z_spread * z_mid * rng.uniform(-1, 1, n), 0.0, None)
        s = rng.normal(11.0, 0.3, n)
        m = ALPHA + beta * (s - 11.0) + rng.normal(0, SIGMA, n) - k * np.log10(1 + z)
        m_obs = m + (offsets or {}).get(method, 0.0) + rng.normal(0, m_err, n)
        s_obs = s + rng.normal(0, s_err, n)
        parts.append(Catalog.from_columns(
            z=z, log_mbh=m_obs, log_mbh_err=np.full(n, m_err), log_mstar=s_obs,
            log_mstar_err=np.full(n, s_err), sample=f"S{j}", method=method,
            ids=[f"S{j}-{i}" for i in range(n)]))
    return Catalog.concat(parts)


def write_csv(catalog, path):
    catalog.to_dataframe().to_csv(path, index=False)
    return path


def write_samples(catalog, folder, names):
    """Write sample S<j> of `catalog` to folder/names[j] (CSV); returns the paths."""
    return [write_csv(catalog.subset(catalog.sample == f"S{j}"), folder / name) for j, name in enumerate(names)]
