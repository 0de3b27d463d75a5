"""Checks of the generated PyTorch package, run by tests/codegen-torch.test.ts with Debian's
/usr/bin/python3 (torch 1.13). Usage: python3 torch_checks.py CHECK PACKAGE_DIR JSON_ARGS; prints
one JSON object. Every scenario is an invented pump-sensor spike pattern.

Checks:
- gradcheck: torch.autograd.gradcheck (float64) on one layer built from a sample scenario's first
  projection, with respect to input spike times, weights and trainable parameters.
- stacked: gradcheck on two layers stacked (the second driven by the first's spikes).
- compose: two layers and a loss written in PyTorch (first-spike cross-entropy, or the largest
  grid value of a state); prints the runner-contract report that the TypeScript test compares
  with Saltus's grid simulator.
- independent: the generated LifCurrent layer against a LIF network with current synapses
  simulated event by event in plain PyTorch (no Saltus code) and differentiated by autograd.
- memory: bytes the backward pass keeps at T = 100, 1000, 10000 steps.
- float32: the compose network in float32 against float64.
"""
import importlib
import json
import math
import os
import sys

import torch

torch.set_num_threads(1)


def load(pkg_dir):
    sys.path.insert(0, os.path.dirname(os.path.abspath(pkg_dir)))
    return importlib.import_module(os.path.basename(os.path.abspath(pkg_dir)))


def finite(t):
    """Padding (+inf) to 0 so that finite differences of the outputs are defined."""
    return torch.where(torch.isfinite(t), t, torch.zeros_like(t))


def layer_from_scenario(pkg, a):
    """A layer of a's model, its inputs and parameters from a's fields (the first projection of a sample scenario)."""
    cls = getattr(pkg, a["model"] + "Layer")
    readout = tuple(a["readout"]) if a.get("readout") else None
    layer = cls(a["n_in"], a["n_out"], a["dt"], a["duration"], params=a.get("params") or {}, readout=readout)
    with torch.no_grad():
        layer.weight.copy_(torch.tensor(a["weights"], dtype=torch.float64))
    times, index = pkg.pad_events(a["trials"])
    return layer, times, index


def check_gradcheck(pkg, a):
    layer, times, index = layer_from_scenario(pkg, a)
    names = layer.spec.param_names
    times = times.clone().requires_grad_(True)
    w = layer.weight.detach().clone().requires_grad_(True)
    ps = [layer.model_params[k].detach().clone().requires_grad_(True) for k in names]
    fn = pkg.GridLayerFunction

    def f(t, w_, *p):
        o = fn.apply(layer.spec, t, index, w_, *p)
        return finite(o[0]), finite(o[2]), o[3]

    o = fn.apply(layer.spec, times.detach(), index, w.detach(), *[p.detach() for p in ps])
    spikes = int((o[1] >= 0).sum())
    # inputs in their own scale (weights and parameters relative to their values, times in s), so
    # that one eps suits AdEx's nanoampere weights and a LIF's dimensionless ones alike
    w_scale = float(w.detach().abs().max())
    p_scale = [abs(float(p)) or 1.0 for p in ps]
    ws = (w.detach() / w_scale).requires_grad_(True)
    pss = [(p.detach() / k).requires_grad_(True) for p, k in zip(ps, p_scale)]

    def g(t, w_, *p):
        return f(t, w_ * w_scale, *[q * k for q, k in zip(p, p_scale)])

    ok = torch.autograd.gradcheck(g, (times, ws, *pss), eps=1e-7, atol=1e-6, rtol=1e-5, raise_exception=False,
                                  fast_mode=bool(a.get("fast")))
    return {"ok": bool(ok), "spikes": spikes, "params": names, "inputs": int(times.numel() + w.numel() + len(ps)), "fast": bool(a.get("fast"))}


