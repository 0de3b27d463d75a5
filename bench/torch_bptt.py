"""Benchmark of the generated PyTorch layer (run by bench/torch.mjs): for T = 100, 1000, 10000
grid steps of 0.1 ms, one LifCurrent layer (samples/lif_current.saltus, fixed time constants,
8 inputs -> 32 neurons, 16 trials, Poisson-like input spikes at a fixed rate, so spikes grow with
T) forward and backward, against plain-PyTorch backpropagation through time of the same discrete
model: the same exact propagators per step, input spikes binned to steps, the spike a Heaviside
step with the fast-sigmoid surrogate derivative 1 / (1 + 10 |V - theta|)^2 (common practice in
surrogate-gradient training), reset by V := V (1 - s). Kept memory: the generated layer's recorded events and
checkpoints (saltus_torch.kept_bytes); for BPTT the tensors autograd saves for backward, counted
with torch.autograd.graph.saved_tensors_hooks (distinct storages). Time: forward + backward,
best of REPS. Prints one JSON line per T.

Usage: python3 bench/torch_bptt.py PACKAGE_DIR
"""
import importlib
import json
import math
import os
import sys
import time

import torch

torch.set_num_threads(1)
DT, N_IN, N, B = 1e-4, 8, 32, 16
RATE = 40.0  # input spikes per second per input channel


def inputs(steps, seed=1):
    g = torch.Generator().manual_seed(seed)
    duration = steps * DT
    k = int(RATE * N_IN * duration)
    times = torch.rand(B, max(k, 1), generator=g, dtype=torch.float64) * duration
    index = torch.randint(N_IN, (B, max(k, 1)), generator=g)
    return times, index


class Spike(torch.autograd.Function):
    @staticmethod
    def forward(ctx, v):
        ctx.save_for_backward(v)
        return (v >= 0).to(v.dtype)

    @staticmethod
    def backward(ctx, g):
        (v,) = ctx.saved_tensors
        return g / (1.0 + 10.0 * v.abs()) ** 2


def bptt(times, index, W, tau_m, tau_s, theta, steps):
    """The same LIF on the grid, unrolled: returns the summed first-spike surrogate loss."""
    am, as_ = math.exp(-DT / tau_m), math.exp(-DT / tau_s)
    c = tau_s / (tau_s - tau_m) * (as_ - am)
    # input current per step: sum of weights of the spikes in the step
    k = torch.clamp((times / DT).long(), max=steps - 1)
    drive = torch.zeros(B, steps, N_IN, dtype=W.dtype)
    drive.index_put_((torch.arange(B)[:, None].expand_as(k), k, index), torch.ones_like(times), accumulate=True)
    V = torch.zeros(B, N, dtype=W.dtype)
    I = torch.zeros(B, N, dtype=W.dtype)
    loss = torch.zeros((), dtype=W.dtype)
    for step in range(steps):
        I = I + drive[:, step] @ W.t()
        V = am * V + c * I
        I = as_ * I
        s = Spike.apply(V - theta)
        V = V * (1 - s)
        loss = loss + (s * (step * DT)).sum()
    return loss


def saved_bytes(fn):
    seen = set()
    total = [0]

    def pack(t):
        key = (t.data_ptr(), tuple(t.shape), t.dtype)
        if key not in seen:
            seen.add(key)
            total[0] += t.numel() * t.element_size()
        return t

    with torch.autograd.graph.saved_tensors_hooks(pack, lambda t: t):
        out = fn()
    return out, total[0]


def main(pkg_dir):
    sys.path.insert(0, os.path.dirname(os.path.abspath(pkg_dir)))
    pkg = importlib.import_module(os.path.basename(os.path.abspath(pkg_dir)))
    g = torch.Generator().manual_seed(2)
    w0 = (torch.randn(N, N_IN, generator=g, dtype=torch.float64) * 1.5 + 2.0)
    for steps in (100, 1000, 10000):
        times, index = inputs(steps)
        reps = 2 if steps <= 100 else 1
        best_l, best_b = math.inf, math.inf
        for _ in range(reps):
            layer = pkg.LifCurrentLayer(N_IN, N, DT, steps * DT, trainable=())
            with torch.no_grad():
                layer.weight.copy_(w0)
            t0 = time.perf_counter()
            o = layer(times, index)
            loss = torch.where(torch.isfinite(o.times), o.times, torch.zeros_like(o.times)).sum()
            loss.backward()
            best_l = min(best_l, time.perf_counter() - t0)
            kept = layer.last_kept_bytes
            spikes = int((o.index >= 0).sum())
        for _ in range(reps):
            W = w0.clone().requires_grad_(True)
            t0 = time.perf_counter()
            loss, saved = saved_bytes(lambda: bptt(times, index, W, 0.02, 0.005, 1.0, steps))
            loss.backward()
            best_b = min(best_b, time.perf_counter() - t0)
        print(json.dumps({"steps": steps, "input_spikes": int((index >= 0).sum()) if steps else 0, "layer_spikes": spikes,
                          "layer_s": best_l, "layer_bytes": kept, "bptt_s": best_b, "bptt_bytes": saved}), flush=True)


if __name__ == "__main__":
    main(sys.argv[1])
