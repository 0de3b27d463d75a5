# The PyTorch dialect of generated Python code: the same names as the NumPy dialect
# (numpy_dialect.py), on torch tensors of one device and dtype, chosen per call with
# `X.use(dtype, device)` or `with X.on(dtype, device):` (the generated layers set them from their
# inputs). The grid runtime runs inside torch.autograd.Function's forward and backward, under
# no_grad on detached tensors: nothing here records an autograd graph, and the only in-place
# writes are into the runtime's own work tensors. phi1, phik and expdd are the divided
# differences of exp of Saltus's step maps, the same algorithm as server/src/symbolic/expdd.ts
# (its Taylor series around the mean, with as many terms as the nodes' spread needs for a
# relative error below 1e-17). Works with torch 1.13 and later (no newer API is used).
import contextlib
import math

import torch

_TAYLOR_TERMS = 24
_SERIES_TERMS = 20
_FACT = [float(math.factorial(n)) for n in range(60)]


class _Dialect:
    def __init__(self):
        self.dtype = torch.float64
        self.device = torch.device("cpu")

    # --- context ---------------------------------------------------------------------------
    def use(self, dtype=None, device=None):
        """Sets the dtype and device of the tensors the runtime makes; returns the previous pair."""
        old = (self.dtype, self.device)
        if dtype is not None:
            self.dtype = dtype
        if device is not None:
            self.device = torch.device(device)
        return old

    @contextlib.contextmanager
    def on(self, dtype=None, device=None):
        old = self.use(dtype, device)
        try:
            with torch.no_grad():
                yield self
        finally:
            self.use(*old)

    def _t(self, a):
        if isinstance(a, torch.Tensor):
            return a
        return torch.tensor(a, dtype=self.dtype, device=self.device)

    def _pair(self, a, b):
        if isinstance(a, torch.Tensor) and not isinstance(b, torch.Tensor):
            b = torch.tensor(b, dtype=a.dtype if a.is_floating_point() or isinstance(b, bool) or isinstance(b, int) else self.dtype, device=a.device)
        elif isinstance(b, torch.Tensor) and not isinstance(a, torch.Tensor):
            a = torch.tensor(a, dtype=b.dtype if b.is_floating_point() or isinstance(a, bool) or isinstance(a, int) else self.dtype, device=b.device)
        elif not isinstance(a, torch.Tensor):
            a, b = self._t(a), self._t(b)
        return a, b

    # --- element-wise ----------------------------------------------------------------------
    def float64(self, v):
        return float(v)

    def exp(self, a):
        return torch.exp(self._t(a))

    def log(self, a):
        return torch.log(self._t(a))

    def sqrt(self, a):
        return torch.sqrt(self._t(a))

    def tanh(self, a):
        return torch.tanh(self._t(a))

    def abs(self, a):
        return torch.abs(self._t(a))

    def power(self, a, b):
        return torch.pow(self._t(a), b)

    def minimum(self, a, b):
        a, b = self._pair(a, b)
        return torch.minimum(a, b)

    def maximum(self, a, b):
        a, b = self._pair(a, b)
        return torch.maximum(a, b)

    def where(self, c, a, b):
        a, b = self._pair(a, b)
        if a.dtype != b.dtype:
            a, b = a.to(self.dtype), b.to(self.dtype)
        return torch.where(self._t(c), a, b)

    def isfinite(self, a):
        return torch.isfinite(self._t(a))

    # --- making arrays ---------------------------------------------------------------------
    def array(self, a):
        if isinstance(a, torch.Tensor):
            return a.detach().to(dtype=self.dtype, device=self.device)
        return torch.tensor(a, dtype=self.dtype, device=self.device)

    def array_int(self, a):
        if isinstance(a, torch.Tensor):
            return a.to(dtype=torch.int64, device=self.device)
        return torch.tensor(a, dtype=torch.int64, device=self.device)

    def scalar(self, v):
        return float(v)

    def full(self, shape, v):
        return torch.full(tuple(shape), float(v), dtype=self.dtype, device=self.device)

    def full_int(self, shape, v):
        return torch.full(tuple(shape), int(v), dtype=torch.int64, device=self.device)

    def zeros_bool(self, shape):
        return torch.zeros(tuple(shape), dtype=torch.bool, device=self.device)

    def ones_bool(self, shape):
        return torch.ones(tuple(shape), dtype=torch.bool, device=self.device)

    def zeros_like(self, a):
        shape = tuple(a.shape) if isinstance(a, torch.Tensor) else ()
        return torch.zeros(shape, dtype=self.dtype, device=self.device)

    def copy(self, a):
        return a.clone() if isinstance(a, torch.Tensor) else self._t(a)

    def arange(self, n):
        return torch.arange(n, device=self.device)

    def onehot(self, labels, n):
        o = torch.zeros((len(labels), n), dtype=self.dtype, device=self.device)
        o[torch.arange(len(labels), device=self.device), labels] = 1.0
        return o

    # --- reductions and indexing -----------------------------------------------------------
    def all(self, a):
        return bool(torch.all(self._t(a)))

    def any(self, a):
        return bool(torch.any(self._t(a)))

    def nonzero(self, m):
        return torch.nonzero(m, as_tuple=True)

    def nonzero1(self, m):
        return torch.nonzero(m, as_tuple=True)[0]

    def gather_rows(self, a, idx):
        return a[torch.arange(a.shape[0], device=a.device), idx]

    def clamp_int(self, a, hi):
        return torch.clamp(a, max=hi)

    def min_last(self, a):
        i = torch.argmin(a, dim=1)  # the first of equal minima, as NumPy's argmin
        return a[torch.arange(a.shape[0], device=a.device), i], i

    def max_last(self, a):
        return torch.max(a, dim=-1).values

    def sum_last(self, a):
        return torch.sum(a, dim=-1)

    def sum(self, a):
        return float(torch.sum(self._t(a)))

    def max_first(self, a):
        return torch.max(a, dim=0).values

    def argmax_first(self, a):
        return torch.argmax(a, dim=0)

    def tolist(self, a):
        return a.tolist() if isinstance(a, torch.Tensor) else list(a)

    def search(self, sorted_values, values):
        return torch.searchsorted(sorted_values.contiguous(), values.contiguous())

    def index_add(self, a, idx, v):
        v = self._t(v).to(a.dtype)
        if v.dim() == 0:
            v = v.expand(idx.shape)
        return torch.index_add(a, 0, idx, v)

    def repeat_rows(self, a, n):
        return torch.repeat_interleave(a, n)

    def tile_cols(self, n, k):
        return torch.arange(n, device=self.device).repeat(k)

    def transpose(self, a):
        return a.t()

    def scatter_cols(self, gw, src, lw):
        out = gw.clone()
        out.t().index_add_(0, src, lw.to(out.dtype))
        return out

    def flatten(self, a):
        return torch.reshape(a, (-1,))

    def reshape(self, a, shape):
        return torch.reshape(a, tuple(shape))

    def to_float(self, a):
        return float(a)

    # --- divided differences of exp --------------------------------------------------------
    def phi1(self, z):
        """phi1(z) = (e^z - 1)/z: expm1 without cancellation, its series near 0."""
        z = self._t(z)
        small = torch.abs(z) < 1e-5
        safe = torch.where(small, torch.ones_like(z), z)
        value = torch.where(small, 1 + z / 2 + z * z / 6, torch.expm1(z) / safe)
        value = torch.where(torch.isneginf(z), torch.zeros_like(z), value)
        return torch.where(torch.isposinf(z), z, value)

    def phik(self, k, z):
        """phi_k(z) = e[z, 0, ..., 0] (k zeros): Horner's form of sum_j z^j / (j + k)! where |z| < 1,
        else phi_0 = e^z and phi_{j+1} = (phi_j - 1/j!) / z (as symbolic/expdd.ts)."""
        z = self._t(z)
        acc = torch.zeros_like(z)
        for j in range(_SERIES_TERMS, -1, -1):
            acc = acc * z + 1.0 / _FACT[j + k]
        big = torch.exp(z)
        for j in range(k):
            big = (big - 1.0 / _FACT[j]) / z
        out = torch.where(torch.abs(z) < 1, acc, big)
        return torch.where(torch.isneginf(z), torch.zeros_like(z), out)

    def _terms(self, dmax):
        """Taylor terms needed for a relative error below 1e-17 when every centred node is at most
        dmax in size: term j is at most dmax^j / (j! m!) (|h_j(d)| <= C(j + m, m) dmax^j), against a
        sum of at least e^(-dmax) / m!."""
        bound = 1.0
        for j in range(1, _TAYLOR_TERMS + 1):
            bound = bound * dmax / j
            if bound <= 1e-18:
                return j
        return _TAYLOR_TERMS

    def expdd(self, *nodes):
        """The divided difference of exp at the nodes (per element)."""
        if len(nodes) > 2 and all(isinstance(v, (int, float)) and v == 0 for v in nodes[1:]):
            return self.phik(len(nodes) - 1, nodes[0])
        x = torch.broadcast_tensors(*[self._t(v) for v in nodes])
        m = len(x) - 1
        if m == 0:
            return torch.exp(x[0])
        c = x[0]
        for v in x[1:]:
            c = torch.maximum(c, v)
        ec = torch.exp(c)
        if m == 1:
            lo = torch.minimum(x[0], x[1]) - c
            return ec * self.phi1(lo)
        y = [v - c for v in x]
        lo = y[0]
        for v in y[1:]:
            lo = torch.minimum(lo, v)
        spread = -lo
        smax = float(torch.max(spread)) if spread.numel() else 0.0
        mean = sum(y) / len(y)
        # Taylor series around the mean: sum_j h_j(d) / (j + m)!, h_j the complete homogeneous
        # symmetric polynomials of the centred nodes d (|d| <= spread), built node by node
        J = self._terms(min(smax, 1.0))
        d0 = y[0] - mean
        h = [torch.ones_like(mean), d0]
        for j in range(2, J + 1):
            h.append(h[-1] * d0)
        for v in y[1:]:
            dv = v - mean
            for j in range(1, J + 1):
                h[j] = torch.addcmul(h[j], dv, h[j - 1])
        taylor = h[J] / _FACT[J + m]
        for j in range(J - 1, -1, -1):
            taylor = torch.add(taylor, h[j], alpha=1.0 / _FACT[j + m])
        near = torch.exp(mean) * taylor
        if smax <= 1:
            return torch.where(torch.isfinite(c), ec * near, torch.where(c > 0, torch.full_like(c, math.inf), torch.zeros_like(c)))
        wide = self._matrix_form(y, spread)
        out = torch.where(spread <= 1, near, wide)
        return torch.where(torch.isfinite(spread), ec * out, torch.zeros_like(out))

    def _matrix_form(self, y, norm):
        """Entry (0, m) of exp of the bidiagonal matrix diag(y) + superdiagonal 1, by Taylor and squaring."""
        n = len(y)
        nn = torch.where(torch.isfinite(norm), norm, torch.zeros_like(norm))
        s = torch.zeros(norm.shape, dtype=torch.int64, device=norm.device)
        while bool(torch.any(nn / torch.pow(2.0, s.to(norm.dtype)) > 0.5)):
            s = torch.where(nn / torch.pow(2.0, s.to(norm.dtype)) > 0.5, s + 1, s)
        scale = torch.pow(2.0, -s.to(norm.dtype))
        ys = [torch.where(torch.isfinite(v), v, torch.zeros_like(v)) for v in y]

        def B(i, j):
            return (ys[i] * scale) if i == j else (scale if j == i + 1 else None)

        T = {(i, j): (torch.ones_like(scale) if i == j else torch.zeros_like(scale)) for i in range(n) for j in range(i, n)}
        term = dict(T)
        for k in range(1, _TAYLOR_TERMS + 1):
            nxt = {}
            for i in range(n):
                for j in range(i, n):
                    acc = torch.zeros_like(scale)
                    for l in range(i, j + 1):
                        b = B(l, j)
                        if b is not None:
                            acc = acc + term[(i, l)] * b
                    nxt[(i, j)] = acc / k
            term = nxt
            for key in T:
                T[key] = T[key] + term[key]
        for r in range(int(torch.max(s))):
            sq = {}
            for i in range(n):
                for j in range(i, n):
                    acc = torch.zeros_like(scale)
                    for l in range(i, j + 1):
                        acc = acc + T[(i, l)] * T[(l, j)]
                    sq[(i, j)] = acc
            go = r < s
            T = {key: torch.where(go, sq[key], T[key]) for key in T}
        return T[(0, n - 1)]


X = _Dialect()
