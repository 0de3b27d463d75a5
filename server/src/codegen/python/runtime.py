# The grid runtime of generated Python code: a batch of trials simulated on a time grid with
# events inside steps, and the exact gradient of that simulation (docs/network-step.md).
# It is the same algorithm as Saltus's own grid simulator (server/src/grid/), vectorised over
# trials and neurons: arrays are shaped (trials, neurons). Model kernels (map_step, map_jvp,
# map_vjp, flow, guard, guard_grad, spike_jump, spike_vjp, incoming_jump, incoming_vjp, and
# incoming<k>_jump/_vjp for a model's further incoming blocks) come from the generated model
# modules; this file knows no model. A projection's "receptor" (default 0) picks the block.
#
# Array operations go through the `X` dialect object defined above this text by the
# generator (NumPy, or PyTorch tensors on any device and dtype), so one runtime serves both.
# Nothing here allocates per neuron; loops run over steps, events and sub-steps.
# Transmission delays (a projection's "delays"[to][from], docs/network-step.md item 6): a
# spike of neuron j at s is queued per trial for each receiving neuron at s + delays[i][j]
# (neurons with equal delays share one arrival; at or after the duration: dropped); such an
# arrival advances and jumps its own neurons only, one trial at a time. Its time sensitivity
# per receiving neuron is dL/d(delay) of that synapse.
# Quiet periods (`quiet for D`, docs/network-step.md "Quiet periods"): a spike starts a
# per-neuron countdown to s + D (`qend`); while it runs the neuron's segments use the quiet
# map (quiet_map_* kernels), its guard is not tested, arrivals still jump it; the end is a
# "quiet-end" record located inside its step (before arrivals at its instant), which the
# backward pass walks like grid/backward.ts: lambda unchanged, its time sensitivity handed to
# the spike that started it, dL/dp += T dD/dp.

import heapq

GAUSS_NODES = (0.5 - 15 ** 0.5 / 10, 0.5, 0.5 + 15 ** 0.5 / 10)
GAUSS_WEIGHTS = (5 / 18, 8 / 18, 5 / 18)
SUBSTEP_RATE_BOUND = 0.2
MAX_SUBSTEPS = 64


def incoming_kernels(model, pr):
    """The jump and vjp kernels of the incoming block a projection reaches (its "receptor", default 0)."""
    r = int(pr.get("receptor", 0))
    stem = "incoming" if r == 0 else "incoming%d" % r
    return getattr(model, stem + "_jump"), getattr(model, stem + "_vjp")


class GridError(Exception):
    """A simulation that cannot go on (a diverging state, a reset on the fired side, too many spikes)."""


def substeps(model, dt, quiet=False):
    """Sub-steps of the step map per grid step (step/substeps.ts): 1 for an exact map, else the fewest
    power of two m <= 64 with RATE * dt / m <= 0.2 (quiet: the quiet mode's map and rate)."""
    if (model.QUIET_EXACT if quiet else model.EXACT):
        return 1
    rate = model.QUIET_RATE if quiet else model.RATE
    m = 1
    while m < MAX_SUBSTEPS and rate * dt / m > SUBSTEP_RATE_BOUND:
        m *= 2
    return m


def _select(q, quiet, normal):
    """Per element: the quiet mode's value where q, else the normal one (lists of arrays)."""
    return [X.where(q, b, a) for a, b in zip(normal, quiet)]


def _crossed(direction, g0, g1):
    up = (g0 < 0) & (g1 >= 0)
    down = (g0 > 0) & (g1 <= 0)
    if direction == "up":
        return up
    if direction == "down":
        return down
    return up | down


def _jump_crossed(direction, g0, g1):
    """A jump from guard value g0 to g1 fires the neuron (docs/language.md, "Spikes fired by jumps"):
    up g0 <= 0 < g1, down g0 >= 0 > g1; a NaN g0 (not touched at this instant) never does."""
    up = (g0 <= 0) & (g1 > 0)
    down = (g0 >= 0) & (g1 < 0)
    if direction == "up":
        return up
    if direction == "down":
        return down
    return up | down


def _fired_side(direction, g):
    if direction == "up":
        return g > 0
    if direction == "down":
        return g < 0
    return X.zeros_bool(g.shape)


class Population:
    """One model population: its kernels, parameter values and initial state."""

    def __init__(self, name, size, model, params=None, initial=None):
        self.name = name
        self.size = int(size)
        self.model = model
        values = dict(model.DEFAULT_PARAMS)
        values.update(params or {})
        self.params = [X.scalar(values[p]) for p in model.PARAMS]
        init = dict(model.INITIAL)
        init.update(initial or {})
        self.initial = [float(init[s]) for s in model.STATES]


class Network:
    """Populations (inputs: a size; models: Population), dense projections weights[to][from],
    trials ({"inputs": {population: [(t, i), ...]}, "label": k}) and a loss (docs/codegen.md)."""

    def __init__(self, duration, inputs, populations, projections, trials, loss):
        self.duration = float(duration)
        self.inputs = dict(inputs)
        self.populations = list(populations)
        self.projections = [dict(p, weights=X.array(p["weights"])) for p in projections]
        self.trials = list(trials)
        self.loss = dict(loss)


class _Live:
    def __init__(self, index, pop, B, dt, lossing, integral):
        self.index = index
        self.pop = pop
        self.model = pop.model
        self.S = len(pop.model.STATES)
        self.n = pop.size
        self.m = substeps(pop.model, dt)
        self.x = [X.full((B, self.n), v) for v in pop.initial]
        self.tau = X.full((B, self.n), 0.0)
        self.start = X.full_int((B, self.n), -1)
        self.fired = X.zeros_bool((B, self.n))
        self.loss_pop = lossing
        self.needs_starts = (not pop.model.EXACT) or pop.model.STATE_DEPENDENT_DERIVATIVES or (lossing and integral)
        # a quiet period: its sub-steps, its duration D (0: none) with dD/dp, and per (trial,
        # neuron) the end of the current one (inf: not quiet) and the spike record that started it
        self.has_quiet = bool(getattr(pop.model, "HAS_QUIET", False))
        self.qdur = 0.0
        if self.has_quiet:
            self.mq = substeps(pop.model, dt, True)
            out = pop.model.quiet_duration(pop.params)
            self.qdur = float(out[0])
            if not self.qdur >= 0:
                raise GridError("%s: the quiet period lasts %g s; a duration must not be negative (0: no quiet period)" % (pop.name, self.qdur))
            self.qdur_grad = list(out[1:])
            self.needs_starts = self.needs_starts or (not pop.model.QUIET_EXACT) or pop.model.QUIET_STATE_DEPENDENT_DERIVATIVES
        self.qend = X.full((B, self.n), float("inf"))
        self.qcause = X.full_int((B, self.n), -1)
        self.checkpoints = []
        self.grid_values = None
        self.inbound = []
        self.outbound = []
        # spikes fired by jumps at the current instant of each trial: the guard at its start
        # (NaN: not touched), who fired there, who starts on the fired side (t = 0), the last arrival
        self.jref = X.full((B, self.n), float("nan"))
        self.jfired = X.zeros_bool((B, self.n))
        self.jinit = X.zeros_bool((B, self.n))
        self.jlast = X.full_int((B,), -1)
        # the last arrival with targets (a projection with delays) onto each neuron at the instant
        self.jlast_n = X.full_int((B, self.n), -1)

    def _kernels(self, quiet):
        M = self.model
        if quiet:
            return M.quiet_map_step, M.quiet_map_jvp, M.quiet_map_vjp, self.mq
        return M.map_step, M.map_jvp, M.map_vjp, self.m

    def _mode(self, q):
        """None: every element normal; True: every element quiet; else q (a mixed batch)."""
        if q is None or not self.has_quiet or not bool(X.any(q)):
            return None
        return True if bool(X.all(q)) else q

    # the step map in m sub-steps over [a, a + h], per element; q: per element in the quiet mode
    def apply(self, x, a, h, q=None):
        mode = self._mode(q)
        if mode is None or mode is True:
            return self._apply(x, a, h, mode is True)
        return _select(q, self._apply(x, a, h, True), self._apply(x, a, h, False))

    def _apply(self, x, a, h, quiet):
        step, _, _, m = self._kernels(quiet)
        sub = h / m
        for s in range(m):
            x = list(step(x, self.pop.params, a + s * sub, sub))
        return x

    def apply_rate(self, x, a, u, q=None):
        mode = self._mode(q)
        if mode is None or mode is True:
            return self._apply_rate(x, a, u, mode is True)
        yq, rq = self._apply_rate(x, a, u, True)
        yn, rn = self._apply_rate(x, a, u, False)
        return _select(q, yq, yn), _select(q, rq, rn)

    def _apply_rate(self, x, a, u, quiet):
        _, jvp, _, m = self._kernels(quiet)
        sub = u / m
        rate = [X.zeros_like(u) for _ in range(self.S)]
        for s in range(m):
            out = jvp(x, self.pop.params, a + s * sub, sub, rate)
            S = self.S
            x = list(out[:S])
            rate = [out[S + i] + out[2 * S + i] / m + out[3 * S + i] * (s / m) for i in range(S)]
        return x, rate

    def vjp(self, xa, a, h, lam, grads, q=None):
        """(dG/dx)^T lam, lam . dG/dh, lam . dG/da; grads[q] += lam . dG/dp_q (per element, summed by the caller)."""
        mode = self._mode(q)
        if mode is None or mode is True:
            return self._vjp(xa, a, h, lam, grads, mode is True)
        gq = None if grads is None else [X.zeros_like(h) for _ in grads]
        gn = None if grads is None else [X.zeros_like(h) for _ in grads]
        lq, hq, aq = self._vjp(xa, a, h, lam, gq, True)
        ln, hn, an = self._vjp(xa, a, h, lam, gn, False)
        if grads is not None:
            for k in range(len(grads)):
                grads[k] = grads[k] + X.where(q, gq[k], gn[k])
        return _select(q, lq, ln), X.where(q, hq, hn), X.where(q, aq, an)

    def _vjp(self, xa, a, h, lam, grads, quiet):
        step, _, vjp, m = self._kernels(quiet)
        sub = h / m
        starts = [xa]
        y = xa
        for s in range(m - 1):
            y = list(step(y, self.pop.params, a + s * sub, sub))
            starts.append(y)
        S = self.S
        G = len(self.model.GRAD_PARAMS)
        dh = X.zeros_like(h)  # arrays even where the kernel's outputs are constants (a guard state without flow)
        da = X.zeros_like(h)
        for s in range(m - 1, -1, -1):
            out = vjp(starts[s], self.pop.params, a + s * sub, sub, lam)
            fh, ft = out[S], out[S + 1]
            dh = dh + fh / m + ft * (s / m)
            da = da + ft
            if grads is not None:
                for k in range(G):
                    grads[k] = grads[k] + out[S + 2 + k]
            lam = list(out[:S])
        return lam, dh, da

    def flow(self, x, t, q=None):
        mode = self._mode(q)
        if mode is None:
            return list(self.model.flow(x, self.pop.params, t))
        fq = list(self.model.quiet_flow(x, self.pop.params, t))
        return fq if mode is True else _select(q, fq, list(self.model.flow(x, self.pop.params, t)))


