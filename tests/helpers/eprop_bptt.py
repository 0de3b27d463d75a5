# Backpropagation through time of the adaptive-threshold LIF layer of samples/adaptive_lif.saltus,
# written by hand in PyTorch (float64) as an independent check of the derived e-prop formulas
# (tests/eprop.test.ts). The discrete model, one step of length dt, in Saltus's order:
#   z = H(V - (theta + beta A))                       spike test on the state at the start
#   V1 = V - sg(z) (theta + beta A); A1 = A + z       spike jump; V's reset detached (stop-gradient)
#   exact flow over dt of dV/dt = (I - V)/tau_m, dI/dt = -I/tau_s, dA/dt = -A/tau_a
#   I += W_in s_t (+ W_rec z_t when recurrent)        arrivals after the flow
# The spike's backward pass uses the pseudo-derivative psi = 0.3/theta max(0, 1 - |g|/theta)
# (Bellec et al. 2020, Methods), as the model's `surrogate` line says. Readout and loss:
#   y_{t+1} = kappa y_t + W_out z_t,  E = 1/2 sum_t |y_t - y*_t|^2.
# Reads the problem as JSON on stdin, prints {"loss", "gradWin", "gradBeta", "spikes"}.
import json
import math
import sys

import torch
from surrogate_spike import triangular_spike  # beside this script

torch.set_default_dtype(torch.float64)
p = json.load(sys.stdin)
dt, T, kappa = p["dt"], p["T"], p["kappa"]
par = p["params"]
tau_m, tau_s, tau_a, theta = par["tau_m"], par["tau_s"], par["tau_a"], par["theta"]
beta = torch.tensor(par["beta"], requires_grad=True)
inputs = torch.tensor(p["inputs"], dtype=torch.float64)
win = torch.tensor(p["win"], dtype=torch.float64, requires_grad=True)
wout = torch.tensor(p["wout"], dtype=torch.float64)
targets = torch.tensor(p["targets"], dtype=torch.float64)
wrec = torch.tensor(p["wrec"]) if p.get("wrec") is not None else None


Spike = triangular_spike(theta)


am, as_, aa = math.exp(-dt / tau_m), math.exp(-dt / tau_s), math.exp(-dt / tau_a)
# exact V(dt) from I(0): V = V0 e^{-dt/tau_m} + I0 tau_s/(tau_s - tau_m) (e^{-dt/tau_s} - e^{-dt/tau_m})
c_vi = tau_s / (tau_s - tau_m) * (as_ - am)
n_hid = win.shape[0]
V = torch.zeros(n_hid)
I = torch.zeros(n_hid)
A = torch.zeros(n_hid)
y = torch.zeros(wout.shape[0])
loss = torch.zeros(())
spikes = 0
for t in range(T):
    thr = theta + beta * A
    z = Spike.apply(V - thr)
    spikes += int(z.sum().item())
    V1 = V - z.detach() * thr
    A1 = A + z
    V = V1 * am + I * c_vi
    I = I * as_
    A = A1 * aa
    I = I + win @ inputs[t]
    if wrec is not None:
        I = I + wrec @ z
    y = kappa * y + wout @ z
    loss = loss + 0.5 * torch.sum((y - targets[t]) ** 2)
loss.backward()
print(json.dumps({"loss": loss.item(), "gradWin": win.grad.tolist(), "gradBeta": beta.grad.item(), "spikes": spikes}))
