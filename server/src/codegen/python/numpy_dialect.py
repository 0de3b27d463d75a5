# The NumPy dialect of generated Python code: every array operation the model kernels and the
# grid runtime use, on float64 NumPy arrays. (The PyTorch dialect offers the same names on
# tensors.) phi1 and expdd are the divided differences of exp of Saltus's step maps, the same
# algorithm as server/src/symbolic/expdd.ts.
import math

import numpy as np

_TAYLOR_TERMS = 24
_SERIES_TERMS = 20
_SCALAR_LIMIT = 32
_FACT = [float(math.factorial(n)) for n in range(60)]


def _phi1_scalar(z):
    if z != z:
        return z
    if z == -math.inf:
        return 0.0
    if z == math.inf:
        return z
    if abs(z) < 1e-5:
        return 1 + z / 2 + z * z / 6
    return math.expm1(z) / z


def _phik_scalar(k, z):
    if z != z:
        return z
    if z == -math.inf:
        return 0.0
    if abs(z) < 1:
        acc = 0.0
        for j in range(_SERIES_TERMS, -1, -1):
            acc = acc * z + 1.0 / _FACT[j + k]
        return acc
    v = math.exp(z)
    for j in range(k):
        v = (v - 1.0 / _FACT[j]) / z
    return v


def _expdd_scalar(x):
    """e[x0..xm] for floats: the algorithm of server/src/symbolic/expdd.ts, line for line."""
    m = len(x) - 1
    if any(v != v for v in x):
        return math.nan
    if m == 0:
        return math.exp(x[0])
    c = max(x)
    if c == math.inf:
        return math.inf
    if c == -math.inf:
        return 0.0
    if m == 1:
        return math.exp(c) * _phi1_scalar(min(x) - c)
    if all(v == 0 for v in x[1:]):
        return _phik_scalar(m, x[0])
    y = [v - c for v in x]
    lo = min(y)
    if lo == -math.inf:
        return 0.0
    if -lo <= 1:
        mean = sum(y) / len(y)
        d = [v - mean for v in y]
        h = [1.0] + [0.0] * _TAYLOR_TERMS
        for v in d:
            for j in range(1, _TAYLOR_TERMS + 1):
                h[j] = h[j] + v * h[j - 1]
        fact = _FACT[m]
        total = 0.0
        previous = math.inf
        for j in range(_TAYLOR_TERMS + 1):
            term = h[j] / fact
            total += term
            fact *= j + m + 1
            if abs(term) <= 1e-17 * abs(total) and abs(previous) <= 1e-17 * abs(total):
                break
            previous = term
        return math.exp(c) * math.exp(mean) * total
    return math.exp(c) * float(_Dialect._matrix_form(None, [np.float64(v) for v in y], np.float64(-lo)))


