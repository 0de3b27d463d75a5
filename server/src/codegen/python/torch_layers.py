"""PyTorch layers and networks on the grid runtime: a torch.autograd.Function whose forward is the
grid simulation of one population driven by input spike events (docs/network-step.md) and whose
backward is the exact adjoint of that simulation, computed from the recorded events (not by
autograd through a time loop); an nn.Module layer around it; and a Network module for a network
description.

Spike events, in and out, are padded per batch row:

- ``times``: float tensor (B, K), the spike times in seconds; padding is ``+inf``;
- ``index``: int64 tensor (B, K), the sending neuron of each spike; padding is ``-1``.

An entry whose index is negative or whose time is not finite is padding and is ignored; input
entries need not be sorted. Output rows list each trial's spikes in the order they happened,
padded to the longest row. Layers compose: the gradient of a layer's output spike times is
the spike-time sensitivity of the next layer's input events, so the backward pass reaches the
previous layer through its spike times.

The runtime runs on detached tensors under ``torch.no_grad`` on the device and dtype of the
layer's weight; no tensor that needs grad is written in place.
"""
import collections
import math
from typing import Dict, List, Optional, Sequence, Tuple

import torch

try:  # inside the generated package
    from .saltus_dialect import X
    from . import saltus_grid as grid
except ImportError:  # run as a script next to the files (run.py)
    from saltus_dialect import X
    import saltus_grid as grid

LayerOutput = collections.namedtuple("LayerOutput", ["times", "index", "first", "readout"])
LayerOutput.__doc__ = """A layer's outputs.

Attributes
----------
times : torch.Tensor
    (B, K) spike times of the layer's neurons in s, in the order they happened; +inf pads.
index : torch.Tensor
    (B, K) int64 neuron index of each spike; -1 pads.
first : torch.Tensor
    (B, N) the first spike time of every neuron; +inf where a neuron stays silent.
readout : torch.Tensor
    (B, N) the readout of a state (its largest grid value or its time integral) when the layer
    was built with ``readout``, else zeros.
"""


def kept_bytes(run) -> int:
    """Bytes of the tensors a forward run keeps for its backward pass (events and, where the
    derivation needs them, states at grid points).

    Parameters
    ----------
    run : saltus_grid.Run
        A run returned by ``saltus_grid.forward``.

    Returns
    -------
    int
        The total size in bytes of every tensor held by the run's records and checkpoints.
    """
    seen = set()
    total = 0

    def add(v):
        nonlocal total
        if isinstance(v, torch.Tensor):
            key = (v.data_ptr(), v.numel(), v.dtype)
            if key not in seen:
                seen.add(key)
                total += v.numel() * v.element_size()
        elif isinstance(v, (list, tuple)):
            for w in v:
                add(w)

    for rec in run.records:
        for v in rec.__dict__.values():
            add(v)
    for L in run.lives:
        for cp in L.checkpoints:
            add(cp)
        add(L.grid_values)
    return total


def pad_events(rows: Sequence[Sequence[Tuple[float, int]]], dtype=torch.float64, device=None) -> Tuple[torch.Tensor, torch.Tensor]:
    """Pads per-trial spike lists into (times, index) tensors (+inf and -1 pad).

    Parameters
    ----------
    rows : sequence of sequences of (time, index)
        One list of spikes per trial, times in s.
    dtype, device
        Of the times tensor.

    Returns
    -------
    (torch.Tensor, torch.Tensor)
        times (B, K) and index (B, K), K the longest row (at least 1).
    """
    K = max([len(r) for r in rows] + [1])
    times = torch.full((len(rows), K), math.inf, dtype=dtype, device=device)
    index = torch.full((len(rows), K), -1, dtype=torch.int64, device=device)
    for b, r in enumerate(rows):
        if r:
            times[b, :len(r)] = torch.tensor([float(t) for t, _ in r], dtype=dtype)
            index[b, :len(r)] = torch.tensor([int(i) for _, i in r], dtype=torch.int64)
    return times, index


