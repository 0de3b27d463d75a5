# The surrogate spike of the e-prop reference scripts (eprop_bptt.py, eprop_net_bptt.py,
# eprop_receptors_bptt.py, eprop_net_receptors_bptt.py): forward the Heaviside step H(g) of the
# guard, backward the triangular pseudo-derivative 0.3 / theta * max(0, 1 - |g| / theta) that
# the samples declare (Bellec et al. 2020), through PyTorch autograd.
import torch


def triangular_spike(theta):
    """An autograd Function: spike = H(g), d spike / dg = 0.3 / theta * max(0, 1 - |g| / theta)."""

    class Spike(torch.autograd.Function):
        @staticmethod
        def forward(ctx, g):
            psi = 0.3 / theta * torch.clamp(1 - torch.abs(g) / theta, min=0)
            ctx.save_for_backward(psi)
            return (g > 0).to(g.dtype)

        @staticmethod
        def backward(ctx, grad):
            (psi,) = ctx.saved_tensors
            return grad * psi

    return Spike
