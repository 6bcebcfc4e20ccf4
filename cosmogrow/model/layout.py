"""The parameter vector of the population model: names, positions, groups, bounds, conversions.

Every module that reads or writes a parameter vector asks a `ParameterLayout` where a parameter
lives instead of slicing by position or parsing names. The order is (docs/method.md#model)

    k, alpha, [beta], sigma_int (or sigma_int[<sample>] ...), delta[<method>] ...,
    delta_host[<host type>] ..., [f_out, sigma_out]

with offsets grouped by kind: mass methods ("method", a measurement offset of m_obs) and host
types ("host_type", a shift of the latent black-hole mass). Each group's zero point (its first
label) has no parameter.
"""

from dataclasses import dataclass, field

import numpy as np

from ..errors import ConfigError

#: Offset kinds: the Catalog column holding the labels -> the parameter-name prefix.
OFFSET_PREFIXES = {"method": "delta", "host_type": "delta_host"}


@dataclass(frozen=True)
class OffsetGroup:
    """Offsets of one kind of label.

    Parameters
    ----------
    kind : "method" or "host_type", also the Catalog column that holds the labels
    labels : tuple of str, every label of the data, the zero point first (empty: no group)
    """

    kind: str
    labels: tuple

    def __post_init__(self):
        if self.kind not in OFFSET_PREFIXES:
            raise ValueError(f"OffsetGroup: kind: expected one of {', '.join(OFFSET_PREFIXES)}, "
                             f"got {self.kind!r}")
        object.__setattr__(self, "labels", tuple(self.labels))

    @property
    def prefix(self) -> str:
        return OFFSET_PREFIXES[self.kind]

    @property
    def zero_point(self) -> str | None:
        """The label without an offset (None when the group is empty)."""
        return self.labels[0] if self.labels else None

    @property
    def free_labels(self) -> tuple:
        """Labels that carry an offset parameter, in parameter order."""
        return self.labels[1:]

    def name(self, label: str) -> str:
        """Parameter name of a label's offset, e.g. ``delta[virial]``."""
        return f"{self.prefix}[{label}]"


@dataclass(frozen=True)
class Offset:
    """One offset parameter: its group kind, label, name and position in the vector."""

    kind: str
    label: str
    name: str
    index: int
    zero_point: str