class FrozenModel:
    """A generated model with every parameter held fixed: no parameter gradients, and for an exact
    map no state at grid points kept for the backward pass (there only dF/dp reads the
    segment-start state: docs/network-step.md, "What is kept"). Other names pass through."""

    def __init__(self, model):
        self._model = model
        self.GRAD_PARAMS = ()
        self.STATE_DEPENDENT_DERIVATIVES = bool(model.STATE_DEPENDENT_DERIVATIVES) and not model.EXACT
        quiet_exact = bool(getattr(model, "QUIET_EXACT", True))
        self.QUIET_STATE_DEPENDENT_DERIVATIVES = bool(getattr(model, "QUIET_STATE_DEPENDENT_DERIVATIVES", False)) and not quiet_exact

    def __getattr__(self, name):
        kernel = getattr(self._model, name)
        if name.startswith("incoming") and name.endswith("_vjp"):  # every incoming block's vjp
            return lambda x, p, t, weight, lam: self._frozen_vjp(kernel, x, p, t, weight, lam)
        return kernel

    def _frozen_vjp(self, kernel, x, p, t, weight, lam):
        out = kernel(x, p, t, weight, lam)
        S, G = len(self._model.STATES), len(self._model.GRAD_PARAMS)
        return tuple(out[:S + 1]) + tuple(out[S + 1 + G:])

    def incoming_vjp(self, x, p, t, weight, lam):
        return self._frozen_vjp(self._model.incoming_vjp, x, p, t, weight, lam)


class LayerSpec:
    """What a layer's Function needs besides tensors: the model module, the grid, the readout, and
    the incoming blocks its inputs feed (their indices in the model, one input and weight each)."""

    def __init__(self, model, dt: float, duration: float, param_names: Sequence[str], fixed: Dict[str, float],
                 readout: Optional[Tuple[str, str]] = None, max_spikes: int = 100000, blocks: Sequence[int] = (0,)):
        self.model = model
        self.blocks = list(blocks)
        self.dt = float(dt)
        self.duration = float(duration)
        self.param_names = list(param_names)
        self.fixed = dict(fixed)
        self.readout = readout
        self.max_spikes = int(max_spikes)
        self.last_kept_bytes = 0


def _input_trials(times: Sequence[torch.Tensor], index: Sequence[torch.Tensor]):
    """Per trial: the valid input events of each input k (population "in<k>") in listing order, and
    per input and trial their positions sorted by (time, position)."""
    trials, order = [], []
    for k, (tk, ik) in enumerate(zip(times, index)):
        order.append([])
        for b, (trow, irow) in enumerate(zip(tk.detach().cpu().tolist(), ik.detach().cpu().tolist())):
            items = [(t, i, m) for m, (t, i) in enumerate(zip(trow, irow)) if i >= 0 and math.isfinite(t)]
            if k == 0:
                trials.append({"inputs": {}, "label": 0})
            trials[b]["inputs"]["in%d" % k] = [(t, i) for t, i, _ in items]
            order[k].append([m for _, m in sorted((t, m) for t, _, m in items)])
    return trials, order


