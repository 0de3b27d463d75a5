# Backpropagation through time of the two-receptor LIF layer of samples/receptors.saltus
# (neuron Balanced), written by hand in PyTorch (float64) as an independent check of the generated
# e-prop for several incoming blocks (tests/eprop-receptors.test.ts). The discrete model, one
# step of length dt, in Saltus's order (docs/eprop.md):
#   z = H(V - theta)                                   spike test on the state at the start
#   V1 = V (1 - sg(z))                                 spike jump V := 0, detached (stop-gradient)
#   exact flow over dt of dV/dt = (Ie - Ii - V)/tau_m, dIe/dt = -Ie/tau_e, dIi/dt = -Ii/tau_i
#   Ie += W_exc s_exc(t), then Ii += W_inh s_inh(t)    arrivals after the flow, block by block
# The spike's backward pass uses the pseudo-derivative psi = 0.3/theta max(0, 1 - |V - theta|/theta)
# (Bellec et al. 2020, Methods), as the model's `surrogate` line says. Readout and loss:
#   y_{t+1} = kappa y_t + W_out z_t,  E = 1/2 sum_t |y_t - y*_t|^2.
# tau_e and tau_i are leaves of the graph (trainable). Reads the problem as JSON on stdin,
# prints {"loss", "gradWin": {"w_exc", "w_inh"}, "gradParams": {"tau_e", "tau_i"}, "spikes"}.
import json
import sys

import torch
from surrogate_spike import triangular_spike  # beside this script

torch.set_default_dtype(torch.float64)
p = json.load(sys.stdin)
dt, T, kappa = p["dt"], p["T"], p["kappa"]
par = p["params"]
tau_m, theta = par["tau_m"], par["theta"]
tau_e = torch.tensor(par["tau_e"], requires_grad=True)
tau_i = torch.tensor(par["tau_i"], requires_grad=True)
blocks = {b["weight"]: b for b in p["blocks"]}
s_exc = torch.tensor(blocks["w_exc"]["inputs"], dtype=torch.float64)
s_inh = torch.tensor(blocks["w_inh"]["inputs"], dtype=torch.float64)
w_exc = torch.tensor(blocks["w_exc"]["win"], dtype=torch.float64, requires_grad=True)
w_inh = torch.tensor(blocks["w_inh"]["win"], dtype=torch.float64, requires_grad=True)
wout = torch.tensor(p["wout"], dtype=torch.float64)
targets = torch.tensor(p["targets"], dtype=torch.float64)


Spike = triangular_spike(theta)


am = torch.exp(torch.tensor(-dt / tau_m))
ae, ai = torch.exp(-dt / tau_e), torch.exp(-dt / tau_i)
# exact V(dt): V0 e^{-dt/tau_m} + Ie0 tau_e/(tau_e - tau_m) (e^{-dt/tau_e} - e^{-dt/tau_m}) - (the same for Ii)
c_ve = tau_e / (tau_e - tau_m) * (ae - am)
c_vi = tau_i / (tau_i - tau_m) * (ai - am)
n_hid = w_exc.shape[0]
V = torch.zeros(n_hid)
Ie = torch.zeros(n_hid)
Ii = torch.zeros(n_hid)
y = torch.zeros(wout.shape[0])
loss = torch.zeros(())
spikes = 0
for t in range(T):
    z = Spike.apply(V - theta)
    spikes += int(z.sum().item())
    V1 = V * (1 - z.detach())
    V = V1 * am + Ie * c_ve - Ii * c_vi
    Ie = Ie * ae
    Ii = Ii * ai
    Ie = Ie + w_exc @ s_exc[t]
    Ii = Ii + w_inh @ s_inh[t]
    y = kappa * y + wout @ z
    loss = loss + 0.5 * torch.sum((y - targets[t]) ** 2)
loss.backward()
print(json.dumps({"loss": loss.item(), "gradWin": {"w_exc": w_exc.grad.tolist(), "w_inh": w_inh.grad.tolist()},
                  "gradParams": {"tau_e": tau_e.grad.item(), "tau_i": tau_i.grad.item()}, "spikes": spikes}))
