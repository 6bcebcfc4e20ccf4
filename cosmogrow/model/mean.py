"""The mean of the latent black-hole mass: the one forward model of the likelihood and the simulator.

  m = alpha + beta (s - s_pivot) + delta_host + eps - (k - beta gamma) x     (docs/method.md#model)

with s the host mass at the observed epoch, x = log10[(1+z)/(1+z_ref)] and eps the intrinsic
scatter. The likelihood calls it with s - s_pivot and k_eff = k - beta gamma; the simulator with the
host at the reference epoch, s + gamma x - s_pivot, and k: the same quantity, each written in the
order that keeps its own arithmetic unchanged.
"""

import numpy as np


def latent_mean(alpha, beta, k_eff, s_centred, x, *, host_offset=None, scatter=None):
    """alpha + beta s_centred (+ host_offset) (+ scatter) - k_eff x, broadcast over the inputs.

    Parameters
    ----------
    alpha : float or array, log10 M_BH at the pivot host mass at z_ref (log10 Msun)
    beta : float or array, slope in host mass (1 in the ratio form)
    k_eff : float or array, coupling exponent minus beta gamma (or k with a reference-epoch host)
    s_centred : array, host mass minus the pivot (dex)
    x : array, lever arm log10[(1+z)/(1+z_ref)]
    host_offset : float or array, optional, host-type shift of the latent mass (dex)
    scatter : array, optional, a draw of the intrinsic scatter (dex), for the simulator

    Returns
    -------
    ndarray, log10 Msun: the mean latent mass (a draw of it when `scatter` is given).
    """
    mean = alpha + beta * s_centred
    if host_offset is not None:
        mean = mean + host_offset
    if scatter is not None:
        mean = mean + scatter
    return mean - k_eff * np.asarray(x)
