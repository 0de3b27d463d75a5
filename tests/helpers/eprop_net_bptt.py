# Backpropagation through time of the discrete e-prop grid of the lif_current sample's network
# (LifCurrent hidden layer, optionally recurrent, onto a Readout population), written by hand in
# PyTorch autograd (float64) as an independent check of the generated network e-prop
# (tests/eprop-network.test.ts). One step of length dt, in Saltus's e-prop order (docs/eprop.md):
#   z = H(V - theta)                                spike test on the state at the start
#   V1 = V - sg(z) V                                the reset V := 0, detached (stop-gradient)
#   V = V1 e^{-dt/tau_m} + I tau_s/(tau_s - tau_m) (e^{-dt/tau_s} - e^{-dt/tau_m}),  I = I e^{-dt/tau_s}
#   I += W_in c_t (+ W_rec z_t)                     the step's arrivals (input spikes of [t dt, (t+1) dt))
#   readout: the same exact flow with its own constants, then I_r += W_out z_t
#   E = dt sum_{t=1..T} 1/2 |V_r(t) - target|^2
# The spike's backward pass uses psi = 0.3/theta max(0, 1 - |V - theta|/theta) (Bellec et al. 2020,
# Methods), as the model's `surrogate` line says. Reads {"net", "dt", "params", "readout"} on stdin;
# prints {"loss", "weights": [per projection], "params": {"hid.tau_m", "hid.tau_s"}, "spikes"}.
import json
import math
import sys

import torch
from surrogate_spike import triangular_spike  # beside this script

torch.set_default_dtype(torch.float64)
p = json.load(sys.stdin)
net, dt = p["net"], p["dt"]
hp, rp = p["params"], p["readout"]
tau_m = torch.tensor(hp["tau_m"], requires_grad=True)
tau_s = torch.tensor(hp["tau_s"], requires_grad=True)
theta = hp["theta"]
W = [torch.tensor(pr["weights"], requires_grad=True) for pr in net["projections"]]
names = [(pr["from"], pr["to"]) for pr in net["projections"]]
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


def flow(V, I, tm, ts):
    am, as_ = torch.exp(-dt / tm), torch.exp(-dt / ts)
    return V * am + I * ts / (ts - tm) * (as_ - am), I * as_


V, I = torch.zeros(n_hid), torch.zeros(n_hid)
Vr, Ir = torch.zeros(n_out), torch.zeros(n_out)
trm, trs = torch.tensor(rp["tau_m"]), torch.tensor(rp["tau_s"])
loss = torch.zeros(())
spikes = 0
for t in range(steps):
    z = Spike.apply(V - theta)
    spikes += int(z.sum().item())
    V1 = V - z.detach() * V
    V, I = flow(V1, I, tau_m, tau_s)
    Vr, Ir = flow(Vr, Ir, trm, trs)
    for w, (a, b) in zip(W, names):
        src = counts[t] if a == "sensor" else z
        if b == "hid":
            I = I + w @ src
        else:
            Ir = Ir + w @ src
    loss = loss + 0.5 * dt * torch.sum((Vr - target) ** 2)
loss.backward()
print(json.dumps({"loss": loss.item(), "weights": [w.grad.tolist() for w in W],
                  "params": {"hid.tau_m": tau_m.grad.item(), "hid.tau_s": tau_s.grad.item()}, "spikes": spikes}))