def two_layers(pkg, a, dtype=torch.float64):
    cls = getattr(pkg, a["model"] + "Layer")
    l1 = cls(a["n_in"], a["n_hid"], a["dt"], a["duration"], dtype=dtype)
    readout = tuple(a["readout"]) if a.get("readout") else None
    l2 = cls(a["n_hid"], a["n_out"], a["dt"], a["duration"], readout=readout, dtype=dtype)
    with torch.no_grad():
        l1.weight.copy_(torch.tensor(a["w1"], dtype=dtype))
        l2.weight.copy_(torch.tensor(a["w2"], dtype=dtype))
    times, index = pkg.pad_events(a["trials"], dtype=dtype)
    return l1, l2, times, index


def check_stacked(pkg, a):
    l1, l2, times, index = two_layers(pkg, a)
    fn = pkg.GridLayerFunction
    names1, names2 = l1.spec.param_names, l2.spec.param_names
    times = times.clone().requires_grad_(True)
    w1 = l1.weight.detach().clone().requires_grad_(True)
    w2 = l2.weight.detach().clone().requires_grad_(True)
    p1 = [l1.model_params[k].detach().clone().requires_grad_(True) for k in names1]
    p2 = [l2.model_params[k].detach().clone().requires_grad_(True) for k in names2]

    def f(t, w1_, w2_, *p):
        h = fn.apply(l1.spec, t, index, w1_, *p[:len(names1)])
        o = fn.apply(l2.spec, h[0], h[1], w2_, *p[len(names1):])
        return finite(o[0]), finite(o[2])

    with torch.no_grad():
        h = fn.apply(l1.spec, times, index, w1, *p1)
        o = fn.apply(l2.spec, h[0], h[1], w2, *p2)
    ok = torch.autograd.gradcheck(f, (times, w1, w2, *p1, *p2), eps=1e-7, atol=1e-6, rtol=1e-5, raise_exception=False)
    return {"ok": bool(ok), "hidden_spikes": int((h[1] >= 0).sum()), "output_spikes": int((o[1] >= 0).sum())}


def compose_report(pkg, a, dtype=torch.float64):
    """Two layers, a loss in PyTorch, its gradient by loss.backward(): the runner contract's report."""
    l1, l2, times, index = two_layers(pkg, a, dtype)
    h = l1(times, index)
    o = l2(h.times, h.index)
    labels = torch.tensor(a["labels"])
    if a["loss"] == "ce-first-spike":
        logits = pkg.first_spike_logits(o.first, a["duration"], a["tau"])
    else:
        logits = o.readout
    loss = torch.nn.functional.cross_entropy(logits, labels, reduction="sum")
    loss.backward()

    def spikes(out, b):
        return [[float(t), int(i)] for t, i in zip(out.times[b].tolist(), out.index[b].tolist()) if i >= 0]

    per_trial = [{"hid": spikes(h, b), "out": spikes(o, b)} for b in range(len(a["trials"]))]
    params = {}
    for pop, layer in (("hid", l1), ("out", l2)):
        for k in layer.spec.param_names:
            params["%s.%s" % (pop, k)] = float(layer.model_params[k].grad)
    return {"loss": float(loss), "spikes": per_trial[0], "spikes_per_trial": per_trial, "trials": len(per_trial),
            "weights": [l1.weight.grad.tolist(), l2.weight.grad.tolist()], "params": params, "dtype": str(o.times.dtype),
            "kept_bytes": [l1.last_kept_bytes, l2.last_kept_bytes]}


# --- the independent check: LIF with current synapses in plain PyTorch ------------------------
# dV/dt = (I - V) / tau_m, dI/dt = -I / tau_s; from (V0, I0) the exact solution after h is
#   I(h) = I0 exp(-h / tau_s),
#   V(h) = V0 exp(-h / tau_m) + I0 tau_s / (tau_s - tau_m) (exp(-h / tau_s) - exp(-h / tau_m))
# (the solution of a linear ODE driven by an exponential, as written for this neuron by
# Gerstner, Kistler, Naud & Paninski, "Neuronal Dynamics" (2014), ch. 1 and 6, from memory;
# checked here by substitution: both sides of dV/dt = (I - V) / tau_m agree term by term).
# A spike is where V - theta crosses 0 upwards, tested at the ends of the segments between input
# arrivals and grid points (the grid semantics of docs/network-step.md), located by Newton
# iterations to convergence; V := 0 after it. Autograd differentiates everything; at a converged
# root a last Newton step s - g(s)/g'(s) carries the implicit-function derivative -g_p / g'.