class _Dialect:
    float64 = staticmethod(np.float64)
    exp = staticmethod(np.exp)
    log = staticmethod(np.log)
    sqrt = staticmethod(np.sqrt)
    tanh = staticmethod(np.tanh)
    abs = staticmethod(np.abs)
    power = staticmethod(np.power)
    minimum = staticmethod(np.minimum)
    maximum = staticmethod(np.maximum)
    where = staticmethod(np.where)
    isfinite = staticmethod(np.isfinite)

    def array(self, a):
        return np.array(a, dtype=np.float64)

    def array_int(self, a):
        return np.asarray(a, dtype=np.int64)

    def scalar(self, v):
        return float(v)

    def full(self, shape, v):
        return np.full(shape, v, dtype=np.float64)

    def full_int(self, shape, v):
        return np.full(shape, v, dtype=np.int64)

    def zeros_bool(self, shape):
        return np.zeros(shape, dtype=bool)

    def ones_bool(self, shape):
        return np.ones(shape, dtype=bool)

    def zeros_like(self, a):
        return np.zeros(np.shape(a), dtype=np.float64)

    def copy(self, a):
        return np.array(a, copy=True)

    def all(self, a):
        return bool(np.all(a))

    def any(self, a):
        return bool(np.any(a))

    def nonzero(self, m):
        return np.nonzero(m)

    def nonzero1(self, m):
        return np.nonzero(m)[0]

    def arange(self, n):
        return np.arange(n)

    def gather_rows(self, a, idx):
        return a[np.arange(a.shape[0]), idx]

    def clamp_int(self, a, hi):
        return np.minimum(a, hi)

    def min_last(self, a):
        i = np.argmin(a, axis=1)
        return a[np.arange(a.shape[0]), i], i

    def max_last(self, a):
        return np.max(a, axis=-1)

    def sum_last(self, a):
        return np.sum(a, axis=-1)

    def sum(self, a):
        return float(np.sum(a))

    def max_first(self, a):
        return np.max(a, axis=0)

    def argmax_first(self, a):
        return np.argmax(a, axis=0)

    def onehot(self, labels, n):
        o = np.zeros((len(labels), n))
        o[np.arange(len(labels)), labels] = 1.0
        return o

    def tolist(self, a):
        return np.asarray(a).tolist()

    def search(self, sorted_values, values):
        return np.searchsorted(sorted_values, values)

    def index_add(self, a, idx, v):
        out = np.array(a, dtype=np.float64, copy=True)
        np.add.at(out, idx, v)
        return out

    def repeat_rows(self, a, n):
        return np.repeat(a, n)

    def tile_cols(self, n, k):
        return np.tile(np.arange(n), k)

    def transpose(self, a):
        return np.transpose(a)

    def scatter_cols(self, gw, src, lw):
        out = np.array(gw, copy=True)
        np.add.at(out.T, src, lw)
        return out

    def flatten(self, a):
        return np.reshape(a, -1)

    def reshape(self, a, shape):
        return np.reshape(a, shape)

    def to_float(self, a):
        return float(a)

    def phi1(self, z):
        """phi1(z) = (e^z - 1)/z: expm1 without cancellation, its series near 0."""
        z = np.asarray(z, dtype=np.float64)
        small = np.abs(z) < 1e-5
        with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
            value = np.where(small, 1 + z / 2 + z * z / 6, np.expm1(z) / np.where(small, 1.0, z))
            return np.where(np.isposinf(z), z, np.where(np.isneginf(z), 0.0, value))

    def phik(self, k, z):
        """phi_k(z) = e[z, 0, ..., 0] (k zeros): Horner's form of sum_j z^j / (j + k)! where |z| < 1,
        else phi_0 = e^z and phi_{j+1} = (phi_j - 1/j!) / z (as symbolic/expdd.ts)."""
        z = np.asarray(z, dtype=np.float64)
        with np.errstate(invalid="ignore", over="ignore", under="ignore", divide="ignore"):
            acc = np.zeros_like(z)
            for j in range(_SERIES_TERMS, -1, -1):
                acc = acc * z + 1.0 / math.factorial(j + k)
            big = np.exp(z)
            for j in range(k):
                big = (big - 1.0 / math.factorial(j)) / z
            out = np.where(np.abs(z) < 1, acc, big)
            return np.where(np.isneginf(z), 0.0, out)

    def expdd(self, *nodes):
        """The divided difference of exp at the nodes (per element)."""
        arrays = [np.asarray(v, dtype=np.float64) for v in nodes]
        shape = np.broadcast_shapes(*[a.shape for a in arrays])
        size = int(np.prod(shape)) if shape else 1
        if size <= _SCALAR_LIMIT:
            # few elements: the scalar algorithm element by element costs less than array calls
            flat = [np.broadcast_to(a, shape).ravel().tolist() for a in arrays]
            out = [_expdd_scalar([f[i] for f in flat]) for i in range(size)]
            return np.array(out, dtype=np.float64).reshape(shape) if shape else np.float64(out[0])
        if len(nodes) > 2 and all(isinstance(v, (int, float)) and v == 0 for v in nodes[1:]):
            return self.phik(len(nodes) - 1, nodes[0])
        x = np.broadcast_arrays(*arrays)
        m = len(x) - 1
        if m == 0:
            return np.exp(x[0])
        c = x[0]
        for v in x[1:]:
            c = np.maximum(c, v)
        with np.errstate(invalid="ignore", over="ignore", under="ignore", divide="ignore"):
            ec = np.exp(c)
            if m == 1:
                lo = np.minimum(x[0], x[1]) - c
                return ec * self.phi1(lo)
            y = [v - c for v in x]
            lo = y[0]
            for v in y[1:]:
                lo = np.minimum(lo, v)
            spread = -lo
            mean = sum(y) / len(y)
            # Taylor series around the mean: sum_j h_j(d) / (j + m)!
            d = [v - mean for v in y]
            h = [np.ones_like(mean)] + [np.zeros_like(mean) for _ in range(_TAYLOR_TERMS)]
            for v in d:
                for j in range(1, _TAYLOR_TERMS + 1):
                    h[j] = h[j] + v * h[j - 1]
            fact = float(math.factorial(m))
            taylor = np.zeros_like(mean)
            previous = None
            for j in range(_TAYLOR_TERMS + 1):
                term = h[j] / fact
                taylor = taylor + term
                fact *= j + m + 1
                small = np.all(np.abs(term) <= 1e-17 * np.abs(taylor))
                # two negligible terms in a row (one alone may vanish by symmetry of the centred nodes)
                if small and previous:
                    break
                previous = small
            near = np.exp(mean) * taylor
            if np.all(spread <= 1):
                return np.where(np.isfinite(c), ec * near, np.where(c > 0, np.inf, 0.0))
            wide = self._matrix_form(y, spread)
            out = np.where(spread <= 1, near, wide)
            return np.where(np.isfinite(spread), ec * out, 0.0)

    def _matrix_form(self, y, norm):
        """Entry (0, m) of exp of the bidiagonal matrix diag(y) + superdiagonal 1, by Taylor and squaring."""
        n = len(y)
        s = np.zeros(np.shape(norm), dtype=np.int64)
        nn = np.where(np.isfinite(norm), norm, 0.0)
        while np.any(nn / np.ldexp(1.0, s) > 0.5):
            s = np.where(nn / np.ldexp(1.0, s) > 0.5, s + 1, s)
        scale = np.ldexp(1.0, -s)
        B = lambda i, j: (y[i] * scale) if i == j else (scale if j == i + 1 else None)
        T = {(i, j): np.where(True, 1.0 if i == j else 0.0, scale) * 1.0 for i in range(n) for j in range(i, n)}
        term = dict(T)
        for k in range(1, _TAYLOR_TERMS + 1):
            nxt = {}
            for i in range(n):
                for j in range(i, n):
                    acc = 0.0
                    for l in range(i, j + 1):
                        b = B(l, j)
                        if b is not None:
                            acc = acc + term[(i, l)] * b
                    nxt[(i, j)] = acc / k
            term = nxt
            for key in T:
                T[key] = T[key] + term[key]
        for r in range(int(np.max(s))):
            sq = {}
            for i in range(n):
                for j in range(i, n):
                    acc = 0.0
                    for l in range(i, j + 1):
                        acc = acc + T[(i, l)] * T[(l, j)]
                    sq[(i, j)] = acc
            go = r < s
            T = {key: np.where(go, sq[key], T[key]) for key in T}
        return T[(0, n - 1)]


X = _Dialect()
