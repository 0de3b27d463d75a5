// The backward phases of the NumPy target (backward_step, backward_spike, backward_incoming),
// vectorised like the forward ones in numpy.ts and printing the same derived Syms as the C
// phases (cphases.ts): the transpose propagator for an LTI flow, else exponential Euler of
// each costate in reverse time; the derived spike and incoming jumps at the recorded state.
// Invariant: costates are read into locals before any is written (simultaneous update);
// neurons outside the event mask keep their costates and gradients unchanged.
import type { Sym } from '../symbolic/sym';
import { lambdaName } from '../base/names';
import type { ModelPlan } from './plan';
import { propagatorTerms } from './structure';
import type { BackwardKit } from './pyScope';

export function numpyBackward(plan: ModelPlan, k: BackwardKit): void {
  const S = plan.states;
  const needsFwd = (used: Set<string>, from: string): string[] => (S.some((s) => used.has(s.name))
    ? [`if ${from} is None:`, `    raise ValueError("${plan.prefix}: this phase needs ${from}, the forward state (see the docstring)")`] : []);
  const lambdaPass = (used: Set<string>, name: string): void => { used.add(lambdaName(name)); };

  // backward_step
  {
    const sc = new k.PyScope(plan, k.inline);
    const body: string[] = [...k.gradLines(sc, (p) => plan.adjoint.paramGradients.get(p)!.flow, 'dt * '), 'out = {}'];
    const doc = ['Backward (adjoint) step: costates lambda = dL/dx from t_start + dt back to t_start, on the derived adjoint flow',
      ...plan.backward.map((b) => `  dlambda_${k.st(b.state).name}/dt = ${k.plain(b.flow)}`),
      'loss_source: dict of dL_V/dX arrays at the step (missing: 0). grads: dict of arrays, += dt * lambda . df/dp',
      '(rectangle rule at t_start + dt) for the trainable parameters. fwd: the forward state at t_start + dt.'];
    if (plan.forward.kind === 'exact-propagator') {
      doc.push('Linear time-invariant flow: lambda(t_start) = P^T lambda(t_start + dt) + Q^T dlV/dx (exact for a source held over the step).');
      body.push('P = coeffs["P"]', 'Q = coeffs["Q"]');
      for (const row of propagatorTerms(plan, true)) {
        const t = row.terms.map((x) => { lambdaPass(sc.used, S[x.j]!.name); return `P[${x.j}, ${row.i}] * lambda_${S[x.j]!.id}`; });
        const q = row.terms.map((x) => { sc.used.add(`dlV_d${S[x.j]!.name}`); return `Q[${x.j}, ${row.i}] * dlV_d${S[x.j]!.id}`; });
        body.push(`out["lambda_${S[row.i]!.id}"] = ${[...t, ...q].join(' + ')}`);
      }
    } else {
      doc.push('Exponential Euler in reverse time per costate: -dlambda_X/dt = alpha lambda_X + beta, alpha and beta at t_start + dt.');
      for (const b of plan.backward) {
        const s = k.st(b.state);
        lambdaPass(sc.used, s.name);
        body.push(`# lambda_${s.name}: alpha = ${k.plain(b.alpha)}, beta = ${k.plain(b.beta)}`, `step_a = ${sc.e(b.alpha)}`, 'step_z = step_a * dt',
          `out["lambda_${s.id}"] = lambda_${s.id} * np.exp(step_z) + (${sc.e(b.beta)}) * dt * _phi1(step_z)`);
      }
    }
    body.push(...k.assign('adj'));
    k.fnDef('backward_step(adj, coeffs, t_start, fwd=None, loss_source=None, grads=None)', doc,
      [...k.setup(sc, body, 't_start + dt'), ...needsFwd(sc.used, 'fwd'), ...k.loads(sc, 'fwd'), ...body]);
  }
  const sp = plan.adjoint.spike;
  if (plan.fire && sp) {
    const sc = new k.PyScope(plan, k.inline);
    const body = ['mask = np.asarray(spiked, dtype=bool)', 'with np.errstate(divide="ignore", invalid="ignore", over="ignore"):',
      `    phi = ${sc.e(sp.phi)}`, ...k.gradLines(sc, (p) => plan.adjoint.paramGradients.get(p)!.spike, '', 'mask').map((l) => `    ${l}`), '    out = {}'];
    for (const s of S) {
      const j = sp.jump.get(s.name)!;
      if (j.k === 'sym' && j.name === lambdaName(s.name)) continue;
      body.push(`    out["lambda_${s.id}"] = np.where(mask, ${sc.e(j)}, lambda_${s.id})`);
      lambdaPass(sc.used, s.name);
    }
    body.push(...k.assign('adj'));
    k.fnDef('backward_spike(adj, coeffs, t_start, spiked, pre, couplings=None, dlp_dts=None, lV_pres=None, lV_posts=None, grads=None)',
      ['Backward spike jump at t_start + dt where spiked is True: adj holds lambda+ and becomes lambda-.', `  phi = ${k.plain(sp.phi)}`,
        ...S.map((s) => `  lambda_${s.name}- = ${k.plain(sp.jump.get(s.name)!)}`),
        'pre: the state just before the spike jump (the record of spike()). couplings: per sender, the sum of its targets\'',
        'coupling from backward_incoming; dlp_dts, lV_pres, lV_posts: loss terms at the spike (None: 0).'],
      [...k.setup(sc, body, 't_start + dt'), ...k.loads(sc, 'pre'), ...body]);
  }
  const inc = plan.adjoint.incoming;
  if (plan.incoming && inc) {
    const sc = new k.PyScope(plan, k.inline);
    const first = `adj["lambda_${S[0]!.id}"]`;
    const body = [`mask = np.ones(np.shape(${first}), dtype=bool) if received is None else np.asarray(received, dtype=bool)`,
      `weight_grad = np.where(mask, ${sc.e(inc.weightGradient)}, 0.0)`, `coupling_out = np.where(mask, ${sc.e(inc.coupling)}, 0.0)`,
      ...k.gradLines(sc, (p) => plan.adjoint.paramGradients.get(p)!.incoming, '', 'mask'), 'out = {}'];
    for (const s of S) {
      const j: Sym = inc.jump.get(s.name)!;
      if (j.k === 'sym' && j.name === lambdaName(s.name)) continue;
      body.push(`out["lambda_${s.id}"] = np.where(mask, ${sc.e(j)}, lambda_${s.id})`);
      lambdaPass(sc.used, s.name);
    }
    if (body[body.length - 1] === 'out = {}') body.pop();
    else body.push(...k.assign('adj'));
    body.push('return weight_grad, coupling_out');
    k.fnDef('backward_incoming(adj, coeffs, t_start, weights, pre, received=None, grads=None)',
      ['Backward incoming jump at t_start where received is True (None: all): adj holds lambda+ and becomes lambda-.',
        ...S.map((s) => `  lambda_${s.name}- = ${k.plain(inc.jump.get(s.name)!)}`),
        `Returns (weight_grad, coupling_out): dL/dw of each received spike, ${k.plain(inc.weightGradient)}, and this target's`,
        `term of its sender's coupling, ${k.plain(inc.coupling)} (0 where nothing was received). pre: the record of incoming().`],
      [...k.setup(sc, body, 't_start'), ...k.loads(sc, 'pre'), ...body]);
  }
}