def lif_v(V0, I0, h, tm, ts):
    return V0 * torch.exp(-h / tm) + I0 * ts / (ts - tm) * (torch.exp(-h / ts) - torch.exp(-h / tm))


def lif_i(I0, h, ts):
    return I0 * torch.exp(-h / ts)


def independent_lif(in_times, in_index, W, tm, ts, theta, dt, duration):
    """Spike times per neuron (lists of 0-d tensors) of one trial; everything differentiable."""
    n = W.shape[0]
    events = sorted([(float(in_times[k]), k) for k in range(in_times.shape[0]) if int(in_index[k]) >= 0 and float(in_times[k]) < duration])
    steps = int(math.ceil(duration / dt - 1e-9))
    grid_points = [(k + 1) * dt if k < steps - 1 else duration for k in range(steps)]
    out = []
    for i in range(n):
        V = torch.zeros((), dtype=W.dtype)
        I = torch.zeros((), dtype=W.dtype)
        a = torch.zeros((), dtype=W.dtype)  # the time of the state (V, I)
        spikes = []
        ends = sorted([(t, 0, k) for t, k in events] + [(t, 1, -1) for t in grid_points])
        for t_end, kind, k in ends:
            b = in_times[k] if kind == 0 else torch.tensor(t_end, dtype=W.dtype)
            while True:
                h = b - a
                Vb = lif_v(V, I, h, tm, ts)
                if not (float(V) - theta < 0 <= float(Vb) - theta):
                    break
                # Newton on u -> V(a + u) - theta inside (0, h], kept in a bracket
                lo, hi = 0.0, float(h)
                u = torch.tensor(0.5 * (lo + hi), dtype=W.dtype)
                with torch.no_grad():
                    for _ in range(200):
                        g = float(lif_v(V, I, u, tm, ts)) - theta
                        if g < 0:
                            lo = float(u)
                        else:
                            hi = float(u)
                        dg = float((lif_i(I, u, ts) - lif_v(V, I, u, tm, ts)) / tm)
                        nxt = float(u) - g / dg if dg != 0 else 0.5 * (lo + hi)
                        if not (lo < nxt < hi) and nxt != float(u):
                            nxt = 0.5 * (lo + hi)
                        done = abs(nxt - float(u)) <= 1e-17 * max(abs(float(u)), 1e-12)
                        u = torch.tensor(nxt, dtype=W.dtype)
                        if done:
                            break
                # the last Newton step with the graph: exact derivative at the converged root
                s_rel = u.detach()
                g = lif_v(V, I, s_rel, tm, ts) - theta
                dg = (lif_i(I, s_rel, ts) - lif_v(V, I, s_rel, tm, ts)) / tm
                u_graph = s_rel - g / dg
                # the root moves with a too: s = a + u, and the state was taken at a
                s = a + u_graph
                I = lif_i(I, s - a, ts)
                V = torch.zeros((), dtype=W.dtype)
                a = s
                spikes.append(s)
            V, I = lif_v(V, I, b - a, tm, ts), lif_i(I, b - a, ts)
            a = b
            if kind == 0:
                I = I + W[i, int(in_index[k])]
        out.append(spikes)
    return out