class GridLayerFunction(torch.autograd.Function):
    """One population on the grid, driven by input spike events through a dense weight per
    incoming block it feeds (spec.blocks; one block: the common case).

    forward(spec, in_times, in_index, weight, *params) -> (times, index, first, readout) with K =
    len(spec.blocks) blocks: in_times, in_index and weight one tensor each, or K tensors each, then
    in_times_1..K-1, in_index_1..K-1 and weight_1..K-1 come first in params (the layer passes them).
    Backward returns dL/d(in_times) and dL/d(weight) of every block and dL/d(param) for each
    trainable parameter, from the exact adjoint of the grid simulation (docs/network-step.md).
    """

    @staticmethod
    def forward(ctx, spec: LayerSpec, in_times: torch.Tensor, in_index: torch.Tensor, weight: torch.Tensor, *params: torch.Tensor):
        K = len(spec.blocks)
        times_k = [in_times] + list(params[0:K - 1])
        index_k = [in_index] + list(params[K - 1:2 * (K - 1)])
        weight_k = [weight] + list(params[2 * (K - 1):3 * (K - 1)])
        params = params[3 * (K - 1):]
        dtype, device = weight.dtype, weight.device
        B = in_times.shape[0]
        n_out = weight.shape[0]
        if any(t.shape[0] != B for t in times_k):
            raise ValueError("every block's input needs the same batch size (%s)" % ", ".join(str(t.shape[0]) for t in times_k))
        values = dict(spec.fixed)
        for name, p in zip(spec.param_names, params):
            values[name] = float(p)
        trials, order = _input_trials(times_k, index_k)
        if spec.readout is None:
            loss = {"kind": "ce-first-spike", "population": "layer", "tau_s": 1.0}
        else:
            kind, state = spec.readout
            loss = {"kind": "ce-max" if kind == "max" else "ce-integral", "population": "layer", "state": state}
        with X.on(dtype, device):
            pop = grid.Population("layer", n_out, spec.model, values)
            net = grid.Network(spec.duration, {"in%d" % k: w.shape[1] for k, w in enumerate(weight_k)}, [pop],
                               [{"from": "in%d" % k, "to": "layer", "weights": w.detach(), "receptor": r}
                                for k, (w, r) in enumerate(zip(weight_k, spec.blocks))], trials, loss)
            run = grid.forward(net, spec.dt, spec.max_spikes)
            # where each spike record's rows sit in the padded output, and each input arrival's rows in its input
            counts = [0] * B
            seen_in = [[0] * B for _ in range(K)]
            slots = {}
            in_slots = {}
            for e, rec in enumerate(run.records):
                rows = rec.trials.tolist()
                if rec.kind == "spike":
                    pos = []
                    for b in rows:
                        pos.append(counts[b])
                        counts[b] += 1
                    slots[e] = torch.tensor(pos, dtype=torch.int64, device=device)
                elif rec.kind == "arrival" and rec.cause < 0:
                    k, pos = rec.projection, []
                    for b in rows:
                        pos.append(order[k][b][seen_in[k][b]])
                        seen_in[k][b] += 1
                    in_slots[e] = (k, torch.tensor(pos, dtype=torch.int64, device=device))
            out_times, out_index = pad_events([s["layer"] for s in run.spikes], dtype, device)
            first = torch.full((B, n_out), math.inf, dtype=dtype, device=device)
            for b, s in enumerate(run.spikes):
                for t, i in s["layer"]:
                    if first[b, i] == math.inf:
                        first[b, i] = t
            readout = run.values.clone() if spec.readout is not None else torch.zeros((B, n_out), dtype=dtype, device=device)
        ctx.spec = spec
        ctx.run = run
        ctx.slots = slots
        ctx.in_slots = in_slots
        ctx.in_shapes = [tuple(t.shape) for t in times_k]
        ctx.n_params = len(params)
        spec.last_kept_bytes = kept_bytes(run)
        ctx.mark_non_differentiable(out_index)
        return out_times, out_index, first, readout

    @staticmethod
    def backward(ctx, g_times, g_index, g_first, g_readout):
        run = ctx.run
        spec = ctx.spec
        dtype = run.net.projections[0]["weights"].dtype
        device = run.net.projections[0]["weights"].device
        with X.on(dtype, device):
            g_times = g_times.detach().to(dtype)
            g_first = torch.where(torch.isfinite(g_first), g_first, torch.zeros_like(g_first)).detach().to(dtype)
            if spec.readout is not None:
                run.coef = g_readout.detach().to(dtype)
            else:
                run.coef = torch.zeros_like(run.coef)
            slots = ctx.slots

            def spike_time_grad(e, rec):
                pos = slots[e]
                return g_times[rec.trials, pos] + torch.where(rec.first, g_first[rec.trials, rec.neuron], torch.zeros_like(rec.time))

            out = grid.backward(run, spike_time_grad)
            g_in = [torch.zeros(shape, dtype=dtype, device=device) for shape in ctx.in_shapes]
            for kind, e, sens in out["event_times"]:
                if kind == "arrival" and e in ctx.in_slots:
                    rec = run.records[e]
                    k, pos = ctx.in_slots[e]
                    g_in[k] = g_in[k].index_put((rec.trials, pos), sens.to(dtype), accumulate=True)
            gW = out["weights"]
            gp = [torch.tensor(out["params"]["layer"][name], dtype=dtype, device=device) for name in spec.param_names]
        more = tuple(g_in[1:]) + (None,) * (len(g_in) - 1) + tuple(gW[1:])
        return (None, g_in[0], None, gW[0]) + more + tuple(gp)


