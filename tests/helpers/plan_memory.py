# Measured memory of training the generated PyTorch code of samples/adaptive_lif.saltus
# (tests/eprop-plan-memory.test.ts), for the planner's BPTT and EventProp figures.
# - BPTT with a surrogate on the generated kernels (the model module's eprop_spike, guard,
#   eprop_step, eprop_arrive on tensors): each grid step is one autograd Function that keeps
#   the state at the start of the step and the spike and recomputes the rest in backward (the
#   BPTT the planner counts); its gradient is checked against plain autograd through the same
#   kernels, whose memory is measured too, for the report. Bytes: every tensor autograd saves,
#   seen through torch.autograd.graph.saved_tensors_hooks, once per storage, leaving out the
#   task's own data and weights.
# - EventProp: the generated layer (GridLayerFunction) forward on the same inputs as events;
#   layer.last_kept_bytes (saltus_torch.kept_bytes: every tensor the run's records and
#   checkpoints hold, once per storage).
# Usage: python3 plan_memory.py PACKAGE_PARENT PACKAGE_NAME < {"T", "B", "N", "n_in", "seed"}
import importlib
import json
import sys

import torch

torch.set_default_dtype(torch.float64)
sys.path.insert(0, sys.argv[1])
pkg = importlib.import_module(sys.argv[2])
M = pkg.adaptivelif
a = json.load(sys.stdin)
T, B, N, n_in, dt = a["T"], a["B"], a["N"], a["n_in"], 1e-3
g = torch.Generator().manual_seed(a["seed"])
inputs = (torch.rand(B, T, n_in, generator=g) < 0.08).to(torch.float64)
win = (0.5 + 2.5 * torch.rand(N, n_in, generator=g)).requires_grad_(True)
wout = torch.rand(2, N, generator=g) - 0.3
targets = torch.zeros(B, T, 2)
p = tuple(float(M.DEFAULT_PARAMS[k]) for k in M.PARAMS)
data = {t.storage().data_ptr() for t in (inputs, win, wout, targets)}


class Spike(torch.autograd.Function):
    """z = H(g) forward; psi (the model's surrogate) as dz/dg backward (plain autograd BPTT)."""

    @staticmethod
    def forward(ctx, gv, psi):
        ctx.save_for_backward(psi)
        return (gv > 0).to(gv.dtype)

    @staticmethod
    def backward(ctx, grad):
        (psi,) = ctx.saved_tensors
        return grad * psi, None


def step(t, x, z, drive):
    x = M.eprop_step(list(x), p, t * dt, dt, z)
    return tuple(M.eprop_arrive(list(x), p, drive))


class Step(torch.autograd.Function):
    """One grid step that keeps exactly the state at the start of the step and the spike
    (S + 1 values per neuron) and recomputes the rest in backward: the BPTT the planner counts."""

    @staticmethod
    def forward(ctx, t, w, *x):
        gv = M.guard(list(x), p, t * dt)[0]
        z = (gv > 0).to(x[0].dtype)
        nxt = step(t, x, z, inputs[:, t, :] @ w.t())
        ctx.t = t
        ctx.save_for_backward(w, z, *x)
        return (z,) + tuple(nxt)

    @staticmethod
    def backward(ctx, gz, *gx):
        w, z, *x = ctx.saved_tensors
        t = ctx.t
        with torch.enable_grad():
            xs = [v.detach().requires_grad_(True) for v in x]
            zs = z.detach().requires_grad_(True)
            ws = w.detach().requires_grad_(True)
            nxt = step(t, xs, zs, inputs[:, t, :] @ ws.t())
            gxs = torch.autograd.grad(nxt, xs + [zs, ws], gx, allow_unused=True)
            gzt = gz + gxs[len(xs)]
            _, psi = M.eprop_spike([v.detach() for v in x], p, t * dt)
            gv = M.guard(xs, p, t * dt)[0]
            gg = torch.autograd.grad(gv, xs, gzt * psi, allow_unused=True)
        dx = [a if a is not None else torch.zeros_like(v) for a, v in zip(gxs[:len(xs)], x)]
        dx = [a + (b if b is not None else 0) for a, b in zip(dx, gg)]
        return (None, gxs[-1]) + tuple(dx)


def run(lean):
    seen, total = set(), [0]

    def pack(t):
        st = t.storage()
        key = st.data_ptr()
        if key not in seen and key not in data:
            seen.add(key)
            total[0] += st.nbytes()
        return t

    x = tuple(torch.full((B, N), float(M.INITIAL[s])) for s in M.STATES)
    y = torch.zeros(B, 2)
    loss = torch.zeros(())
    spikes = 0
    with torch.autograd.graph.saved_tensors_hooks(pack, lambda t: t):
        for t in range(T):
            if lean:
                z, *x = Step.apply(t, win, *x)
            else:
                gv = M.guard(list(x), p, t * dt)[0]
                _, psi = M.eprop_spike([v.detach() for v in x], p, t * dt)
                z = Spike.apply(gv, psi + torch.zeros(B, N))
                x = step(t, x, z, inputs[:, t, :] @ win.t())
            spikes += int(z.sum())
            y = 0.95 * y + z @ wout.t()
            loss = loss + 0.5 * ((y - targets[:, t, :]) ** 2).sum()
    loss.backward()
    return total[0], spikes, win.grad.clone()


bptt, spikes, g1 = run(True)
win.grad = None
plain, _, g2 = run(False)
same = float((g1 - g2).abs().max() / g2.abs().max())
layer = pkg.AdaptiveLifLayer(n_in, N, dt, T * dt, trainable=("beta",))
with torch.no_grad():
    layer.weight.copy_(win)
bt, kt = torch.nonzero(inputs[:, :, :].reshape(B, -1) > 0, as_tuple=True)
rows = [[((k // n_in) * dt + 0.5 * dt, k % n_in) for k in kt[bt == b].tolist()] for b in range(B)]
times, index = pkg.pad_events(rows)
out = layer(times, index)
ev_spikes = int((out.index >= 0).sum())
print(json.dumps({"bptt_bytes": bptt, "bptt_plain_bytes": plain, "bptt_spikes": spikes, "grad_rel_diff": same,
                  "eventprop_bytes": layer.last_kept_bytes, "eventprop_spikes": ev_spikes, "input_spikes": int(inputs.sum())}))
