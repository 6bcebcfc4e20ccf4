"""Stellar initial mass functions and the black-hole mass made per unit stellar mass formed.

An IMF here is a broken power law dN/dm ∝ m^-slope, continuous at its breaks, normalised to one
solar mass of stars formed between `m_low` and `m_high`. Integrals use scipy.integrate.quad.

eps_BH (black-hole mass per unit stellar mass formed) = (mass fraction formed in stars above the
minimum black-hole progenitor mass) × (remnant fraction: black-hole mass per unit progenitor mass).
"""

from dataclasses import dataclass

import numpy as np
from scipy import integrate

from ..errors import ConfigError

# Stars above ~20-25 Msun end as black holes (Nomoto et al., astro-ph/0306412, abstract).
DEFAULT_MIN_PROGENITOR = 20.0
# Black-hole mass per unit progenitor (ZAMS) mass. Common practice, order of magnitude [memory]:
# at near-solar metallicity winds limit black holes to ~10-15 Msun from ~25-40 Msun stars
# (Fryer & Kalogera 2001, ApJ 554, 548, abstract: maximum <~ 10-15 Msun), zero-metallicity stars
# leave up to ~40 Msun (Zhang, Woosley & Heger 2008, ApJ 679, 639, abstract). 0.3 sits between.
DEFAULT_REMNANT_FRACTION = 0.3


@dataclass(frozen=True)
class Imf:
    """A broken power-law initial mass function, dN/dm ∝ m^-slope on each segment.

    Attributes
    ----------
    name : str
    breaks : tuple of float, Msun, interior break masses (increasing; may be empty)
    slopes : tuple of float, power-law slope of each segment (len(breaks) + 1), dN/dm ∝ m^-slope
    m_low, m_high : float, Msun, mass range of stars formed
    reference : str
    """

    name: str
    breaks: tuple
    slopes: tuple
    m_low: float
    m_high: float
    reference: str = ""

    def __post_init__(self):
        if len(self.slopes) != len(self.breaks) + 1:
            raise ConfigError(f"IMF {self.name}: expected {len(self.breaks) + 1} slopes for "
                              f"{len(self.breaks)} breaks, got {len(self.slopes)}")
        if not 0 < self.m_low < self.m_high:
            raise ConfigError(f"IMF {self.name}: expected 0 < m_low < m_high, got {self.m_low}, {self.m_high}")
        if list(self.breaks) != sorted(self.breaks):
            raise ConfigError(f"IMF {self.name}: expected increasing break masses, got {self.breaks}")

    def _segment_coefficients(self):
        """Prefactors making dN/dm continuous at the breaks (first segment's prefactor 1)."""
        coeffs = [1.0]
        for i, m_break in enumerate(self.breaks):
            coeffs.append(coeffs[-1] * m_break ** (self.slopes[i + 1] - self.slopes[i]))
        return coeffs

    def _unnormalised(self, m):
        m = np.asarray(m, dtype=float)
        seg = np.searchsorted(np.asarray(self.breaks, dtype=float), m, side="right")
        coeffs = np.asarray(self._segment_coefficients())
        slopes = np.asarray(self.slopes, dtype=float)
        out = coeffs[seg] * m ** (-slopes[seg])
        return np.where((m >= self.m_low) & (m <= self.m_high), out, 0.0)

    def _integral(self, func, lower, upper):
        lower, upper = max(lower, self.m_low), min(upper, self.m_high)
        if upper <= lower:
            return 0.0
        points = [b for b in self.breaks if lower < b < upper]
        value, _ = integrate.quad(func, lower, upper, points=points or None, epsabs=0.0, epsrel=1e-11,
                                  limit=200)
        return value

    def _total_mass(self):
        return self._integral(lambda m: m * self._unnormalised(m), self.m_low, self.m_high)

    def dn_dm(self, m):
        """Number of stars per unit mass interval per solar mass formed, Msun^-2.

        Parameters
        ----------
        m : array_like, stellar (initial) mass, Msun
        """
        return self._unnormalised(m) / self._total_mass()

    def mass_fraction_above(self, m_min):
        """Fraction of the stellar mass formed in stars of initial mass above `m_min` (Msun)."""
        above = self._integral(lambda m: m * self._unnormalised(m), float(m_min), self.m_high)
        return above / self._total_mass()

    def number_per_mass(self, m_min=None):
        """Number of stars formed per solar mass formed, above `m_min` (Msun; None: all), Msun^-1."""
        lower = self.m_low if m_min is None else float(m_min)
        return self._integral(self._unnormalised, lower, self.m_high) / self._total_mass()

    def describe(self):
        """JSON-friendly description."""
        return {"name": self.name, "breaks_msun": list(self.breaks), "slopes": list(self.slopes),
                "m_low_msun": self.m_low, "m_high_msun": self.m_high, "reference": self.reference}


def salpeter(m_low=0.1, m_high=100.0):
    """Salpeter 1955 IMF, dN/dm ∝ m^-2.35, default 0.1-100 Msun."""
    return Imf("salpeter", (), (2.35,), float(m_low), float(m_high), "Salpeter 1955, ApJ 121, 161")


def kroupa(m_low=0.08, m_high=100.0):
    """Kroupa 2001 IMF: slopes 0.3 / 1.3 / 2.3 with breaks at 0.08 and 0.5 Msun; default 0.08-100 Msun."""
    return Imf("kroupa", (0.08, 0.5), (0.3, 1.3, 2.3), float(m_low), float(m_high),
               "Kroupa 2001, MNRAS 322, 231")


IMFS = {"salpeter": salpeter, "kroupa": kroupa}


def get_imf(name):
    """IMF by name: 'salpeter' or 'kroupa' (default mass ranges)."""
    if isinstance(name, Imf):
        return name
    if name not in IMFS:
        raise ConfigError(f"IMF: unknown name {name!r}; expected one of {', '.join(IMFS)}")
    return IMFS[name]()


def eps_bh(imf, min_progenitor=DEFAULT_MIN_PROGENITOR, remnant_fraction=DEFAULT_REMNANT_FRACTION):
    """Black-hole mass per unit stellar mass formed.

    Parameters
    ----------
    imf : Imf or str
    min_progenitor : float, Msun, least initial mass of a star that leaves a black hole
    remnant_fraction : float, black-hole mass per unit progenitor mass, in (0, 1]

    Returns
    -------
    float, dimensionless (Msun of black holes per Msun of stars formed)
    """
    imf = get_imf(imf)
    if not 0 < remnant_fraction <= 1:
        raise ConfigError(f"remnant fraction: expected a value in (0, 1], got {remnant_fraction}")
    if not imf.m_low <= min_progenitor < imf.m_high:
        raise ConfigError(f"minimum progenitor mass: expected a value in [{imf.m_low}, {imf.m_high}) Msun, "
                          f"got {min_progenitor}")
    return imf.mass_fraction_above(min_progenitor) * remnant_fraction