class SpikingLayer(torch.nn.Module):
    """A population of one generated model driven by input spikes through a dense weight per
    incoming block it feeds.

    Parameters
    ----------
    model : module
        A generated model module (its kernels and constants).
    in_features, out_features : int
        Input neurons and neurons of this layer; with several blocks fed, ``in_features`` is one
        number for every block or a sequence of one per block.
    dt : float
        The grid step in s.
    duration : float
        The simulated time in s.
    params : dict, optional
        Parameter values (SI) overriding the model's defaults.
    trainable : sequence of str, optional
        Which of the model's trainable parameters become nn.Parameters (default: all of them).
        With none (``trainable=()``) and an exact step map, the backward pass keeps the events only.
    readout : (str, str), optional
        ("max", STATE) or ("integral", STATE): also output, per neuron, the largest grid value or
        the time integral of STATE (for a loss on a non-spiking layer).
    weight_std : float, optional
        The initial weights are drawn from N(weight_mean, weight_std**2) (default std 1/sqrt(in)).
    weight_mean : float
        See weight_std.
    dtype, device
        Of the weight and parameters; the simulation runs on them.
    via : str or sequence of str, optional
        The incoming blocks (receptors) the inputs feed, by weight name, one input and weight each,
        in this order (default: every block of the model, in declaration order). With one block the
        layer has ``weight`` and ``forward(times, index)``; with several it has ``weights``
        (by block name; ``weight`` is the first) and ``forward`` takes one times and one index
        tensor per block, as two sequences.
    """

    def __init__(self, model, in_features, out_features: int, dt: float, duration: float,
                 params: Optional[Dict[str, float]] = None, trainable: Optional[Sequence[str]] = None,
                 readout: Optional[Tuple[str, str]] = None, weight_std: Optional[float] = None,
                 weight_mean: float = 0.0, dtype=torch.float64, device=None, max_spikes: int = 100000,
                 via=None):
        super().__init__()
        names_in = list(getattr(model, "INCOMING", ())) or ["w"]
        via = list(names_in) if via is None else [via] if isinstance(via, str) else list(via)
        for v in via:
            if v not in names_in:
                raise ValueError("%s has no incoming block %r (its blocks: %s)" % (model.NAME, v, ", ".join(names_in)))
        if not via or len(set(via)) != len(via):
            raise ValueError("via must name each fed incoming block once (its blocks: %s)" % ", ".join(names_in))
        sizes = [int(in_features)] * len(via) if isinstance(in_features, int) else [int(n) for n in in_features]
        if len(sizes) != len(via):
            raise ValueError("in_features: one number, or one per fed block (%s)" % ", ".join(via))
        values = dict(model.DEFAULT_PARAMS)
        for k, v in (params or {}).items():
            if k not in values:
                raise ValueError("%s has no parameter %r (it has: %s)" % (model.NAME, k, ", ".join(model.PARAMS)))
            values[k] = float(v)
        names = list(model.GRAD_PARAMS) if trainable is None else list(trainable)
        for k in names:
            if k not in model.GRAD_PARAMS:
                raise ValueError("%s: %r is not a trainable parameter (trainable: %s)" % (model.NAME, k, ", ".join(model.GRAD_PARAMS) or "none"))
        if readout is not None and (readout[0] not in ("max", "integral") or readout[1] not in model.STATES):
            raise ValueError("readout must be ('max' | 'integral', STATE) with STATE one of %s" % ", ".join(model.STATES))
        if readout is None and not model.HAS_GUARD:
            raise ValueError("%s never fires; give the layer a readout, e.g. readout=('max', %r)" % (model.NAME, model.STATES[0]))
        self.model = model
        self.via = via
        self.in_features = sizes[0] if len(sizes) == 1 else sizes
        self.out_features = int(out_features)
        ws = []
        for n_in in sizes:
            std = weight_std if weight_std is not None else 1.0 / math.sqrt(max(1, n_in))
            ws.append(torch.nn.Parameter(torch.randn(out_features, n_in, dtype=dtype, device=device) * std + weight_mean))
        self.weight = ws[0]
        if len(ws) > 1:
            self.weights = torch.nn.ParameterDict({v: w for v, w in zip(via, ws)})
        self.model_params = torch.nn.ParameterDict({k: torch.nn.Parameter(torch.tensor(values[k], dtype=dtype, device=device)) for k in names})
        fixed = {k: v for k, v in values.items() if k not in names}
        self.spec = LayerSpec(model if names else FrozenModel(model), dt, duration, names, fixed, readout, max_spikes,
                              [names_in.index(v) for v in via])

    @property
    def last_kept_bytes(self) -> int:
        """Bytes the last forward call kept for its backward pass."""
        return self.spec.last_kept_bytes

    def forward(self, times, index) -> LayerOutput:
        """Simulates the layer for a batch of input spike events.

        Parameters
        ----------
        times : torch.Tensor, or a sequence of them (one per fed block, in ``via`` order)
            (B, K) input spike times in s (+inf pads); may require grad.
        index : torch.Tensor, or a sequence of them (one per fed block)
            (B, K) int64 input neuron of each spike (-1 pads).

        Returns
        -------
        LayerOutput
            (times, index, first, readout) of this layer.
        """
        seq = isinstance(times, (list, tuple)) and isinstance(index, (list, tuple))
        times_k = list(times) if seq else [times]
        index_k = list(index) if seq else [index]
        if len(times_k) != len(self.via) or len(index_k) != len(self.via) or not all(isinstance(t, torch.Tensor) for t in times_k + index_k):
            raise ValueError("forward takes one times and one index tensor per fed block (%s)" % ", ".join(self.via))
        times_k = [t.to(dtype=self.weight.dtype, device=self.weight.device) for t in times_k]
        index_k = [i.to(device=self.weight.device) for i in index_k]
        ws = [self.weights[v] for v in self.via] if len(self.via) > 1 else [self.weight]
        params = [self.model_params[k] for k in self.spec.param_names]
        return LayerOutput(*GridLayerFunction.apply(self.spec, times_k[0], index_k[0], ws[0], *times_k[1:], *index_k[1:], *ws[1:], *params))

    def eprop(self, inputs: torch.Tensor, targets: torch.Tensor, readout: torch.Tensor, kappa: float,
              feedback: str = "exact", seed: int = 0) -> dict:
        """e-prop on this layer (docs/eprop.md): see ``eprop_backward``; adds the gradients to ``.grad``."""
        return eprop_backward(self, inputs, targets, readout, kappa, feedback, seed)


