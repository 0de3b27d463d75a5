# Backpropagation through time of the discrete e-prop grid of the receptors sample's network
# (a Balanced hidden layer with an excitatory and an inhibitory block, fed by the sensor through
# both, onto a Readout population; no recurrence), written by hand in PyTorch autograd (float64)
# as an independent check of the generated network e-prop following each projection's "via"
# (tests/eprop-receptors.test.ts). One step of length dt, in Saltus's e-prop order (docs/eprop.md):
#   z = H(V - theta)                              spike test on the state at the start
#   V1 = V - sg(z) V                              the reset V := 0, detached (stop-gradient)
#   exact flow of dV/dt = (Ie - Ii - V)/tau_m, dIe/dt = -Ie/tau_e, dIi/dt = -Ii/tau_i
#   Ie += W_exc c_t, Ii += W_inh c_t              the step's arrivals, each into its block
#   readout: its exact flow, then I_r += W_out z_t;  E = dt sum_{t=1..T} 1/2 |V_r(t) - target|^2
# The spike's backward pass uses psi = 0.3/theta max(0, 1 - |V - theta|/theta) (Bellec et al. 2020,
# Methods), as the model's `surrogate` line says. Reads {"net", "dt", "params", "readout"} on stdin;
# prints {"loss", "weights": [per projection], "params": {"hid.tau_e", "hid.tau_i"}, "spikes"}.
import json
import math
import sys

import torch
from surrogate_spike import triangular_spike  # beside this script

torch.set_default_dtype(torch.float64)
p = json.load(sys.stdin)
net, dt = p["net"], p["dt"]
hp, rp = p["params"], p["readout"]
tau_m, theta = hp["tau_m"], hp["theta"]
tau_e = torch.tensor(hp["tau_e"], requires_grad=True)
tau_i = torch.tensor(hp["tau_i"], requires_grad=True)
projs = net["projections"]
W = [torch.tensor(pr["weights"], requires_grad=True) for pr in projs]
steps = int(math.ceil(net["duration_s"] / dt - 1e-9))
sensor = net["populations"]["sensor"]
counts = torch.zeros(steps, sensor["size"])
for s, i in sensor["spikes"]:
    k = int((s / dt + 1e-9) // 1)
    if 0 <= k < steps:
        counts[k, i] += 1
n_hid, n_out = net["populations"]["hid"]["size"], net["populations"]["out"]["size"]
target = torch.full((n_out,), float(net["loss"]["target"]))


Spike = triangular_spike(theta)


def lag(ts, tm):
    """The exact flow's gain from a decaying current into V: ts/(ts - tm) (e^{-dt/ts} - e^{-dt/tm})."""
    return ts / (ts - tm) * (torch.exp(-dt / ts) - math.exp(-dt / tm))


V, Ie, Ii = torch.zeros(n_hid), torch.zeros(n_hid), torch.zeros(n_hid)
Vr, Ir = torch.zeros(n_out), torch.zeros(n_out)
trm, trs = rp["tau_m"], torch.tensor(rp["tau_s"])
loss = torch.zeros(())
spikes = 0
for t in range(steps):
    z = Spike.apply(V - theta)
    spikes += int(z.sum().item())
    V1 = V - z.detach() * V
    V = V1 * math.exp(-dt / tau_m) + Ie * lag(tau_e, tau_m) - Ii * lag(tau_i, tau_m)
    Ie, Ii = Ie * torch.exp(-dt / tau_e), Ii * torch.exp(-dt / tau_i)
    Vr, Ir = Vr * math.exp(-dt / trm) + Ir * lag(trs, trm), Ir * torch.exp(-dt / trs)
    for w, pr in zip(W, projs):
        src = counts[t] if pr["from"] == "sensor" else z
        if pr["to"] == "out":
            Ir = Ir + w @ src
        elif pr["via"] == "w_exc":
            Ie = Ie + w @ src
        else:
            Ii = Ii + w @ src
    loss = loss + 0.5 * dt * torch.sum((Vr - target) ** 2)
loss.backward()
print(json.dumps({"loss": loss.item(), "weights": [w.grad.tolist() for w in W],
                  "params": {"hid.tau_e": tau_e.grad.item(), "hid.tau_i": tau_i.grad.item()}, "spikes": spikes}))