@dataclass(frozen=True)
class ParameterLayout:
    """Names and positions of the model's parameters.

    Parameters
    ----------
    relation : bool, beta is free ("relation" form) rather than fixed at 1 ("ratio" form)
    scatter_names : tuple of str, ("all",) for a shared intrinsic scatter, else the sample names
    offset_groups : tuple of OffsetGroup, in parameter order (methods, then host types)
    outliers : bool, the outlier mixture (f_out, sigma_out) is on

    Attributes
    ----------
    names : tuple of str, every parameter name in order
    ndim : int
    index_k, index_alpha : int; index_beta : int or None (ratio form)
    scatter, offsets, outlier : slice, the intrinsic scatters, all offsets, (f_out, sigma_out)
    """

    relation: bool
    scatter_names: tuple
    offset_groups: tuple = ()
    outliers: bool = False
    names: tuple = field(init=False)
    index_beta: int | None = field(init=False)
    scatter: slice = field(init=False)
    offsets: slice = field(init=False)
    outlier: slice = field(init=False)
    _group_slices: dict = field(init=False, repr=False)

    index_k = 0
    index_alpha = 1

    def __post_init__(self):
        if not self.scatter_names:
            raise ValueError("ParameterLayout: scatter_names must not be empty")
        object.__setattr__(self, "scatter_names", tuple(self.scatter_names))
        object.__setattr__(self, "offset_groups", tuple(self.offset_groups))
        names = ["k", "alpha"] + (["beta"] if self.relation else [])
        scatter = (["sigma_int"] if len(self.scatter_names) == 1
                   else [f"sigma_int[{s}]" for s in self.scatter_names])
        start = len(names)
        names += scatter
        groups = {}
        offset_start = len(names)
        for group in self.offset_groups:
            first = len(names)
            names += [group.name(label) for label in group.free_labels]
            groups[group.kind] = slice(first, len(names))
        offset_stop = len(names)
        names += ["f_out", "sigma_out"] if self.outliers else []
        object.__setattr__(self, "names", tuple(names))
        object.__setattr__(self, "index_beta", 2 if self.relation else None)
        object.__setattr__(self, "scatter", slice(start, start + len(scatter)))
        object.__setattr__(self, "offsets", slice(offset_start, offset_stop))
        object.__setattr__(self, "outlier", slice(offset_stop, len(names)))
        object.__setattr__(self, "_group_slices", groups)

    # ----- positions ------------------------------------------------------------------------
    @property
    def ndim(self) -> int:
        return len(self.names)

    @property
    def index_f_out(self) -> int | None:
        return self.outlier.start if self.outliers else None

    @property
    def index_sigma_out(self) -> int | None:
        return self.outlier.start + 1 if self.outliers else None

    @property
    def offset_indices(self) -> np.ndarray:
        """Positions of every offset parameter (methods, then host types)."""
        return np.arange(self.offsets.start, self.offsets.stop)

    def index(self, name: str) -> int:
        """Position of a parameter; ConfigError naming the valid names for an unknown one."""
        try:
            return self.names.index(name)
        except ValueError:
            raise ConfigError(f"unknown parameter {name!r}; expected one of {', '.join(self.names)}") from None

    def group(self, kind: str) -> OffsetGroup:
        """The offset group of a kind (an empty group when the model has none of that kind)."""
        for group in self.offset_groups:
            if group.kind == kind:
                return group
        return OffsetGroup(kind, ())

    def group_slice(self, kind: str) -> slice:
        """Positions of one group's offsets (an empty slice when it has none)."""
        return self._group_slices.get(kind, slice(self.offsets.stop, self.offsets.stop))

    def offset_entries(self) -> tuple:
        """Every offset parameter as an `Offset` (kind, label, name, index, zero point)."""
        out = []
        for group in self.offset_groups:
            first = self.group_slice(group.kind).start
            out += [Offset(kind=group.kind, label=label, name=group.name(label), index=first + j,
                           zero_point=group.zero_point)
                    for j, label in enumerate(group.free_labels)]
        return tuple(out)

    def per_object_offsets(self, theta: np.ndarray, kind: str, label_index: np.ndarray):
        """Offsets of every object for every walker, shape (n_walkers, N); 0 for the zero point.

        Parameters
        ----------
        theta : ndarray (n_walkers, ndim)
        kind : offset group kind
        label_index : ndarray of int (N,), each object's label position in the group (0: the
            zero point or no label)
        """
        return self.offset_table(theta, kind)[:, label_index]

    def offset_table(self, theta: np.ndarray, kind: str) -> np.ndarray:
        """Offsets of every label of a group for every walker, shape (n_walkers, n_labels), column 0
        (the zero point) 0."""
        columns = theta[:, self.group_slice(kind)]
        return np.concatenate([np.zeros((len(theta), 1)), columns], axis=1)

    # ----- bounds and conversions -------------------------------------------------------------
    def bounds(self, priors: dict) -> tuple:
        """Lower and upper ends of the uniform prior of every parameter (offsets: unbounded).

        Parameters
        ----------
        priors : dict, base name (k, alpha, beta, sigma_int, f_out, sigma_out) -> (low, high)
        """
        base = ["k", "alpha"] + (["beta"] if self.relation else [])
        base += ["sigma_int"] * (self.scatter.stop - self.scatter.start)
        base += [None] * (self.offsets.stop - self.offsets.start)
        base += ["f_out", "sigma_out"] if self.outliers else []
        pairs = [priors.get(name, (-np.inf, np.inf)) if name else (-np.inf, np.inf) for name in base]
        return np.array([p[0] for p in pairs], dtype=float), np.array([p[1] for p in pairs], dtype=float)

    def to_dict(self, theta) -> dict:
        """{name: float} of one parameter vector."""
        theta = np.asarray(theta, dtype=float)
        if theta.shape != (self.ndim,):
            raise ValueError(f"expected a vector of {self.ndim} parameters, got shape {theta.shape}")
        return dict(zip(self.names, theta.tolist()))

    def from_dict(self, values: dict) -> np.ndarray:
        """A parameter vector from {name: value}; every name must be given, no other."""
        missing = [name for name in self.names if name not in values]
        extra = sorted(set(values) - set(self.names))
        if missing or extra:
            what = f"missing {missing[0]!r}" if missing else f"unknown {extra[0]!r}"
            raise ConfigError(f"parameters: {what}; expected {', '.join(self.names)}")
        return np.array([float(values[name]) for name in self.names])

    def scatter_by_name(self, theta) -> dict:
        """{scatter name: sigma_int (dex)} of one parameter vector ("all" when shared)."""
        theta = np.asarray(theta, dtype=float)
        return dict(zip(self.scatter_names, theta[self.scatter].tolist()))

    def offsets_by_label(self, theta, kind: str) -> dict:
        """{label: offset (dex)} of one group, the zero point included at 0."""
        group = self.group(kind)
        if not group.labels:
            return {}
        values = np.asarray(theta, dtype=float)[self.group_slice(kind)].tolist()
        return {group.zero_point: 0.0, **dict(zip(group.free_labels, values))}