def eprop_backward(layer: "SpikingLayer", inputs: torch.Tensor, targets: torch.Tensor, readout: torch.Tensor,
                   kappa: float, feedback: str = "exact", seed: int = 0) -> dict:
    """e-prop (docs/eprop.md) on a layer fed by input spike trains on the grid and read out by leaky
    integrators ``y(t+1) = kappa y(t) + readout z(t)`` with the loss ``E = 1/2 sum_t |y - targets|^2``.

    Online and without an autograd graph: per synapse the model's derived eligibility vector and
    its trace filtered by the readout, a learning signal per neuron and step (``feedback``:
    "exact" or "symmetric", the readout's transpose, which for this readout is the exact dE/dz;
    "random", a fixed random matrix drawn from ``seed``); nothing grows with the steps. The
    gradients are *added* to ``.grad`` of ``layer.weight`` (of each fed block's weight), of the layer's trainable parameters
    and of ``readout`` when it requires grad, so a torch optimizer can step on them.

    Parameters
    ----------
    layer : SpikingLayer
        Its model must have eligibility traces (a ``surrogate`` line).
    inputs : torch.Tensor, or a sequence of them (one per fed block, in ``via`` order)
        (B, T, in_features) input spikes per step, 0 or 1; with several blocks fed, each block's
        gradient goes to ``.grad`` of its weight in ``layer.weights``.
    targets : torch.Tensor
        (B, T, K) the readout's targets per step.
    readout : torch.Tensor
        (K, out_features) readout weights.
    kappa : float
        The readout's decay per step, exp(-dt / tau_out).

    Returns
    -------
    dict
        {"loss": E, "spikes": spikes of the pass, "kept_bytes": bytes of the arrays kept}.
    """
    w = layer.weight
    values = dict(layer.spec.fixed)
    values.update({k: float(v) for k, v in layer.model_params.items()})
    task = {"dt": layer.spec.dt, "wout": readout.detach(), "targets": targets.detach(), "kappa": float(kappa)}
    if layer.spec.blocks == [0]:
        task.update(inputs=inputs.detach(), win=w.detach())
        ws = None
    else:  # several blocks (receptors), or one that is not the first: the layer task's "blocks"
        inputs_k = list(inputs) if isinstance(inputs, (list, tuple)) else [inputs]
        if len(inputs_k) != len(layer.via) or not all(isinstance(t, torch.Tensor) for t in inputs_k):
            raise ValueError("e-prop takes one input tensor per fed block (%s)" % ", ".join(layer.via))
        ws = {v: (layer.weights[v] if len(layer.via) > 1 else w) for v in layer.via}
        task["blocks"] = {v: {"inputs": t.detach(), "win": ws[v].detach()} for v, t in zip(layer.via, inputs_k)}
    with X.on(w.dtype, w.device):
        out = grid.eprop_layer(layer.model, task, values, feedback, seed)

    def add(param, value):
        g = torch.as_tensor(value, dtype=param.dtype, device=param.device)
        param.grad = g if param.grad is None else param.grad + g

    if ws is None:
        add(w, out["weights"])
    else:
        for v, param in ws.items():
            add(param, out["weights"][v])
    for k, v in layer.model_params.items():
        if k in out["params"]:
            add(v, out["params"][k])
    if readout.requires_grad:
        add(readout, out["readout"])
    return {"loss": out["loss"], "spikes": out["spikes"], "kept_bytes": out["kept_bytes"]}