def _take(arrs, rows, cols=None):
    return [a[rows] if cols is None else a[rows, cols] for a in arrs]


def _put(arrs, rows, values, cols=None):
    for a, v in zip(arrs, values):
        if cols is None:
            a[rows] = v
        else:
            a[rows, cols] = v


def _locate(live, x, a, h, g0, g1):
    """Roots u in (0, h] of the guard along the segment, vectorised (as grid/forward.ts `locate`)."""
    G = live.model
    lo = X.zeros_like(h)
    hi = X.copy(h)
    glo = X.copy(g0)
    u = h * g0 / (g0 - g1)
    bad = ~((u > lo) & (u < hi))
    u = X.where(bad, 0.5 * h, u)
    done = g1 == 0
    root = X.where(done, h, u)
    for _ in range(100):
        if bool(X.all(done)):
            break
        y, rate = live.apply_rate(x, a, u)
        t = a + u
        g = G.guard(y, live.pop.params, t)[0]
        gx_gt_gp = G.guard_grad(y, live.pop.params, t)
        S = live.S
        dg = gx_gt_gp[S]
        for i in range(S):
            dg = dg + gx_gt_gp[i] * rate[i]
        hit = (g == 0) & ~done
        root = X.where(hit, u, root)
        done = done | hit
        same = (g < 0) == (glo < 0)
        lo = X.where(same, u, lo)
        glo = X.where(same, g, glo)
        hi = X.where(same, hi, u)
        nxt = u - g / dg
        out_of = ~((nxt > lo) & (nxt < hi)) | ~X.isfinite(nxt)
        nxt = X.where(out_of, 0.5 * (lo + hi), nxt)
        conv = (X.abs(nxt - u) <= 4e-16 * X.maximum(X.abs(u), h * 1e-3)) | (hi - lo <= 4e-16 * h)
        newly = conv & ~done
        root = X.where(newly, nxt, root)
        done = done | newly
        u = X.where(done, u, nxt)
    return X.where(done, root, u)


def _crossing_times(live, e):
    """Per (trial, neuron): the crossing time in (tau, e] or inf (as grid/forward.ts `crossing`)."""
    G = live.model
    a = live.tau
    h = e[:, None] - a
    positive = h > 0
    if live.has_quiet:
        positive = positive & ~(live.qend < float("inf"))  # a quiet neuron's guard is not tested
    g0 = G.guard(live.x, live.pop.params, a)[0]
    hh = X.where(positive, h, X.zeros_like(h))
    y = live.apply(live.x, a, hh)
    g1 = G.guard(y, live.pop.params, a + hh)[0]
    finite = X.isfinite(g1)
    cross = positive & finite & _crossed(G.DIRECTION, g0, g1)
    out = X.full(h.shape, float("inf"))
    # a flow that blows up before the segment's end: bisect for a finite point on the fired side
    blow = positive & ~finite
    if bool(X.any(blow)):
        lo = X.zeros_like(h)
        hi = X.copy(hh)
        found = X.zeros_bool(h.shape)
        end = X.copy(hh)
        gend = X.copy(g1)
        for _ in range(80):
            mid = 0.5 * (lo + hi)
            ym = live.apply(live.x, a, mid)
            gm = G.guard(ym, live.pop.params, a + mid)[0]
            todo = blow & ~found
            nonfin = todo & ~X.isfinite(gm)
            hit = todo & X.isfinite(gm) & _crossed(G.DIRECTION, g0, gm)
            hi = X.where(nonfin, mid, hi)
            lo = X.where(todo & ~nonfin & ~hit, mid, lo)
            end = X.where(hit, mid, end)
            gend = X.where(hit, gm, gend)
            found = found | hit
        cross = cross | found
        hh = X.where(found, end, hh)
        g1 = X.where(found, gend, g1)
    if bool(X.any(cross)):
        rows, cols = X.nonzero(cross)
        xs = _take(live.x, rows, cols)
        root = _locate(live, xs, a[rows, cols], hh[rows, cols], g0[rows, cols], g1[rows, cols])
        out[rows, cols] = a[rows, cols] + root
    return out


class Record:
    """One logged event for a set of trials (the rows of its arrays)."""

    def __init__(self, kind, step, trials, time, pop, **kw):
        self.kind = kind
        self.step = step
        self.trials = trials
        self.time = time
        self.pop = pop
        self.__dict__.update(kw)


class Run:
    pass


