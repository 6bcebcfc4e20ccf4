"""The plain Gaussian likelihood through weighted moments (docs/method.md#model), and helpers the
model shares with it."""

import numpy as np

LOG_2PI = np.log(2.0 * np.pi)
#: Catalogues from this size share the weighted sums of rows with equal weights (where the O(N)
#: work dominates the per-call overhead).
SHARED_SUMS_MIN_OBJECTS = 20_000


class GaussianMoments:
    """Fast exact evaluation of the plain Gaussian likelihood through weighted moments.

    Without selection or outliers the mean is linear in (alpha, beta, k, delta) and the weights
    1/V_i depend on (sigma_int, beta) only, so every walker's log likelihood follows from the
    weighted sums sum_i w_i F_i of fixed features F_i = (X_i X_i^T, X_i y_i, y_i^2): one matrix
    product over objects instead of a dozen element-wise passes.
    """

    def __init__(self, model):
        d = model.design
        layout = model.layout
        self.model = model
        dummies = offset_dummies(d)
        if model.relation:
            columns = [np.ones_like(d.x), d.s_centred + model.gamma * d.x, -d.x] + dummies
            self.offset = float(np.mean(d.m_obs))
            target = d.m_obs - self.offset
            self.linear_index = ([layout.index_alpha, layout.index_beta, layout.index_k]
                                 + list(layout.offset_indices))
        else:
            columns = [np.ones_like(d.x), -d.x] + dummies
            target = d.m_obs - d.s_centred - model.gamma * d.x
            self.offset = float(np.mean(target))
            target = target - self.offset
            self.linear_index = [layout.index_alpha, layout.index_k] + list(layout.offset_indices)
        design_matrix = np.column_stack(columns)
        p = design_matrix.shape[1]
        self.upper = np.triu_indices(p)
        self.p = p
        cross = (design_matrix[:, self.upper[0]] * design_matrix[:, self.upper[1]])
        self.features = np.column_stack([cross, design_matrix * target[:, None], target**2])
        self.n_obj = len(target)
        self._m_err2 = d.m_err**2
        self._s_err2 = d.s_err**2
        self._ev_ratio = self._m_err2 + self._s_err2
        groups = len(d.scatter_names)
        self._group_matrix = (np.eye(groups)[d.scatter_index].T.copy() if groups > 1 else None)
        self._multiplicity = np.where(self.upper[0] == self.upper[1], 1.0, 2.0)
        self._linear = np.array(self.linear_index, dtype=np.intp)
        weights = list(np.arange(layout.ndim)[layout.scatter])
        self._weight_columns = np.array(weights + ([layout.index_beta] if model.relation else []), dtype=np.intp)
        self._scratch = None

    def __getstate__(self):
        return {**self.__dict__, "_scratch": None}

    def _buffers(self, walkers):
        """Two (walkers, objects) arrays kept between calls. At 1e6 objects a fresh 128 MB
        temporary per call costs more in page faults and zeroing (system time) than the arithmetic."""
        if self._scratch is None or self._scratch[0].shape[0] < walkers:
            self._scratch = (np.empty((walkers, self.n_obj)), np.empty((walkers, self.n_obj)))
        return self._scratch[0][:walkers], self._scratch[1][:walkers]

    def log_likelihood(self, theta, batches=None):
        """Log likelihood of every row of theta; `batches`: see `CoupledGrowthModel.log_prob`.

        The per-object weights depend on the scatter (and beta) only: in a large catalogue, rows
        sharing them (the finite-difference points of a gradient or Hessian, which move one
        parameter at a time) share the O(N) work, done once per distinct weight vector. The sums
        then come from products over fewer rows, equal to round-off; below `SHARED_SUMS_MIN_OBJECTS`
        every row is computed as before, so small fits repeat their chains bit for bit."""
        if len(theta) > 2 and self.n_obj >= SHARED_SUMS_MIN_OBJECTS:
            _, first, inverse = np.unique(theta[:, self._weight_columns], axis=0, return_index=True,
                                          return_inverse=True)
            if len(first) < len(theta):
                log_det, sums = self._weighted_sums(theta[first], None)
                inverse = inverse.reshape(-1)
                return self._combine(theta, log_det[inverse], sums[inverse])
        return self._combine(theta, *self._weighted_sums(theta, batches))

    def _weighted_sums(self, theta, batches):
        """log det V and the weighted feature sums of each row, both O(N) per row."""
        model = self.model
        layout = model.layout
        var, tmp = self._buffers(theta.shape[0])
        sig2 = theta[:, layout.scatter] ** 2
        if self._group_matrix is None:
            sig2_obj = sig2
        elif batches is None or len(batches) == 1:
            sig2_obj = np.matmul(sig2, self._group_matrix, out=tmp)
        else:
            sig2_obj = product(sig2, self._group_matrix, batches)
        if model.relation:
            np.add(sig2_obj, self._m_err2, out=var)
            var += np.multiply(column(theta, layout.index_beta) ** 2, self._s_err2, out=tmp)
        else:
            np.add(sig2_obj, self._ev_ratio, out=var)
        log_det = np.log(var, out=tmp).sum(axis=1)
        return log_det, product(np.reciprocal(var, out=var), self.features, batches)

    def _combine(self, theta, log_det, sums):
        """The log likelihood of each row from its weighted sums and its linear parameters."""
        p = self.p
        n_cross = len(self.upper[0])
        lin = theta.take(self._linear, axis=1)
        lin[:, 0] -= self.offset
        # lin^T Q lin with Q assembled from its upper triangle: sum_c sums_c * (lin lin^T)[c] * mult_c
        outer = lin[:, self.upper[0]] * lin[:, self.upper[1]]
        quad = (sums[:, :n_cross] * outer * self._multiplicity).sum(axis=1)
        cross_y = (lin * sums[:, n_cross:n_cross + p]).sum(axis=1)
        chi2 = sums[:, -1] - 2 * cross_y + quad
        return -0.5 * (chi2 + log_det + self.n_obj * LOG_2PI)


def offset_dummies(design):
    """Indicator columns of every offset parameter (methods, then host types), as in the layout."""
    out = [(design.method_index == j).astype(float) for j in range(1, len(design.method_names))]
    out += [(design.host_index == j).astype(float) for j in range(1, len(design.host_type_names))]
    return out


def split(array, sizes):
    """`array` cut along its first axis into consecutive pieces of `sizes` rows."""
    return np.split(array, np.cumsum(sizes)[:-1])


def product(a, b, batches):
    """a @ b; with `batches`, computed batch by batch of rows of `a` (each a fresh array), so that
    every row comes out as in a separate product of its batch alone (BLAS may sum in another order
    for another number of rows)."""
    if batches is None or len(batches) == 1:
        return a @ b
    edges = np.concatenate([[0], np.cumsum(batches)]).tolist()
    return np.concatenate([a[start:stop].copy() @ b for start, stop in zip(edges[:-1], edges[1:])])


def column(theta, index):
    """Column `index` of a (n_walkers, ndim) array, kept two-dimensional for broadcasting."""
    return theta[:, index:index + 1]