def first_spike_logits(first: torch.Tensor, duration: float, tau: float) -> torch.Tensor:
    """-t_first / tau per neuron, silent neurons at t_first = duration (the ce-first-spike loss's logits).

    Parameters
    ----------
    first : torch.Tensor
        (B, N) first spike times (+inf: silent).
    duration, tau : float
        In s.

    Returns
    -------
    torch.Tensor
        (B, N) logits for torch.nn.functional.cross_entropy.
    """
    return -torch.where(torch.isfinite(first), first, torch.full_like(first, float(duration))) / tau


class _NetworkFunction(torch.autograd.Function):
    @staticmethod
    def forward(ctx, owner, *tensors):
        net = owner._runtime_network()
        dtype, device = owner._dtype_device()
        with X.on(dtype, device):
            run = grid.forward(net, owner.dt, owner.max_spikes)
        owner.last_run = run
        owner.last_kept_bytes = kept_bytes(run)
        ctx.owner = owner
        ctx.run = run
        return torch.tensor(run.loss, dtype=dtype, device=device)

    @staticmethod
    def backward(ctx, g):
        owner = ctx.owner
        dtype, device = owner._dtype_device()
        with X.on(dtype, device):
            out = grid.backward(ctx.run)
        owner.last_gradient = out
        grads = [w.to(dtype) * g for w in out["weights"]]
        for pop, name in owner._param_keys:
            grads.append(torch.tensor(out["params"][pop][name], dtype=dtype, device=device) * g)
        return (None,) + tuple(grads)