def forward(net, dt, max_spikes=100000):
    """Runs every trial of `net` on the grid of step dt; returns a Run for `backward`."""
    B = len(net.trials)
    dt = float(dt)
    T = net.duration
    steps = max(1, int(-(-(T / dt - 1e-9) // 1)))
    names = [p.name for p in net.populations]
    loss = net.loss
    lp = names.index(loss["population"])
    integral = loss["kind"] in ("state-integral", "ce-integral")
    lives = [_Live(i, p, B, dt, i == lp, integral) for i, p in enumerate(net.populations)]
    L0 = lives[lp]
    ls = L0.model.STATES.index(loss["state"]) if "state" in loss else -1
    for j, pr in enumerate(net.projections):
        if pr["to"] in names:
            lives[names.index(pr["to"])].inbound.append(j)
        if pr["from"] in names:
            lives[names.index(pr["from"])].outbound.append(j)
    if loss["kind"] == "ce-max":
        L0.grid_values = X.full((steps + 1, B, L0.n), 0.0)
    firing = [L for L in lives if L.model.HAS_GUARD]
    quieting = [L for L in lives if L.qdur > 0]

    # input arrivals per target population: sorted (time, projection, order), padded with inf
    pending = {}
    for L in lives:
        rows = []
        for b, trial in enumerate(net.trials):
            items = []
            seq = 0
            for j, pr in enumerate(net.projections):
                if pr["from"] in net.inputs and "delays" not in pr:
                    for (t, i) in trial["inputs"].get(pr["from"], []):
                        if pr["to"] == L.pop.name:
                            items.append((float(t), seq, j, int(i)))
                        seq += 1
            items.sort()
            rows.append(items)
        K = max([len(r) for r in rows] + [1])
        tim = X.full((B, K), float("inf"))
        proj = X.full_int((B, K), -1)
        src = X.full_int((B, K), -1)
        for b, r in enumerate(rows):
            for k, (t, _, j, i) in enumerate(r):
                tim[b, k] = t
                proj[b, k] = j
                src[b, k] = i
        pending[L.index] = (tim, proj, src, X.full_int((B,), 0))

    def next_input(L):
        tim, _, _, ptr = pending[L.index]
        K = tim.shape[1]
        return X.where(ptr < K, X.gather_rows(tim, X.clamp_int(ptr, K - 1)), X.full((B,), float("inf")))

    # arrivals of projections with delays: per trial a heap of (time, seq, projection, source, cause, targets)
    delayed = [[] for _ in range(B)]
    dseq = [0]

    def schedule(b, j, src, s, cause):
        pr = net.projections[j]
        same = pr["from"] == pr["to"]
        groups = {}
        for n, row in enumerate(pr["delays"]):
            if same and n == src:
                continue
            groups.setdefault(float(row[src]), []).append(n)
        for d in sorted(groups):
            if s + d < T:
                heapq.heappush(delayed[b], (s + d, dseq[0], j, src, cause, tuple(groups[d])))
                dseq[0] += 1

    for j, pr in enumerate(net.projections):
        if pr["from"] in net.inputs and "delays" in pr:
            for b, trial in enumerate(net.trials):
                for (t, i) in trial["inputs"].get(pr["from"], []):
                    schedule(b, j, int(i), float(t), -1)

    def next_delayed(L):
        """The earliest queued arrival with a delay into L, per trial (inf when none)."""
        out = X.full((B,), float("inf"))
        for b in range(B):
            best = min([it[0] for it in delayed[b] if net.projections[it[2]]["to"] == L.pop.name] + [float("inf")])
            out[b] = best
        return out

    def next_any_delayed():
        out = X.full((B,), float("inf"))
        for b in range(B):
            if delayed[b]:
                out[b] = delayed[b][0][0]
        return out

    run = Run()
    run.net, run.dt, run.steps, run.lives, run.records = net, dt, steps, lives, []
    run.spikes = [{L.pop.name: [] for L in lives} for _ in range(B)]
    run.loss_integral = X.full((B,), 0.0)
    values = X.full((B, L0.n), float("nan") if loss["kind"] in ("spike-time", "ce-first-spike") else 0.0)
    spike_count = X.full_int((B,), 0)
    records = run.records
    all_rows = X.arange(B)

    # the current instant per trial (spikes fired by jumps), opened at t = 0 with the initial state
    run.inst = X.full((B,), 0.0)
    for L in firing:
        L.jref = L.model.guard([X.copy(v) for v in L.x], L.pop.params, X.full((B, L.n), 0.0))[0] + X.zeros_like(L.jref)
        L.jinit = _fired_side(L.model.DIRECTION, L.jref)
    run.firing = firing

    def emit(L, rows, n, s, step, by_jump=None):
        """A spike of neurons n (per row) of L at time s (per row), already advanced there."""
        x_pre = _take(L.x, rows, n)
        first = ~L.fired[rows, n]
        L.fired[rows, n] = True
        r = len(records)
        records.append(Record("spike", step, rows, s, L.index, neuron=n, x_pre=x_pre, first=first, start=L.start[rows, n],
                              by_jump=by_jump, quiet=L.qdur > 0))
        _put(L.x, rows, L.model.spike_jump(x_pre, L.pop.params, s), n)
        L.start[rows, n] = r
        after = L.model.guard(_take(L.x, rows, n), L.pop.params, s)[0]
        if bool(X.any(~X.isfinite(after) | _fired_side(L.model.DIRECTION, after))):
            raise GridError("%s: a neuron is on the fired side of its threshold right after its own spike; its spike jump must leave it below the threshold" % L.pop.name)
        if by_jump is not None:
            L.jref[rows, n] = after
        if L.qdur > 0:  # the quiet period starts: its countdown runs to s + D
            L.qend[rows, n] = s + L.qdur
            L.qcause[rows, n] = r
        for b, t, i in zip(X.tolist(rows), X.tolist(s), X.tolist(n)):
            run.spikes[b][L.pop.name].append((t, i))
        if L.loss_pop and loss["kind"] in ("spike-time", "ce-first-spike"):
            values[rows, n] = X.where(first, s, values[rows, n])
        spike_count[rows] = spike_count[rows] + 1
        if bool(X.any(spike_count > max_spikes)):
            raise GridError("more than %d spikes in a trial: stopped (check the weights' units)" % max_spikes)
        for j in L.outbound:
            if "delays" in net.projections[j]:
                for b, t, i in zip(X.tolist(rows), X.tolist(s), X.tolist(n)):
                    schedule(b, j, i, t, r)
            else:
                _deliver(run, lives, names, net, j, rows, n, s, r, step, advance)

    def advance(L, rows, cols, to):
        """Neurons (rows, cols) of L to time `to` (per row), integrating the loss on the way."""
        a = L.tau[rows, cols] if cols is not None else L.tau[rows]
        tt = to if cols is not None else to[:, None]
        h = tt - a
        h = X.where(h > 0, h, X.zeros_like(h))
        xs = _take(L.x, rows, cols)
        qm = None
        if L.has_quiet:
            qm = (L.qend[rows, cols] if cols is not None else L.qend[rows]) < float("inf")
        if L.loss_pop and integral:
            acc = X.zeros_like(h)
            for q in range(3):
                X_ = L.apply(xs, a, GAUSS_NODES[q] * h, qm)[ls]
                if loss["kind"] == "state-integral":
                    target = X.array(loss["target"])
                    tgt = target[cols] if cols is not None else target[None, :]
                    acc = acc + GAUSS_WEIGHTS[q] * 0.5 * (X_ - tgt) ** 2
                else:
                    acc = acc + GAUSS_WEIGHTS[q] * X_
            if loss["kind"] == "state-integral":
                part = h * acc
                run.loss_integral[rows] = run.loss_integral[rows] + (part if cols is not None else X.sum_last(part))
            elif cols is not None:
                values[rows, cols] = values[rows, cols] + h * acc
            else:
                values[rows] = values[rows] + h * acc
        _put(L.x, rows, L.apply(xs, a, h, qm), cols)
        if cols is not None:
            L.tau[rows, cols] = a + h
        else:
            L.tau[rows] = X.maximum(L.tau[rows], tt + X.zeros_like(a))

    for step in range(steps):
        t_end = T if step == steps - 1 else (step + 1) * dt
        for L in lives:
            L.start[:] = -1
            if L.needs_starts:
                L.checkpoints.append([X.copy(v) for v in L.x])
        if L0.grid_values is not None and step == 0:
            L0.grid_values[0] = L0.x[ls]
        active = X.ones_bool((B,))
        while bool(X.any(active)):
            nxt = {L.index: next_input(L) for L in lives}
            win = {L.index: X.minimum(nxt[L.index], next_delayed(L)) for L in lives}
            tin = X.full((B,), float("inf"))
            for v in win.values():
                tin = X.minimum(tin, v)
            tin = X.where(tin < t_end, tin, X.full((B,), float("inf")))
            best = X.full((B,), float("inf"))
            best_pop = X.full_int((B,), -1)
            best_n = X.full_int((B,), -1)
            for L in firing:
                e = X.minimum(win[L.index], X.full((B,), t_end))
                s = _crossing_times(L, e)
                s = X.where(active[:, None], s, X.full(s.shape, float("inf")))
                m, idx = X.min_last(s)
                better = m < best
                best = X.where(better, m, best)
                best_pop = X.where(better, X.full_int((B,), L.index), best_pop)
                best_n = X.where(better, idx, best_n)
            # the first end of a quiet period per trial (before arrivals at its instant)
            tq = X.full((B,), float("inf"))
            q_pop = X.full_int((B,), -1)
            q_n = X.full_int((B,), -1)
            for L in quieting:
                m, idx = X.min_last(L.qend)
                better = m < tq
                tq = X.where(better, m, tq)
                q_pop = X.where(better, X.full_int((B,), L.index), q_pop)
                q_n = X.where(better, idx, q_n)
            # spikes fired by jumps at the current instant, once no input arrives there any more:
            # the first neuron (populations in order, then by index) carried across fires
            jump_pop = X.full_int((B,), -1)
            jump_n = X.full_int((B,), -1)
            for L in firing:
                cand = X.nonzero1(active & (tin != run.inst) & (jump_pop < 0))
                if len(cand) == 0:
                    break
                g_now = L.model.guard(_take(L.x, cand), L.pop.params, run.inst[cand][:, None])[0]
                due = (L.jinit[cand] & ~L.jfired[cand]) | _jump_crossed(L.model.DIRECTION, L.jref[cand], g_now)
                if L.has_quiet:
                    due = due & ~(L.qend[cand] < float("inf"))
                order = X.where(due, X.zeros_like(g_now) + X.arange(L.n)[None, :], X.full(g_now.shape, float("inf")))
                m, idx = X.min_last(order)
                hit = X.isfinite(m)
                jump_pop[cand[hit]] = L.index
                jump_n[cand[hit]] = idx[hit]
            jumping = active & (jump_pop >= 0)
            ending = active & ~jumping & (tq < t_end) & (tq <= tin) & (tq <= best)
            spiking = active & ~jumping & ~ending & (best <= tin) & X.isfinite(best)
            arriving = active & ~jumping & ~ending & ~spiking & X.isfinite(tin)
            active = jumping | ending | spiking | arriving
            for L in quieting:
                rows = X.nonzero1(ending & (q_pop == L.index))
                if len(rows) == 0:
                    continue
                n = q_n[rows]
                s = tq[rows]
                advance(L, rows, n, s)
                r = len(records)
                records.append(Record("quiet-end", step, rows, s, L.index, neuron=n, x_pre=_take(L.x, rows, n), start=L.start[rows, n],
                                      cause=X.copy(L.qcause[rows, n])))
                L.qend[rows, n] = float("inf")
                L.qcause[rows, n] = -1
                L.start[rows, n] = r
                if L.model.HAS_GUARD:
                    # the guard it has now is the reference of a jump at this instant
                    touched = (run.inst[rows] == s) & (L.jref[rows, n] == L.jref[rows, n])
                    if bool(X.any(touched)):
                        g_now = L.model.guard(_take(L.x, rows, n), L.pop.params, s)[0]
                        L.jref[rows, n] = X.where(touched, g_now, L.jref[rows, n])
            for L in firing:
                rows = X.nonzero1(jumping & (jump_pop == L.index))
                if len(rows) == 0:
                    continue
                n = jump_n[rows]
                if bool(X.any(L.jfired[rows, n])):
                    raise GridError("%s: a neuron is carried across its threshold a second time at one instant by spikes fired at that instant: a loop of spikes fired by jumps; stopped" % L.pop.name)
                L.jfired[rows, n] = True
                emit(L, rows, n, run.inst[rows], step, X.maximum(L.jlast[rows], L.jlast_n[rows, n]))
            for L in firing:
                rows = X.nonzero1(spiking & (best_pop == L.index))
                if len(rows) == 0:
                    continue
                n = best_n[rows]
                s = best[rows]
                advance(L, rows, n, s)
                emit(L, rows, n, s, step)
            for L in lives:
                tim, proj, src, ptr = pending[L.index]
                rows = X.nonzero1(arriving & (tin == nxt[L.index]))
                if len(rows) == 0:
                    continue
                # this population's input arrival is the trial's next event (the first in queue order on ties)
                arriving[rows] = False
                K = tim.shape[1]
                p = ptr[rows]
                j = X.gather_rows(proj[rows], p)
                i = X.gather_rows(src[rows], p)
                t = X.gather_rows(tim[rows], p)
                ptr[rows] = X.clamp_int(p + 1, K)
                for jj in sorted(set(X.tolist(j))):
                    sel = j == jj
                    _arrive(run, lives, names, net, jj, rows[sel], i[sel], t[sel], -1, step, advance)
            # then an arrival with a delay, one trial at a time (an input arrival at the same instant first)
            tdel = next_any_delayed()
            for b in X.tolist(X.nonzero1(arriving & (tdel == tin))):
                t, _, j, src, cause, targets = heapq.heappop(delayed[b])
                _arrive_targets(run, lives, names, net, j, b, src, t, cause, step, advance, targets)
        for L in lives:
            advance(L, all_rows, None, X.full((B,), t_end))
            L.tau[:] = t_end
            if L.grid_values is not None:
                L.grid_values[step + 1] = L.x[ls]
            for v in L.x:
                if not bool(X.all(X.isfinite(v))):
                    raise GridError("%s: a state is not finite at t = %g s" % (L.pop.name, t_end))

    # the loss per trial
    coef = X.full((B, L0.n), 0.0)
    kind = loss["kind"]
    if kind == "state-integral":
        per_trial = run.loss_integral
    elif kind == "spike-time":
        target = X.array(loss["targets_s"])[None, :]
        fired = X.isfinite(values)
        per_trial = X.sum_last(X.where(fired, 0.5 * (values - target) ** 2, X.zeros_like(values)))
    else:
        if kind == "ce-max":
            values = X.max_first(L0.grid_values)
            run.argmax = X.argmax_first(L0.grid_values)
        if kind == "ce-first-spike":
            z = -X.where(X.isfinite(values), values, X.full(values.shape, T)) / loss["tau_s"]
        else:
            z = values
        labels = X.array_int([tr.get("label", 0) for tr in net.trials])
        zmax = X.max_last(z)
        ez = X.exp(z - zmax[:, None])
        total = X.sum_last(ez)
        per_trial = X.log(total) + zmax - X.gather_rows(z, labels)
        p = ez / total[:, None]
        onehot = X.onehot(labels, L0.n)
        c = p - onehot
        if kind == "ce-first-spike":
            c = X.where(X.isfinite(values), -c / loss["tau_s"], X.zeros_like(c))
        coef = c
    run.values = values
    run.coef = coef
    run.per_trial = per_trial
    run.loss = float(X.sum(per_trial))
    return run


def _new_instant(run, rows):
    """A new instant in the trials `rows`: every firing population's jump-fired bookkeeping is reset
    (no guard reference, nothing fired, no initial firing, no last event)."""
    for M in run.firing:
        M.jref[rows] = float("nan")
        M.jfired[rows] = False
        M.jinit[rows] = False
        M.jlast[rows] = -1
        M.jlast_n[rows] = -1


def _arrive(run, lives, names, net, j, rows, src, t, cause, step, advance):
    """An arrival on projection j from sender `src` (per row) at time t (per row)."""
    pr = net.projections[j]
    L = lives[names.index(pr["to"])]
    advance(L, rows, None, t)
    x_pre = _take(L.x, rows)
    r = len(run.records)
    # a new instant for the trials whose last one was earlier: every firing population untouched
    fresh = run.inst[rows] != t
    if bool(X.any(fresh)):
        rn = rows[fresh]
        run.inst[rn] = t[fresh]
        _new_instant(run, rn)
    if L.model.HAS_GUARD:
        untouched = L.jref[rows][:, 0] != L.jref[rows][:, 0]
        if bool(X.any(untouched)):
            ru = rows[untouched]
            L.jref[ru] = L.model.guard([v[untouched] for v in x_pre], L.pop.params, t[untouched][:, None])[0] + X.zeros_like(L.jref[ru])
        L.jlast[rows] = r
    run.records.append(Record("arrival", step, rows, t, L.index, projection=j, source=src, cause=cause, x_pre=x_pre,
                              starts=X.copy(L.start[rows]) if L.needs_starts else None))
    w = X.transpose(pr["weights"][:, src])  # (rows, n): weight from each row's sender into every neuron
    post = list(incoming_kernels(L.model, pr)[0](x_pre, L.pop.params, t[:, None], w))
    if pr["from"] == pr["to"]:
        selfmask = X.arange(L.n)[None, :] == src[:, None]
        post = [X.where(selfmask, a, b) for a, b in zip(x_pre, post)]
    _put(L.x, rows, post)
    L.start[rows] = r


def _arrive_targets(run, lives, names, net, j, b, src, t, cause, step, advance, targets):
    """An arrival with a delay on projection j in trial b from sender `src` at time t, onto the
    neurons `targets` of the receiver only."""
    pr = net.projections[j]
    L = lives[names.index(pr["to"])]
    k = len(targets)
    rows = X.array_int([b])
    R = X.array_int([b] * k)
    C = X.array_int(list(targets))
    tk = X.full((k,), t)
    for n in targets:  # one neuron at a time: the loss integral of a trial is summed per call
        advance(L, rows, X.array_int([n]), X.full((1,), t))
    x_pre = _take(L.x, rows)
    r = len(run.records)
    if run.inst[b] != t:
        run.inst[rows] = t
        _new_instant(run, rows)
    if L.model.HAS_GUARD:
        if L.jref[b, 0] != L.jref[b, 0]:
            L.jref[rows] = L.model.guard(x_pre, L.pop.params, X.full((1, 1), t))[0] + X.zeros_like(L.jref[rows])
        L.jlast_n[R, C] = r
    run.records.append(Record("arrival", step, rows, X.full((1,), t), L.index, projection=j, source=X.array_int([src]), cause=cause,
                              x_pre=x_pre, starts=X.copy(L.start[rows]) if L.needs_starts else None, targets=C))
    xs = [v[R, C] for v in L.x]
    post = list(incoming_kernels(L.model, pr)[0](xs, L.pop.params, tk, pr["weights"][C, src]))
    _put(L.x, R, post, C)
    L.start[R, C] = r


def _deliver(run, lives, names, net, j, rows, n, s, cause, step, advance):
    _arrive(run, lives, names, net, j, rows, n, s, cause, step, advance)


def backward(run, spike_time_grad=None):
    """The exact gradient of `run`'s loss: {"loss", "weights": [dL/dW per projection], "params":
    {population: {name: dL/dp}}, "event_times": per record (dL/dt of each spike and arrival)}."""
    net = run.net
    lives = run.lives
    names = [L.pop.name for L in lives]
    loss = net.loss
    B = len(net.trials)
    lp = names.index(loss["population"])
    L0 = lives[lp]
    ls = L0.model.STATES.index(loss["state"]) if "state" in loss else -1
    integral = loss["kind"] in ("state-integral", "ce-integral")
    dt = run.dt
    records = run.records
    Tsens = [X.zeros_like(rec.time) for rec in records]
    # per arrival with a delay: its time sensitivity per receiving neuron (the delay gradients)
    Tn = {}
    gW = [X.zeros_like(pr["weights"]) for pr in net.projections]
    gD = [X.zeros_like(pr["weights"]) for pr in net.projections]
    lam = {L.index: [X.full((B, L.n), 0.0) for _ in range(L.S)] for L in lives}
    cur = {L.index: X.full((B, L.n), 0.0) for L in lives}
    grads = {L.index: [X.full((B, L.n), 0.0) for _ in L.model.GRAD_PARAMS] for L in lives}
    coef = run.coef
    if loss["kind"] == "state-integral":
        target = X.array(loss["target"])
    # per (trial, neuron): in the quiet mode over the segment being walked (from the run's end backwards)
    qmode = {L.index: (L.qend < float("inf")) if L.has_quiet else None for L in lives}

    def mode(L, rows, cols):
        return None if qmode[L.index] is None else qmode[L.index][rows, cols]

    def dl(rows, cols, X_):
        """The loss integrand's partial by the loss state (times the classification weight)."""
        if loss["kind"] == "state-integral":
            return X_ - target[cols]
        return coef[rows, cols]

    def lval(rows, cols, X_):
        if loss["kind"] == "state-integral":
            return 0.5 * (X_ - target[cols]) ** 2
        return coef[rows, cols] * X_

    def post_state(L, ref, rows, cols):
        """State right after record `ref` for (rows, cols) of L; ref is per element (an int array)."""
        out = [X.full(rows.shape, 0.0) for _ in range(L.S)]
        for r in sorted(set(X.tolist(ref))):
            sel = ref == r
            rec = records[r]
            rr, cc = rows[sel], cols[sel]
            slot = X.search(rec.trials, rr)
            if rec.kind == "quiet-end":
                vals = [v[slot] for v in rec.x_pre]
            elif rec.kind == "spike":
                xp = [v[slot] for v in rec.x_pre]
                vals = L.model.spike_jump(xp, L.pop.params, rec.time[slot])
            else:
                pr = net.projections[rec.projection]
                xp = [v[slot, cc] for v in rec.x_pre]
                w = pr["weights"][cc, rec.source[slot]]
                vals = list(incoming_kernels(L.model, pr)[0](xp, L.pop.params, rec.time[slot], w))
                if getattr(rec, "targets", None) is not None:
                    hit = X.array_int([1 if c in set(X.tolist(rec.targets)) else 0 for c in X.tolist(cc)]) == 1
                    vals = [X.where(hit, b, a) for a, b in zip(xp, vals)]
                elif pr["from"] == pr["to"]:
                    same = cc == rec.source[slot]
                    vals = [X.where(same, a, b) for a, b in zip(xp, vals)]
            for i in range(L.S):
                out[i][sel] = vals[i]
        return out

    def start_of(L, ref, rows, cols, step):
        """(a, x_a) of segments started at `ref` (-1: the grid point of `step`)."""
        a = X.full(rows.shape, step * dt)
        xa = [v[rows, cols] for v in L.checkpoints[step]] if L.needs_starts else None
        has = ref >= 0
        if bool(X.any(has)):
            r_idx = X.nonzero1(has)
            px = post_state(L, ref[r_idx], rows[r_idx], cols[r_idx])
            for i in range(L.S):
                xa[i][r_idx] = px[i]
            for r in sorted(set(X.tolist(ref[r_idx]))):
                sel = r_idx[ref[r_idx] == r]
                rec = records[r]
                a[sel] = rec.time[X.search(rec.trials, rows[sel])]
        return a, xa

    def flow_dot(L, x, t, lam_, q=None):
        f = L.flow(x, t, q)
        s = 0.0
        for i in range(L.S):
            s = s + lam_[i] * f[i]
        return s

    def add_T(ref, rows, value, cols=None):
        """T[ref] += value for the elements whose ref >= 0 (ref, rows, value aligned; cols: their
        neurons, kept per neuron for an arrival with a delay)."""
        for r in sorted(set(X.tolist(ref))):
            if r < 0:
                continue
            sel = ref == r
            rec = records[r]
            slot = X.search(rec.trials, rows[sel])
            Tsens[r] = X.index_add(Tsens[r], slot, value[sel])
            if cols is not None and getattr(rec, "targets", None) is not None:
                per = Tn.setdefault(r, {})
                for c, v in zip(X.tolist(cols[sel]), X.tolist(value[sel])):
                    per[c] = per.get(c, 0.0) + v

    def segment_back(L, rows, cols, a, ref, step):
        """lambda(b-) -> lambda(a+) across segments [a, cur] of (rows, cols) started at ref."""
        h = cur[L.index][rows, cols] - a
        lam_end = [v[rows, cols] for v in lam[L.index]]
        g = [X.zeros_like(h) for _ in L.model.GRAD_PARAMS]
        qm = mode(L, rows, cols)
        if L.needs_starts:
            _, xa = start_of(L, ref, rows, cols, step)
            lam_start, dh, da = L.vjp(xa, a, h, lam_end, g, qm)
            start_t = da - dh
            if L.loss_pop and integral:
                for q in range(3):
                    u = GAUSS_NODES[q] * h
                    w = GAUSS_WEIGHTS[q]
                    X_ = L.apply(xa, a, u, qm)[ls]
                    src = [X.zeros_like(h) for _ in range(L.S)]
                    src[ls] = h * w * dl(rows, cols, X_)
                    back, qh, qa = L.vjp(xa, a, u, src, g, qm)
                    lam_start = [p + b2 for p, b2 in zip(lam_start, back)]
                    start_t = start_t + qa - GAUSS_NODES[q] * qh - w * lval(rows, cols, X_)
        else:
            zero = [X.zeros_like(h) for _ in range(L.S)]
            lam_start, _, _ = L.vjp(zero, a, h, lam_end, g, qm)
            start_t = X.zeros_like(h)
            has = ref >= 0
            if bool(X.any(has)):
                idx = X.nonzero1(has)
                xp = post_state(L, ref[idx], rows[idx], cols[idx])
                start_t[idx] = -flow_dot(L, xp, a[idx], [v[idx] for v in lam_start], None if qm is None else qm[idx])
        for q in range(len(g)):
            grads[L.index][q][rows, cols] = grads[L.index][q][rows, cols] + g[q]
        add_T(ref, rows, start_t, cols)
        _put(lam[L.index], rows, lam_start, cols)
        cur[L.index][rows, cols] = a

    def end_term(L, rows, cols, rec_time, x_pre, ref, step, lam_end, want_rate):
        """dL/d(end time) of segments ending at an event (time per element) for lambda(e-); and dG/dh there."""
        qm = mode(L, rows, cols)
        if not L.needs_starts:
            rate = L.flow(x_pre, rec_time, qm) if want_rate else None
            return flow_dot(L, x_pre, rec_time, lam_end, qm), rate
        a, xa = start_of(L, ref, rows, cols, step)
        h = rec_time - a
        _, s, _ = L.vjp(xa, a, h, lam_end, None, qm)
        rate = L.apply_rate(xa, a, h, qm)[1] if want_rate else None
        if L.loss_pop and integral:
            for q in range(3):
                y, r = L.apply_rate(xa, a, GAUSS_NODES[q] * h, qm)
                X_ = y[ls]
                s = s + GAUSS_WEIGHTS[q] * (lval(rows, cols, X_) + h * GAUSS_NODES[q] * dl(rows, cols, X_) * r[ls])
        return s, rate

    event_times = []
    e = len(records) - 1
    allrows = X.arange(B)
    for step in range(run.steps - 1, -1, -1):
        t_end = net.duration if step == run.steps - 1 else (step + 1) * dt
        for L in lives:
            cur[L.index][:] = t_end
        if loss["kind"] == "ce-max":
            hit = run.argmax == step + 1
            lam[lp][ls] = lam[lp][ls] + X.where(hit, coef, X.zeros_like(coef))
        while e >= 0 and records[e].step == step:
            rec = records[e]
            L = lives[rec.pop]
            rows = rec.trials
            if rec.kind == "arrival" and getattr(rec, "targets", None) is not None:
                # an arrival with a delay: one trial, its own neurons only
                pr = net.projections[rec.projection]
                C = rec.targets
                k = len(C)
                R = X.repeat_rows(rows, k)
                tk = X.repeat_rows(rec.time, k)
                src = X.tolist(rec.source)[0]
                segment_back(L, R, C, tk, X.full_int(R.shape, e), step)
                lam_post = [v[R, C] for v in lam[L.index]]
                xp = [X.flatten(v)[C] for v in rec.x_pre]
                out = incoming_kernels(L.model, pr)[1](xp, L.pop.params, tk, pr["weights"][C, src], lam_post)
                S = L.S
                G = len(L.model.GRAD_PARAMS)
                for q in range(G):
                    grads[L.index][q][R, C] = grads[L.index][q][R, C] + out[S + 1 + q]
                gW[rec.projection][C, src] = gW[rec.projection][C, src] + out[S + 1 + G]
                lx = list(out[:S])
                _put(lam[L.index], R, lx, C)
                starts = X.flatten(rec.starts)[C] if rec.starts is not None else X.full_int((k,), -1)
                et, _ = end_term(L, R, C, tk, xp, starts, step, lx, False)
                per = out[S] + et
                Tsens[e] = Tsens[e] + X.sum(per)
                later = Tn.get(e, {})
                gD[rec.projection][C, src] = gD[rec.projection][C, src] + per + X.array([later.get(c, 0.0) for c in X.tolist(C)])
                if rec.cause >= 0:
                    slot = X.search(records[rec.cause].trials, rows)
                    Tsens[rec.cause] = X.index_add(Tsens[rec.cause], slot, Tsens[e])
                event_times.append(("arrival", e, Tsens[e]))
            elif rec.kind == "arrival":
                pr = net.projections[rec.projection]
                nrow = len(rows)
                R = X.repeat_rows(rows, L.n)
                C = X.tile_cols(L.n, nrow)
                segment_back(L, R, C, X.repeat_rows(rec.time, L.n), X.full_int(R.shape, e), step)
                lam_post = [v[rows] for v in lam[L.index]]
                w = X.transpose(pr["weights"][:, rec.source])
                out = incoming_kernels(L.model, pr)[1](rec.x_pre, L.pop.params, rec.time[:, None], w, lam_post)
                S = L.S
                keep = X.ones_bool((nrow, L.n))
                if pr["from"] == pr["to"]:
                    keep = X.arange(L.n)[None, :] != rec.source[:, None]
                lx = [X.where(keep, out[i], lam_post[i]) for i in range(S)]
                lt = X.where(keep, out[S], X.zeros_like(out[S]))
                G = len(L.model.GRAD_PARAMS)
                for q in range(G):
                    grads[L.index][q][rows] = grads[L.index][q][rows] + X.where(keep, out[S + 1 + q], X.zeros_like(lt))
                lw = X.where(keep, out[S + 1 + G], X.zeros_like(lt))
                gW[rec.projection] = X.scatter_cols(gW[rec.projection], rec.source, lw)
                _put(lam[L.index], rows, lx)
                starts = rec.starts if rec.starts is not None else X.full_int((nrow, L.n), -1)
                et, _ = end_term(L, R, C, X.repeat_rows(rec.time, L.n), [X.flatten(v) for v in rec.x_pre], X.flatten(starts), step,
                                 [X.flatten(v) for v in lx], False)
                Tsens[e] = Tsens[e] + X.sum_last(lt) + X.sum_last(X.reshape(et, (nrow, L.n)))
                if rec.cause >= 0:
                    slot = X.search(records[rec.cause].trials, rows)
                    Tsens[rec.cause] = X.index_add(Tsens[rec.cause], slot, Tsens[e])
                event_times.append(("arrival", e, Tsens[e]))
            elif rec.kind == "quiet-end":
                # the end of a quiet period: no jump, lambda unchanged; its time moves with its spike
                n = rec.neuron
                segment_back(L, rows, n, rec.time, X.full_int(rows.shape, e), step)
                qmode[L.index][rows, n] = True
                lam_now = [v[rows, n] for v in lam[L.index]]
                et, _ = end_term(L, rows, n, rec.time, rec.x_pre, rec.start, step, lam_now, False)
                Tsens[e] = Tsens[e] + et
                add_T(rec.cause, rows, Tsens[e])
                for q in range(len(L.model.GRAD_PARAMS)):
                    grads[L.index][q][rows, n] = grads[L.index][q][rows, n] + Tsens[e] * L.qdur_grad[q]
            else:
                n = rec.neuron
                segment_back(L, rows, n, rec.time, X.full_int(rows.shape, e), step)
                if getattr(rec, "quiet", False):
                    qmode[L.index][rows, n] = False  # the segment before it is in the normal mode
                lam_post = [v[rows, n] for v in lam[L.index]]
                out = L.model.spike_vjp(rec.x_pre, L.pop.params, rec.time, lam_post)
                S = L.S
                mu = list(out[:S])
                Tsens[e] = Tsens[e] + out[S]
                G = len(L.model.GRAD_PARAMS)
                for q in range(G):
                    grads[L.index][q][rows, n] = grads[L.index][q][rows, n] + out[S + 1 + q]
                if rec.pop == lp:
                    if loss["kind"] == "spike-time":
                        tgt = X.array(loss["targets_s"])[n]
                        Tsens[e] = Tsens[e] + X.where(rec.first, rec.time - tgt, X.zeros_like(rec.time))
                    if loss["kind"] == "ce-first-spike":
                        Tsens[e] = Tsens[e] + X.where(rec.first, coef[rows, n], X.zeros_like(rec.time))
                if spike_time_grad is not None:
                    Tsens[e] = Tsens[e] + spike_time_grad(e, rec)
                event_times.append(("spike", e, X.copy(Tsens[e])))
                et, rate = end_term(L, rows, n, rec.time, rec.x_pre, rec.start, step, mu, True)
                D = Tsens[e] + et
                if rec.by_jump is not None:
                    # fired by a jump: its time is its arrival's; D goes there, no phi
                    add_T(rec.by_jump, rows, D, n)
                    _put(lam[L.index], rows, mu, n)
                    e -= 1
                    continue
                gg = L.model.guard_grad(rec.x_pre, L.pop.params, rec.time)
                gdot = gg[S]
                for i in range(S):
                    gdot = gdot + gg[i] * rate[i]
                phi = -D / gdot
                _put(lam[L.index], rows, [mu[i] + phi * gg[i] for i in range(S)], n)
                for q in range(G):
                    grads[L.index][q][rows, n] = grads[L.index][q][rows, n] + phi * gg[S + 1 + q]
            e -= 1
        for L in lives:
            R = X.repeat_rows(allrows, L.n)
            C = X.tile_cols(L.n, B)
            segment_back(L, R, C, X.full(R.shape, step * dt), X.full_int(R.shape, -1), step)
    params = {}
    for L in lives:
        params[L.pop.name] = {p: float(X.sum(grads[L.index][q])) for q, p in enumerate(L.model.GRAD_PARAMS)}
    return {"loss": run.loss, "weights": gW, "delays": gD, "params": params, "event_times": event_times, "records": records}


def _receptor(p, pops, models, k):
    """The index of the incoming block projection k reaches: its "via" (a weight name of the target
    model), or the only block."""
    to = pops.get(p["to"], {})
    model = models.get(to.get("model"))
    names = tuple(getattr(model, "INCOMING", ())) if model is not None else ()
    via = p.get("via")
    if via is None:
        if len(names) > 1:
            raise ValueError("projections[%d]: %s has %d incoming blocks (%s): say which one with \"via\"" % (k, to.get("model"), len(names), ", ".join(names)))
        return 0
    if via not in names:
        raise ValueError("projections[%d].via: %s has no incoming block with the weight %s (its blocks: %s)" % (k, to.get("model"), via, ", ".join(names)))
    return names.index(via)


def load_network(obj, models, file_delays=None):
    """A Network from a network description (the cross-check scenario format, docs/codegen.md):
    {"duration_s", "populations": {name: {"size", "spikes"} | {"model", "size", "params", "initial"}},
    "projections": [{"from", "to", "weights"}], "loss": {...}, "trials": [{"inputs": {...}, "label"}]?}.
    `models` maps model names to generated model modules. Values are SI numbers. `file_delays`
    maps (from model, to model, block weight) to the model file's `connect ... delay` (s): a
    projection between two model populations without its own "delay_s" takes it (the cross-check's rule)."""
    pops = obj["populations"]
    inputs = {}
    populations = []
    single = {}
    for name, p in pops.items():
        if "model" in p:
            if p["model"] not in models:
                raise ValueError("populations.%s.model: no generated model named %s (have: %s)" % (name, p["model"], ", ".join(sorted(models))))
            populations.append(Population(name, p["size"], models[p["model"]], p.get("params"), p.get("initial")))
        else:
            inputs[name] = int(p["size"])
            single[name] = [(float(t), int(i)) for t, i in p.get("spikes", [])]
    trials = obj.get("trials")
    if trials is None:
        trials = [{"inputs": single}]
    trials = [{"inputs": {k: [(float(t), int(i)) for t, i in v] for k, v in tr.get("inputs", {}).items()}, "label": tr.get("label", 0)} for tr in trials]
    loss = dict(obj["loss"])
    if loss["kind"] == "state-integral":
        size = pops[loss["population"]]["size"]
        tgt = loss["target"]
        loss["target"] = [float(tgt)] * size if not isinstance(tgt, list) else [float(v) for v in tgt]
    projections = []
    for k, p in enumerate(obj["projections"]):
        pr = {"from": p["from"], "to": p["to"], "weights": p["weights"], "receptor": _receptor(p, pops, models, k)}
        d = p.get("delay_s")
        if d is None and file_delays and "model" in pops[p["from"]] and "model" in pops[p["to"]]:
            names = tuple(getattr(models[pops[p["to"]]["model"]], "INCOMING", ()))
            if pr["receptor"] < len(names):
                d = file_delays.get((pops[p["from"]]["model"], pops[p["to"]]["model"], names[pr["receptor"]]))
        if d is not None:  # one delay for the projection, or delays[to][from] shaped like the weights
            pr["delays"] = [[float(v) for v in row] for row in d] if isinstance(d, list) else [[float(d)] * len(row) for row in p["weights"]]
        projections.append(pr)
    return Network(obj["duration_s"], inputs, populations, projections, trials, loss)


def report(run, grad):
    """The runner contract (docs/codegen.md): loss, spikes of trial 0, dL/dW per projection, dL/dp."""
    out = {"loss": run.loss, "spikes": {k: [[t, i] for t, i in v] for k, v in run.spikes[0].items()},
           "weights": [X.tolist(w) for w in grad["weights"]],
           "params": {"%s.%s" % (pop, name): v for pop, ps in grad["params"].items() for name, v in ps.items()}}
    if any("delays" in pr for pr in run.net.projections):
        out["delays"] = [X.tolist(d) for d in grad["delays"]]
    if len(run.spikes) > 1:
        out["trials"] = len(run.spikes)
        out["spikes_per_trial"] = [{k: [[t, i] for t, i in v] for k, v in s.items()} for s in run.spikes]
    return out


# ---------------------------------------------------------------------------------------------
# e-prop (docs/eprop.md): a layer of one model without recurrence, fed by input spike trains,
# read out by leaky integrators y(t+1) = kappa y(t) + W_out z(t), loss E = 1/2 sum_t |y - y*|^2.
# Online: per synapse the eligibility vector (the model's eprop_update) and the trace filtered
# by the readout, ebar(t+1) = kappa ebar(t) + e(t); the weight change is sum_t L(t) ebar(t) with
# the learning signal L = B err: B = W_out^T (exact here, the symmetric variant) or a fixed
# random matrix (the random variant). Nothing grows with the sequence length.

def _nbytes(a):
    n = getattr(a, "nbytes", None)
    return int(n) if n is not None else int(a.element_size() * a.nelement())


def _feedback(kind, wout, seed):
    if kind in ("exact", "symmetric"):
        return wout
    if kind != "random":
        raise GridError("feedback must be exact, symmetric or random; got %r" % (kind,))
    import random
    r = random.Random(seed)
    K, N = len(X.tolist(wout)), len(X.tolist(wout)[0])
    return X.array([[r.gauss(0.0, 1.0) / N ** 0.5 for _ in range(N)] for _ in range(K)])


def _layer_blocks(model, task):
    """The incoming blocks a layer task feeds, in the model's block order: (index, weight name,
    inputs (B, T, nIn), win (N, nIn)). A task with "blocks" ({weight name: {"inputs", "win"}})
    names them (docs/eprop.md); one without feeds the first block from "inputs" and "win"."""
    names = tuple(getattr(model, "EPROP_BLOCKS", ()))
    if "blocks" not in task:
        return [(0, names[0] if names else None, task["inputs"], task["win"])]
    given = task["blocks"]
    if not isinstance(given, dict) or not given:
        raise GridError("blocks: a layer task's \"blocks\" maps weight names of %s to {\"inputs\", \"win\"}" % model.NAME)
    if not names:
        names = tuple(getattr(model, "INCOMING", ()))[:1]
    for w in given:
        if w not in names:
            raise GridError("blocks.%s: %s has no incoming block with the weight %s (its blocks: %s)" % (w, model.NAME, w, ", ".join(names)))
        for f in ("inputs", "win"):
            if f not in given[w]:
                raise GridError("blocks.%s: needs %r" % (w, f))
    return [(k, w, given[w]["inputs"], given[w]["win"]) for k, w in enumerate(names) if w in given]


def eprop_layer(model, task, params=None, feedback="exact", seed=0):
    """The e-prop gradient of one pass over `task` (see above); returns loss, gradients, spikes, kept bytes.
    With several incoming blocks (receptors) the task's "blocks" feed them, one input train and
    one weight matrix each, and "weights" maps each block's weight name to its gradient."""
    if not getattr(model, "EPROP", ()):
        raise GridError("%s has no e-prop traces: %s" % (model.NAME, getattr(model, "EPROP_NONE", "no surrogate")))
    dt = float(task["dt"])
    pv = dict(model.DEFAULT_PARAMS)
    pv.update(params or {})
    p = tuple(float(pv[n]) for n in model.PARAMS)
    nb = len(getattr(model, "EPROP_BLOCKS", ())) or 1
    multi = nb > 1
    fed = _layer_blocks(model, task)
    ins = [X.array(b[2]) for b in fed]   # (B, T, nIn_k), 0 or 1
    wins = [X.array(b[3]) for b in fed]  # (N, nIn_k)
    wout = X.array(task["wout"])      # (K, N)
    targets = X.array(task["targets"])  # (B, T, K)
    kappa = float(task["kappa"])
    B, T = len(fed[0][2]), len(fed[0][2][0])
    nIns = [len(b[2][0][0]) for b in fed]
    N, K, S = len(fed[0][3]), len(task["wout"]), len(model.STATES)
    for (_, w, a, m) in fed[1:]:
        if len(a) != B or len(a[0]) != T or len(m) != N:
            raise GridError("blocks.%s: inputs must be %d trials x %d steps and win %d rows, as the first block's" % (w, B, T, N))
    fb = _feedback(feedback, wout, seed)
    x = [X.full((B, N), float(model.INITIAL[s])) for s in model.STATES]
    qs = list(enumerate(model.EPROP))
    wq = [k for k, (_, kind) in qs if kind == "weight"]  # one per block, in block order
    pq = [(k, name) for k, (name, kind) in qs if kind == "param"]
    arrive = tuple(getattr(model, "EPROP_ARRIVE", ())) or (getattr(model, "eprop_arrive", None),)
    zero3s = [X.full((B, N, n), 0.0) for n in nIns]
    zero2 = X.full((B, N), 0.0)
    eps_w = [[X.full((B, N, n), 0.0) for _ in range(S)] for n in nIns]
    ebar_w = [X.full((B, N, n), 0.0) for n in nIns]
    eps_p = [[X.full((B, N), 0.0) for _ in range(S)] for _ in pq]
    ebar_p = [X.full((B, N), 0.0) for _ in pq]
    grad_w = [X.full((N, n), 0.0) for n in nIns]
    grad_p = [0.0 for _ in pq]
    grad_out = X.full((K, N), 0.0)
    y = X.full((B, K), 0.0)
    zbar = X.full((B, N), 0.0)
    loss = 0.0
    spikes = 0
    w3s = [w[None, :, :] for w in wins]
    for t in range(T):
        tt = t * dt
        z, psi = model.eprop_spike(x, p, tt)
        z = z + zero2
        psi = psi + zero2
        spikes += int(X.sum(z))
        ss = [a[:, t, :] for a in ins]
        anyins = [(X.sum_last(s) > 0) * 1.0 for s in ss]
        anyblk = [zero2[:, :1] for _ in range(nb)]  # (B, 1): any arrival at block k in this step
        for (k, _, _, _), a in zip(fed, anyins):
            anyblk[k] = a[:, None]
        x3 = [xi[:, :, None] for xi in x]
        for m, (k, _, _, _) in enumerate(fed):
            if k >= len(wq):
                continue
            if multi:
                zp = tuple(ss[m][:, None, :] if j == k else anyblk[j][:, :, None] for j in range(nb))
                wt = tuple(w3s[m] if j == k else 0.0 for j in range(nb))
            else:
                zp, wt = ss[m][:, None, :], w3s[m]
            args = (x3, p, tt, dt, z[:, :, None], zp, psi[:, :, None], wt, eps_w[m])
            e = model.EPROP_TRACE[wq[k]](*args) + zero3s[m]
            eps_w[m] = [u + zero3s[m] for u in model.EPROP_UPDATE[wq[k]](*args)]
            ebar_w[m] = kappa * ebar_w[m] + e
        for m, (k, _) in enumerate(pq):
            if multi:
                args = (x, p, tt, dt, z, tuple(a + zero2 for a in anyblk), psi, (0.0,) * nb, eps_p[m])
            else:
                args = (x, p, tt, dt, z, anyins[0][:, None] + zero2, psi, 0.0, eps_p[m])
            e = model.EPROP_TRACE[k](*args) + zero2
            eps_p[m] = [u + zero2 for u in model.EPROP_UPDATE[k](*args)]
            ebar_p[m] = kappa * ebar_p[m] + e
        x = [xi + zero2 for xi in model.eprop_step(x, p, tt, dt, z)]
        for m, (k, _, _, _) in enumerate(fed):  # the blocks one after another, in the model's order
            s, win = ss[m], wins[m]
            for i in range(nIns[m]):
                hit = s[:, i][:, None] > 0
                if bool(X.any(hit)):
                    after = arrive[k](x, p, win[None, :, i])
                    x = [X.where(hit, a + zero2, xi) for a, xi in zip(after, x)]
        y = kappa * y + z @ wout.T
        err = y - targets[:, t, :]
        loss += 0.5 * float(X.sum(err * err))
        L = err @ fb  # (B, N)
        for m, (k, _, _, _) in enumerate(fed):
            if k < len(wq):
                grad_w[m] = grad_w[m] + (L[:, :, None] * ebar_w[m]).sum(0)
        for m in range(len(pq)):
            grad_p[m] += float(X.sum(L * ebar_p[m]))
        zbar = kappa * zbar + z
        grad_out = grad_out + err.T @ zbar
    kept = [*[a for e in eps_w for a in e], *ebar_w, *[a for e in eps_p for a in e], *ebar_p, *x, *grad_w]
    weights = {b[1]: X.tolist(g) for b, g in zip(fed, grad_w)} if "blocks" in task else X.tolist(grad_w[0])
    return {"loss": loss, "spikes": spikes, "weights": weights, "readout": X.tolist(grad_out),
            "params": {name: grad_p[m] for m, (_, name) in enumerate(pq)},
            "kept_bytes": sum(_nbytes(a) for a in kept) + 8 * len(pq)}


def eprop_train(model, task, epochs, lr, params=None, feedback="exact", seed=0):
    """Gradient descent on the input and readout weights with e-prop; returns the loss of every epoch."""
    step = lambda W, D: [[w - lr * d for w, d in zip(rw, rd)] for rw, rd in zip(W, D)]
    losses = []
    for _ in range(int(epochs)):
        g = eprop_layer(model, task, params, feedback, seed)
        losses.append(g["loss"])
        task = dict(task)
        if "blocks" in task:
            task["blocks"] = {w: dict(b, win=step(b["win"], g["weights"][w])) if w in g["weights"] else b for w, b in task["blocks"].items()}
        else:
            task["win"] = step(task["win"], g["weights"])
        task["wout"] = step(task["wout"], g["readout"])
    return losses


RULE_USAGE = """Usage: python3 run.py TASK.json --dt 1ms --rule eprop [--feedback exact|symmetric|random]
                     [--epochs N --lr RATE] [--format json|text]

With --rule eprop and a network description (NET.json, docs/eprop.md "Networks"), every model
population but the loss's trains by e-prop with the learning signal of the state-integral loss
on the readout population; prints the runner contract with "rule": "eprop" and "kept_bytes".

With --rule eprop, TASK.json is a layer task of one model (docs/eprop.md): {"model", "inputs":
[trial][step][input], "win": [neuron][input], "wout": [output][neuron], "kappa", "targets":
[trial][step][output], "params"?}; a model with several incoming blocks takes "blocks":
{WEIGHT: {"inputs", "win"}} in place of "inputs" and "win" (one per block, by weight name).
Prints the e-prop gradient {"loss", "spikes", "weights", "readout", "params", "kept_bytes"}
("weights" by block name with "blocks"), or with --epochs the loss of each epoch {"losses": [...]}.
--rule eventprop (the default) runs the network description as without --rule."""


def rule_main(argv, models, parse_time, default_main):
    """run.py's --rule: eventprop hands the other arguments to the runner, eprop runs a layer task."""
    args = list(argv)
    k = args.index("--rule")
    if k + 1 >= len(args):
        raise SystemExit(RULE_USAGE)
    rule = args[k + 1]
    del args[k:k + 2]
    if rule == "eventprop":
        return default_main(args)
    if rule != "eprop":
        raise SystemExit("run.py: --rule must be eventprop or eprop; got %r" % rule)
    import json
    fmt, dt, path, feedback, epochs, lr = "text", None, None, "exact", None, 0.0
    while args:
        a = args.pop(0)
        if not args and a.startswith("--"):
            raise SystemExit(RULE_USAGE)
        if a in ("--dt", "--timestep"):
            dt = parse_time(args.pop(0))
        elif a == "--format":
            fmt = args.pop(0)
        elif a == "--feedback":
            feedback = args.pop(0)
        elif a == "--epochs":
            epochs = int(args.pop(0))
        elif a == "--lr":
            lr = float(args.pop(0))
        elif path is None:
            path = a
        else:
            raise SystemExit("run.py: unexpected argument %r" % a)
    if path is None or dt is None:
        raise SystemExit(RULE_USAGE)
    with open(path, encoding="utf-8") as f:
        task = json.load(f)
    if isinstance(task, dict) and "populations" in task:  # a network description (docs/eprop.md, "Networks")
        try:
            net = load_network(task, models)
            if epochs is not None:
                out = {"rule": "eprop", "losses": eprop_network_train(net, dt, epochs, lr, feedback)}
            else:
                out = eprop_network(net, dt, feedback)
        except (GridError, ValueError, KeyError, TypeError) as e:
            raise SystemExit("run.py: %s: %s" % (path, e))
        print(json.dumps(out) if fmt == "json" else "\n".join("%s %s" % kv for kv in out.items()))
        return 0
    task["dt"] = dt
    if task.get("model") not in models:
        raise SystemExit("run.py: the task names model %r; this folder has %s" % (task.get("model"), ", ".join(models)))
    model = models[task["model"]]
    try:
        if epochs is not None:
            out = {"losses": eprop_train(model, task, epochs, lr, task.get("params"), feedback)}
        else:
            out = eprop_layer(model, task, task.get("params"), feedback)
    except GridError as e:
        raise SystemExit("run.py: %s" % e)
    print(json.dumps(out) if fmt == "json" else "\n".join("%s %s" % kv for kv in out.items()))
    return 0


# ---------------------------------------------------------------------------------------------
# e-prop on a network description (docs/eprop.md, "Networks"): every model population but the
# loss's is a firing model with eligibility traces, simulated on the discrete e-prop grid (spike
# test at the start of a step, spike jump and flow, then the step's arrivals: input spikes of
# [t dt, (t+1) dt) and the spikes of step t, so recurrence has a delay of one step). The loss's
# population is a readout that never fires, with an exact linear step map and additive arrivals;
# the loss is the state-integral loss on the grid, E = dt sum_{t=1..T} 1/2 |X(t) - X*|^2. The
# learning signal of a neuron is the exact partial derivative dE/dz through the readout: each
# synapse's trace is filtered by the readout's own step, ebar(t+1) = A ebar(t) + b e(t) (A its
# step matrix, b the arrival's direction), and the weight change is sum_t L(t) . c ebar(t) with
# L = dt B^T err (B: the readout weights, `exact` and `symmetric`, or a fixed random matrix).
# The recurrent paths are left out by design; nothing grows with the number of steps.

def _net_counts(net, dt, steps):
    """Per input population: (B, steps, size) counts of its spikes in each step (a spike at s
    arrives at the end of step floor(s / dt), with a tolerance of 1e-9 steps)."""
    out = {}
    for name, size in net.inputs.items():
        c = [[[0.0] * size for _ in range(steps)] for _ in net.trials]
        for b, tr in enumerate(net.trials):
            for s, i in tr["inputs"].get(name, []):
                k = int((s / dt + 1e-9) // 1)
                if 0 <= k < steps and 0 <= i < size:
                    c[b][k][i] += 1.0
        out[name] = X.array(c)
    return out


def eprop_network(net, dt, feedback="exact", seed=0):
    """The e-prop gradient of a network description (see above): the runner contract's loss,
    spikes (trial 0), weights per projection and params, with "rule" and "kept_bytes"."""
    steps = max(1, int(-(-(net.duration / dt - 1e-9) // 1)))
    loss = net.loss
    if loss.get("kind") != "state-integral":
        raise GridError("loss.kind: e-prop on a network takes the state-integral loss of a readout population; got %r" % (loss.get("kind"),))
    pops = {P.name: P for P in net.populations}
    R = pops.get(loss["population"])
    if R is None:
        raise GridError("loss.population: %r is not a model population" % (loss["population"],))
    Rm = R.model
    if Rm.HAS_GUARD or not Rm.EXACT or Rm.STATE_DEPENDENT_DERIVATIVES:
        raise GridError("loss.population %s: e-prop's learning signal needs a readout that never fires, with an exact linear step map (%s %s)"
                        % (R.name, Rm.NAME, "fires" if Rm.HAS_GUARD else "has a map that is not exact and linear"))
    for P in net.populations:
        if P is not R and not getattr(P.model, "EPROP", ()):
            raise GridError("populations.%s: %s has no e-prop traces (%s)" % (P.name, P.model.NAME, getattr(P.model, "EPROP_NONE", "no surrogate")))
    if loss["state"] not in Rm.STATES:
        raise GridError("loss.state: %s has no state %r" % (Rm.NAME, loss["state"]))
    Sr, c = len(Rm.STATES), list(Rm.STATES).index(loss["state"])
    B = len(net.trials)
    target = X.array(loss["target"])
    zero_r = [0.0] * Sr
    # the readout's arrival direction b, checked additive: r(x, w) = x + w b
    b_dir = [float(v) - 0.0 for v in Rm.incoming_jump(zero_r, R.params, 0.0, 1.0)]
    twice = [float(v) for v in Rm.incoming_jump(zero_r, R.params, 0.0, 2.0)]
    shifted = [float(v) - 1.0 for v in Rm.incoming_jump([1.0] * Sr, R.params, 0.0, 1.0)]
    if any(abs(t2 - 2 * b1) > 1e-12 * (1 + abs(b1)) or abs(s1 - b1) > 1e-12 * (1 + abs(b1)) for t2, b1, s1 in zip(twice, b_dir, shifted)):
        raise GridError("loss.population %s: e-prop's learning signal needs arrivals that add the weight (such as I := I + w)" % R.name)

    def readout_step(v, tt):
        """A v: the readout's step matrix applied to a list of Sr arrays."""
        out = Rm.map_jvp(zero_r, R.params, tt, dt, v)
        return [out[Sr + k] + 0.0 * v[0] for k in range(Sr)]

    counts = _net_counts(net, dt, steps)
    size = dict(net.inputs)
    size.update({P.name: P.size for P in net.populations})
    projs = net.projections
    fb = {}
    for j, pr in enumerate(projs):
        if pr["to"] == R.name and pr["from"] in pops and pops[pr["from"]] is not R:
            fb[j] = _feedback(feedback, pr["weights"], seed + j)
    signal = {P.name for P in net.populations if any(projs[j]["from"] == P.name for j in fb)}
    x = {P.name: [X.full((B, P.size), v) for v in P.initial] for P in net.populations}
    eps, ebar, zin, grad_w = {}, {}, {}, []
    for j, pr in enumerate(projs):
        nt, nf = size[pr["to"]], size[pr["from"]]
        grad_w.append(X.full((nt, nf), 0.0))
        if pr["to"] == R.name:
            zin[j] = [X.full((B, nf), 0.0) for _ in range(Sr)]
        elif pr["to"] in signal:
            eps[j] = [X.full((B, nt, nf), 0.0) for _ in pops[pr["to"]].model.STATES]
            ebar[j] = [X.full((B, nt, nf), 0.0) for _ in range(Sr)]
    pq = {P.name: [(k, name) for k, (name, kind) in enumerate(P.model.EPROP) if kind == "param"] for P in net.populations if P is not R and P.name in signal}
    eps_p = {n: [[X.full((B, pops[n].size), 0.0) for _ in pops[n].model.STATES] for _ in q] for n, q in pq.items()}
    ebar_p = {n: [[X.full((B, pops[n].size), 0.0) for _ in range(Sr)] for _ in q] for n, q in pq.items()}
    grad_p = {n: [0.0 for _ in q] for n, q in pq.items()}
    spikes = {P.name: [] for P in net.populations}
    total = 0.0
    for t in range(steps):
        tt = t * dt
        z, psi = {}, {}
        for P in net.populations:
            if P is R:
                z[P.name] = X.full((B, P.size), 0.0)
                continue
            zz, ps = P.model.eprop_spike(x[P.name], P.params, tt)
            z[P.name] = zz + X.full((B, P.size), 0.0)
            psi[P.name] = ps + X.full((B, P.size), 0.0)
            for i, v in enumerate(X.tolist(z[P.name][0])):
                if v > 0:
                    spikes[P.name].append([tt, i])
        pre = [counts[pr["from"]][:, t, :] if pr["from"] in counts else z[pr["from"]] for pr in projs]
        # any arrival at each block of each population in this step (several blocks: receptors)
        anyblk = {}
        for j, pr in enumerate(projs):
            if pr["to"] != R.name:
                r = int(pr.get("receptor", 0))
                hits = (X.sum_last(pre[j]) > 0)[:, None] * 1.0
                prev = anyblk.setdefault(pr["to"], {}).get(r)
                anyblk[pr["to"]][r] = hits if prev is None else ((prev + hits) > 0) * 1.0
        for j in eps:
            pr, P = projs[j], pops[projs[j]["to"]]
            r = int(pr.get("receptor", 0))
            kw = [k for k, (_, kind) in enumerate(P.model.EPROP) if kind == "weight"][r]
            zero3 = X.full((B, P.size, size[pr["from"]]), 0.0)
            nb = len(getattr(P.model, "EPROP_BLOCKS", ())) or 1
            if nb > 1:  # this projection's block gets its own arrivals and weights, the others whether any arrived
                zp = tuple(pre[j][:, None, :] if k == r else anyblk[P.name].get(k, X.full((B, 1), 0.0))[:, :, None] for k in range(nb))
                wt = tuple(pr["weights"][None, :, :] if k == r else 0.0 for k in range(nb))
            else:
                zp, wt = pre[j][:, None, :], pr["weights"][None, :, :]
            args = ([xi[:, :, None] for xi in x[P.name]], P.params, tt, dt, z[P.name][:, :, None], zp,
                    psi[P.name][:, :, None], wt, eps[j])
            e = P.model.EPROP_TRACE[kw](*args) + zero3
            eps[j] = [u + zero3 for u in P.model.EPROP_UPDATE[kw](*args)]
            ebar[j] = [a + b_dir[k] * e for k, a in enumerate(readout_step(ebar[j], tt))]
        for n, q in pq.items():
            P = pops[n]
            zero2 = X.full((B, P.size), 0.0)
            anyin = zero2
            for j, pr in enumerate(projs):
                if pr["to"] == n:
                    anyin = anyin + X.sum_last(pre[j])[:, None]
            anyin = (anyin > 0) * 1.0
            nb = len(getattr(P.model, "EPROP_BLOCKS", ())) or 1
            if nb > 1:
                anyin = tuple(anyblk.get(n, {}).get(k, X.full((B, 1), 0.0)) + zero2 for k in range(nb))
            for m, (k, _) in enumerate(q):
                args = (x[n], P.params, tt, dt, z[n], anyin, psi[n], (0.0,) * nb if nb > 1 else 0.0, eps_p[n][m])
                e = P.model.EPROP_TRACE[k](*args) + zero2
                eps_p[n][m] = [u + zero2 for u in P.model.EPROP_UPDATE[k](*args)]
                ebar_p[n][m] = [a + b_dir[kk] * e for kk, a in enumerate(readout_step(ebar_p[n][m], tt))]
        for P in net.populations:
            zero2 = X.full((B, P.size), 0.0)
            if P is R:
                m_sub = substeps(Rm, dt)
                xs = x[P.name]
                for r in range(m_sub):
                    xs = [v + zero2 for v in Rm.map_step(xs, P.params, tt + r * dt / m_sub, dt / m_sub)]
                x[P.name] = xs
            else:
                x[P.name] = [v + zero2 for v in P.model.eprop_step(x[P.name], P.params, tt, dt, z[P.name])]
        for j in sorted(range(len(projs)), key=lambda j: int(projs[j].get("receptor", 0))):  # blocks in the model's order
            pr = projs[j]
            P, s = pops[pr["to"]], pre[j]
            zero2 = X.full((B, P.size), 0.0)
            for i in range(size[pr["from"]]):
                col = s[:, i]
                most = int(max(X.tolist(col)))
                for rep in range(most):
                    hit = (col > rep)[:, None]
                    if P is R:
                        after = Rm.incoming_jump(x[P.name], P.params, tt + dt, pr["weights"][None, :, i])
                    else:
                        arrive = getattr(P.model, "EPROP_ARRIVE", None) or (P.model.eprop_arrive,)
                        after = arrive[int(pr.get("receptor", 0))](x[P.name], P.params, pr["weights"][None, :, i])
                    x[P.name] = [X.where(hit, a + zero2, xi) for a, xi in zip(after, x[P.name])]
            if j in zin:
                zin[j] = [a + b_dir[k] * s for k, a in enumerate(readout_step(zin[j], tt))]
        err = x[R.name][c] - target[None, :]
        total += 0.5 * dt * float(X.sum(err * err))
        L = {}
        for j, Bm in fb.items():
            n = projs[j]["from"]
            L[n] = (L[n] if n in L else 0.0) + dt * (err @ Bm)
        for j in eps:
            Lp = L[projs[j]["to"]]
            grad_w[j] = grad_w[j] + (Lp[:, :, None] * ebar[j][c]).sum(0)
        for n, q in pq.items():
            for m in range(len(q)):
                grad_p[n][m] += float(X.sum(L[n] * ebar_p[n][m][c]))
        for j in zin:
            grad_w[j] = grad_w[j] + dt * (err.T @ zin[j][c])
    kept = [a for d in (eps, ebar, zin) for v in d.values() for a in v]
    kept += [a for n in eps_p for e in eps_p[n] for a in e] + [a for n in ebar_p for e in ebar_p[n] for a in e]
    kept += [a for v in x.values() for a in v] + grad_w
    return {"rule": "eprop", "loss": total, "spikes": spikes, "weights": [X.tolist(g) for g in grad_w],
            "params": {"%s.%s" % (n, name): grad_p[n][m] for n, q in pq.items() for m, (_, name) in enumerate(q)},
            "steps": steps, "kept_bytes": sum(_nbytes(a) for a in kept) + 8 * sum(len(q) for q in pq.values())}


def eprop_network_train(net, dt, epochs, lr, feedback="exact", seed=0):
    """Gradient descent on every projection's weights with e-prop; returns the loss of every epoch."""
    losses = []
    for _ in range(int(epochs)):
        g = eprop_network(net, dt, feedback, seed)
        losses.append(g["loss"])
        for pr, d in zip(net.projections, g["weights"]):
            pr["weights"] = pr["weights"] - lr * X.array(d)
    return losses