def check_independent(pkg, a):
    dtype = torch.float64
    layer = pkg.LifCurrentLayer(a["n_in"], a["n_out"], a["dt"], a["duration"])
    with torch.no_grad():
        layer.weight.copy_(torch.tensor(a["weights"], dtype=dtype))
    times, index = pkg.pad_events(a["trials"])
    times = times.clone().requires_grad_(True)
    o = layer(times, index)
    coef = torch.tensor(a["coef"], dtype=dtype)  # L = sum over each neuron's k-th spike of coef[i][k] * t

    def loss_of(spike_lists):
        total = torch.zeros((), dtype=dtype)
        for i, sp in enumerate(spike_lists):
            for k, s in enumerate(sp):
                total = total + coef[i, k % coef.shape[1]] * s
        return total

    gen_lists = []
    for b in range(times.shape[0]):
        per = [[] for _ in range(a["n_out"])]
        for k in range(o.times.shape[1]):
            if int(o.index[b, k]) >= 0:
                per[int(o.index[b, k])].append(o.times[b, k])
        gen_lists.append(per)
    L_gen = sum(loss_of(p) for p in gen_lists)
    g_gen = torch.autograd.grad(L_gen, [times, layer.weight, layer.model_params["tau_m"], layer.model_params["tau_s"]])

    t2 = times.detach().clone().requires_grad_(True)
    W = torch.tensor(a["weights"], dtype=dtype, requires_grad=True)
    tm = torch.tensor(layer.model.DEFAULT_PARAMS["tau_m"], dtype=dtype, requires_grad=True)
    ts = torch.tensor(layer.model.DEFAULT_PARAMS["tau_s"], dtype=dtype, requires_grad=True)
    ind_lists = [independent_lif(t2[b], index[b], W, tm, ts, 1.0, a["dt"], a["duration"]) for b in range(times.shape[0])]
    L_ind = sum(loss_of(p) for p in ind_lists)
    g_ind = torch.autograd.grad(L_ind, [t2, W, tm, ts])

    def rel(x, y):
        return float(torch.max(torch.abs(x - y)) / max(float(torch.max(torch.abs(y))), 1e-300))

    n_gen = [[len(s) for s in p] for p in gen_lists]
    n_ind = [[len(s) for s in p] for p in ind_lists]
    times_dev = max([abs(float(x) - float(y)) / abs(float(y)) for p, q in zip(gen_lists, ind_lists) for s1, s2 in zip(p, q) for x, y in zip(s1, s2)] + [0.0])
    return {"spikes_generated": n_gen, "spikes_independent": n_ind, "spike_time_dev": times_dev,
            "loss_dev": abs(float(L_gen) - float(L_ind)) / abs(float(L_ind)),
            "dev": {"input_times": rel(g_gen[0], g_ind[0]), "weights": rel(g_gen[1], g_ind[1]),
                    "tau_m": rel(g_gen[2], g_ind[2]), "tau_s": rel(g_gen[3], g_ind[3])},
            "tau_m_grad": float(g_ind[2]), "weights_grad_norm": float(torch.norm(g_ind[1]))}


def check_memory(pkg, a):
    """Kept bytes of one layer at T steps, the same input spikes (all in the first 8 ms)."""
    out = []
    for steps in a["steps"]:
        duration = steps * a["dt"]
        layer = pkg.LifCurrentLayer(a["n_in"], a["n_out"], a["dt"], duration, trainable=a["trainable"], params=a.get("params") or {})
        with torch.no_grad():
            layer.weight.copy_(torch.tensor(a["weights"], dtype=torch.float64))
        times, index = pkg.pad_events(a["trials"])
        times.requires_grad_(True)
        o = layer(times, index)
        kept = layer.last_kept_bytes
        (finite(o.times).sum() + finite(o.first).sum()).backward()
        out.append({"steps": steps, "kept_bytes": kept, "spikes": int((o.index >= 0).sum()), "grad_finite": bool(torch.isfinite(layer.weight.grad).all())})
    return {"runs": out}


def check_float32(pkg, a):
    r64 = compose_report(pkg, a, torch.float64)
    r32 = compose_report(pkg, a, torch.float32)
    return {"r64": r64, "r32": r32}


CHECKS = {"gradcheck": check_gradcheck, "stacked": check_stacked, "compose": compose_report,
          "independent": check_independent, "memory": check_memory, "float32": check_float32}

if __name__ == "__main__":
    check, pkg_dir, args = sys.argv[1], sys.argv[2], json.loads(sys.argv[3])
    torch.manual_seed(0)
    print(json.dumps(CHECKS[check](load(pkg_dir), args)))