class GridNetwork(torch.nn.Module):
    """A network description (docs/network-step.md, "Network description") as a module whose
    forward returns the description's loss, summed over its trials, with the exact gradient.

    Parameters
    ----------
    description : dict
        The parsed NET.json (SI values).
    models : dict
        Model name -> generated model module.
    dt : float
        The grid step in s.
    dtype, device
        Of the weights and parameters.
    """

    def __init__(self, description: dict, models: dict, dt: float, dtype=torch.float64, device=None, max_spikes: int = 100000,
                 file_delays: Optional[dict] = None):
        super().__init__()
        self.description = description
        self.models = dict(models)
        self.file_delays = dict(file_delays or {})  # the model file's delays (grid.load_network)
        self.dt = float(dt)
        self.max_spikes = int(max_spikes)
        base = grid.load_network(description, self.models, self.file_delays)
        self.weights = torch.nn.ParameterList([torch.nn.Parameter(torch.tensor(p["weights"], dtype=dtype, device=device))
                                               for p in description["projections"]])
        self._param_keys: List[Tuple[str, str]] = []
        params = {}
        for pop in base.populations:
            values = dict(pop.model.DEFAULT_PARAMS)
            values.update(description["populations"][pop.name].get("params") or {})
            for name in pop.model.GRAD_PARAMS:
                self._param_keys.append((pop.name, name))
                params["%s__%s" % (pop.name, name)] = torch.nn.Parameter(torch.tensor(float(values[name]), dtype=dtype, device=device))
        self.model_params = torch.nn.ParameterDict(params)
        self.last_run = None
        self.last_gradient = None
        self.last_kept_bytes = 0

    def _dtype_device(self):
        return self.weights[0].dtype, self.weights[0].device

    def _runtime_network(self):
        desc = dict(self.description)
        desc["projections"] = [dict(p, weights=w.detach()) for p, w in zip(self.description["projections"], self.weights)]
        pops = {}
        for name, p in self.description["populations"].items():
            q = dict(p)
            if "model" in p:
                ps = dict(p.get("params") or {})
                for pop, pname in self._param_keys:
                    if pop == name:
                        ps[pname] = float(self.model_params["%s__%s" % (pop, pname)])
                q["params"] = ps
            pops[name] = q
        desc["populations"] = pops
        dtype, device = self._dtype_device()
        with X.on(dtype, device):
            return grid.load_network(desc, self.models, self.file_delays)

    def forward(self) -> torch.Tensor:
        """Runs every trial; returns the loss (a 0-d tensor) whose backward is the exact gradient."""
        tensors = list(self.weights) + [self.model_params["%s__%s" % k] for k in self._param_keys]
        return _NetworkFunction.apply(self, *tensors)

    def report(self) -> dict:
        """The runner contract of docs/network-step.md for the last forward and backward calls."""
        run = self.last_run
        out = {"loss": run.loss, "spikes": {k: [[t, i] for t, i in v] for k, v in run.spikes[0].items()},
               "weights": [w.grad.tolist() if w.grad is not None else None for w in self.weights],
               "params": {"%s.%s" % k: float(self.model_params["%s__%s" % k].grad) for k in self._param_keys}}
        if len(run.spikes) > 1:
            out["trials"] = len(run.spikes)
            out["spikes_per_trial"] = [{k: [[t, i] for t, i in v] for k, v in s.items()} for s in run.spikes]
        last = getattr(self, "last_gradient", None)
        if last is not None and any("delays" in pr for pr in run.net.projections):
            # transmission delays (delay_s) are fixed values here: their gradient is reported, not trained
            out["delays"] = [d.tolist() for d in last["delays"]]
        return out
