// The six update phases of a model as C statements, shared by the C and CUDA emitters
// (docs/codegen.md, "Phases"): forward step, spike test + jumps, incoming jump, backward
// step, backward spike jump, backward incoming jump + weight gradient. Each phase is a
// parameter list, statements before the per-neuron loop, and the per-neuron body (neuron
// `idx`; the token SKIP leaves this neuron: `continue;` in C, `return;` in a kernel).
// Every block carries a comment with the equation it implements.
// Invariant: the body reads only locals it declares (CScope.loads), `par`, `dt`, `t_start`
// and the phase's parameters; the simultaneous-update rule holds (all right sides are read
// into locals before any array element is written).
import { type Sym, ZERO } from '../symbolic/sym';
import { toPlain } from '../symbolic/print';
import { lambdaName } from '../base/names';
import { cComment } from './escape';
import { type CFlavour, CScope, cTypes } from './cexpr';
import { propagatorTerms } from './structure';
import type { ModelPlan } from './plan';
import { schemeLines } from './header';

export interface ParamSpec {
  name: string;
  /** Declaration in C functions and CUDA launchers. */
  decl: string;
  /** Declaration in a CUDA kernel (by value where the launcher's is a host pointer). */
  kernel: string;
  /** What a launcher passes to the kernel. */
  toKernel: string;
}

export interface PhaseCode {
  name: string;
  doc: string[];
  params: ParamSpec[];
  setup: string[];
  body: string[];
}

const isZero = (s: Sym): boolean => s.k === 'num' && s.v === 0;
const plain = (s: Sym): string => cComment(toPlain(s), 400);

export class CPhases {
  private readonly R: string;
  private readonly co: string;
  constructor(readonly plan: ModelPlan, readonly f: CFlavour) {
    this.R = cTypes(f).R;
    this.co = f.cuda ? 'coeffs.' : 'coeffs->';
  }

  private p(name: string, decl: string, kernel = decl, toKernel = name): ParamSpec { return { name, decl, kernel, toKernel }; }
  private get M(): string { return this.plan.prefix; }
  private common(): ParamSpec[] {
    return [this.p('n_neurons', 'int n_neurons'), this.p('coeffs', `const ${this.M}_coeffs *coeffs`, `${this.M}_coeffs coeffs`, '*coeffs'),
      this.p('t_start', `${this.R} t_start`)];
  }
  private optionalState(name: string): ParamSpec {
    return this.p(name, `${this.M}_state *${name}`, `${this.M}_state ${name}`, `${name} ? *${name} : ${this.M}_null_state()`);
  }
  private setup(scope: CScope, body: readonly string[]): string[] {
    const out: string[] = [];
    if (scope.usesParams()) out.push(`const ${this.M}_params *par = &${this.co}params;`);
    if (body.some((l) => /\bdt\b/.test(l.replace(/\/\*.*?\*\//g, '')))) out.push(`const ${this.R} dt = ${this.co}dt;`);
    return out;
  }
  /** Copies the state (before any jump of this event) into the optional record. */
  private record(target: string): string[] {
    if (this.f.cuda) return this.plan.states.map((s) => `if (${target}.${s.id}) ${target}.${s.id}[idx] = state.${s.id}[idx];`);
    return [`if (${target}) {`, ...this.plan.states.map((s) => `    ${target}->${s.id}[idx] = state.${s.id}[idx];`), '}'];
  }
  private gradsParam(): ParamSpec[] {
    return this.plan.gradParams.length ? [this.p('grads', `${this.M}_grads grads`)] : [];
  }
  private grad(scope: CScope, param: string, inc: Sym | null | undefined, factor = ''): string[] {
    if (!inc || isZero(inc)) return [];
    const id = this.plan.params.find((p) => p.name === param)!.id;
    return [`if (grads.${id}) grads.${id}[idx] += ${factor}${factor ? `(${scope.e(inc)})` : scope.e(inc)};`];
  }
  private exp(z: string): string { return `${cTypes(this.f).fn('exp')}(${z})`; }
  private expEuler(target: string, x: string, a: string, b: string, comment: string): string[] {
    const { R } = cTypes(this.f);
    return [`/* ${comment} */`, '{', `    const ${R} step_a = ${a};`, `    const ${R} step_z = step_a * dt;`,
      `    ${target} = ${x} * ${this.exp('step_z')}${b === '(0.0)' || b === '(0.0f)' ? '' : ` + ${b} * dt * ${this.M}_phi1(step_z)`};`, '}'];
  }

  forwardStep(): PhaseCode {
    const plan = this.plan, scope = new CScope(plan, this.f, 'state', 't_start');
    const body: string[] = [];
    const doc = [`Forward step: advances n_neurons neurons by dt = coeffs->dt from t_start (the flow between events).`,
      ...schemeLines(plan).map((l) => cComment(l)), 'Flow (SI):',
      ...plan.states.map((s) => `  d${s.name}/dt = ${plan.neuron.flows.get(s.name) ? plain(plan.neuron.flows.get(s.name)!) : '0 (no flow: held)'}`)];
    if (plan.fire) {
      doc.push(`guard_before (may be NULL): receives the guard g = ${plain(plan.fire.guard)} at t_start, for ${this.M}_spike.`);
      body.push(`if (guard_before) guard_before[idx] = ${scope.e(plan.fire.guard)};`);
    }
    if (plan.forward.kind === 'exact-propagator') {
      body.push(`/* x(t_start + dt) = P x(t_start) + q, with P and q from ${this.M}_prepare (exact for this linear flow) */`);
      for (const row of propagatorTerms(plan, false)) {
        const terms = row.terms.map((t) => { scope.used.add(plan.states[t.j]!.name); return `${this.co}P[${row.i}][${t.j}] * ${plan.states[t.j]!.id}`; });
        if (row.offset) terms.unshift(`${this.co}q[${row.i}]`);
        body.push(`state.${plan.states[row.i]!.id}[idx] = ${terms.join(' + ')};`);
      }
    } else {
      for (const e of plan.perState) {
        const s = plan.states.find((x) => x.name === e.state)!;
        if (e.kind === 'held') { body.push(`/* ${s.name}: no flow, constant between events */`); continue; }
        scope.used.add(s.name);
        const target = `state.${s.id}[idx]`;
        if (e.kind === 'affine') {
          body.push(...this.expEuler(target, s.id, scope.e(e.a), `(${scope.e(e.b ?? ZERO)})`,
            `${s.name}: ${e.label === 'exact' ? 'exponential Euler (exact for this state)' : 'exponential Euler'}: ${cComment(e.reason, 400)}`));
        } else {
          const { R } = cTypes(this.f);
          const lines = this.expEuler(target, s.id, scope.e(e.a), 'step_b', `${s.name}: linearised exponential Euler: ${cComment(e.reason, 400)}`);
          lines.splice(4, 0, `    const ${R} step_b = ${scope.e(e.flow!)} - step_a * ${s.id};`);
          body.push(...lines);
        }
      }
    }
    const params = [...this.common().slice(0, 1), this.p('state', `${this.M}_state state`), ...this.common().slice(1),
      ...(plan.fire ? [this.p('guard_before', `${this.R} *guard_before`)] : [])];
    const all = [...scope.loads(), ...body];
    return { name: 'forward_step', doc, params, setup: this.setup(scope, all), body: all };
  }

  spike(): PhaseCode {
    const plan = this.plan, fire = plan.fire!, scope = new CScope(plan, this.f, 'state', '(t_start + dt)');
    const { lit } = cTypes(this.f);
    const z = lit(0);
    const test = fire.direction === 'up' ? `g_start < ${z} && g_end >= ${z}`
      : fire.direction === 'down' ? `g_start > ${z} && g_end <= ${z}`
        : `(g_start < ${z} && g_end >= ${z}) || (g_start > ${z} && g_end <= ${z})`;
    const body = [`const ${this.R} g_start = guard_before[idx];`, `const ${this.R} g_end = ${scope.e(fire.guard)};`,
      `const int crossed = ${test};`, 'if (spiked) spiked[idx] = (unsigned char)crossed;', 'if (!crossed) SKIP',
      `if (spike_time) spike_time[idx] = ${this.M}_crossing_time(g_start, g_end, t_start, dt);`, ...this.record('record'),
      `/* jumps (right sides read before the spike): ${fire.jumps.map((j) => `${j.state} := ${plain(j.value)}`).join(', ')} */`,
      ...fire.jumps.map((j) => `state.${plan.states.find((s) => s.name === j.state)!.id}[idx] = ${scope.e(j.value)};`)];
    const doc = [`Threshold test and spike jumps, after ${this.M}_forward_step of the step that started at t_start.`,
      `Guard g = ${plain(fire.guard)}, crossing ${fire.direction}: a spike where g went from guard_before (at t_start)`,
      `to its value at t_start + dt ${fire.direction === 'up' ? 'from below 0 to 0 or above' : fire.direction === 'down' ? 'from above 0 to 0 or below' : 'across 0 in either direction'}.`,
      'spike_time (may be NULL): the crossing located by linear interpolation of g between the two grid',
      'values, t* = t_start + dt g_start / (g_start - g_end) (step analysis, "Guard on the grid"); the jumps',
      'are applied at the grid point t_start + dt. spiked (may be NULL): 1 where a spike happened, else 0.',
      `record (may be NULL, else every array set): receives the state just before the jumps, for ${this.M}_backward_spike.`];
    const params = [this.common()[0]!, this.p('state', `${this.M}_state state`), ...this.common().slice(1),
      this.p('guard_before', `const ${this.R} *guard_before`), this.p('spiked', 'unsigned char *spiked'),
      this.p('spike_time', `${this.R} *spike_time`), this.optionalState('record')];
    const all = [...scope.loads(), ...body];
    return { name: 'spike', doc, params, setup: this.setup(scope, all), body: all };
  }

  incoming(): PhaseCode {
    const plan = this.plan, scope = new CScope(plan, this.f, 'state', 't_start');
    const jumps = plan.incoming!.jumps;
    const body = [...this.record('record'),
      `/* incoming jump (right sides read before the event): ${jumps.map((j) => `${j.state} := ${plain(j.value)}`).join(', ')} */`,
      ...jumps.map((j) => `state.${plan.states.find((s) => s.name === j.state)!.id}[idx] = ${scope.e(j.value)};`)];
    const doc = [`Incoming spike at t_start: neuron idx receives a spike of weight weights[idx] (SI) where received is`,
      'NULL or received[idx] is non-zero. Call once per presynaptic spike.',
      `record (may be NULL, else every array set): receives the state just before the jump, for ${this.M}_backward_incoming.`];
    const params = [this.common()[0]!, this.p('state', `${this.M}_state state`), ...this.common().slice(1),
      this.p('weights', `const ${this.R} *weights`), this.p('received', 'const unsigned char *received'), this.optionalState('record')];
    const all = ['if (received && !received[idx]) SKIP', ...scope.loads(), ...body];
    return { name: 'incoming', doc, params, setup: this.setup(scope, all), body: all };
  }

  backwardStep(): PhaseCode {
    const plan = this.plan, scope = new CScope(plan, this.f, 'fwd', '(t_start + dt)');
    const body: string[] = [];
    const doc = ['Backward (adjoint) step: takes the costates lambda = dL/dx of n_neurons neurons from t_start + dt',
      'back to t_start, integrating the derived adjoint flow (forward-time form):',
      ...plan.backward.map((b) => `  dlambda_${b.state}/dt = ${plain(b.flow)}`),
      'with dlV_dX = loss_source->X (dL_V/dX at the step; loss_source or any array may be NULL: 0).'];
    if (plan.gradParams.length) {
      const g = plan.gradParams.filter((p) => !isZero(plan.adjoint.paramGradients.get(p)!.flow));
      doc.push(g.length ? `Parameter gradients: grads.p += dt * lambda . df/dp at t_start + dt (rectangle rule): ${g.join(', ')}.`
        : 'The flow does not depend on the trainable parameters: no gradient accrues between events.');
      for (const p of plan.gradParams) body.push(...this.grad(scope, p, plan.adjoint.paramGradients.get(p)!.flow, 'dt * '));
    }
    if (plan.forward.kind === 'exact-propagator') {
      doc.push('The flow is linear time-invariant: lambda(t_start) = P^T lambda(t_start + dt) + Q^T dlV/dx, exact for a loss',
        `source held over the step (P, Q from ${this.M}_prepare). fwd is not needed by this model.`);
      for (const row of propagatorTerms(plan, true)) {
        const t = row.terms.map((x) => { scope.used.add(lambdaName(plan.states[x.j]!.name)); return `${this.co}P[${x.j}][${row.i}] * lambda_${plan.states[x.j]!.id}`; });
        const q = row.terms.map((x) => { scope.used.add(`dlV_d${plan.states[x.j]!.name}`); return `${this.co}Q[${x.j}][${row.i}] * dlV_d${plan.states[x.j]!.id}`; });
        body.push(`adj.lambda_${plan.states[row.i]!.id}[idx] = ${[...t, ...q].join(' + ')};`);
      }
    } else {
      doc.push('Exponential Euler in reverse time for each costate: -dlambda_X/dt = alpha lambda_X + beta, with alpha and beta',
        'at t_start + dt (fwd: the forward state there, before any spike jump at that grid point).');
      for (const b of plan.backward) {
        const s = plan.states.find((x) => x.name === b.state)!;
        scope.used.add(lambdaName(s.name));
        body.push(...this.expEuler(`adj.lambda_${s.id}[idx]`, `lambda_${s.id}`, scope.e(b.alpha), `(${scope.e(b.beta)})`,
          `lambda_${s.name}: alpha = ${plain(b.alpha)}, beta = ${plain(b.beta)}`));
      }
    }
    const params = [this.common()[0]!, this.p('adj', `${this.M}_adjoint adj`), ...this.common().slice(1),
      this.p('fwd', `${this.M}_state fwd`),
      this.p('loss_source', `const ${this.M}_state *loss_source`, `${this.M}_state loss_source`, `loss_source ? *loss_source : ${this.M}_null_state()`),
      ...this.gradsParam()];
    const all = [...scope.loads(), ...body];
    return { name: 'backward_step', doc, params, setup: this.setup(scope, all), body: all };
  }

  backwardSpike(): PhaseCode {
    const plan = this.plan, sp = plan.adjoint.spike!, scope = new CScope(plan, this.f, 'pre', '(t_start + dt)');
    const { R } = cTypes(this.f);
    const body: string[] = [`const ${R} phi = ${scope.e(sp.phi)};`];
    for (const p of plan.gradParams) body.push(...this.grad(scope, p, plan.adjoint.paramGradients.get(p)!.spike));
    for (const s of plan.states) {
      const j = sp.jump.get(s.name)!;
      if (j.k === 'sym' && j.name === lambdaName(s.name)) continue;
      body.push(`adj.lambda_${s.id}[idx] = ${scope.e(j)};`);
    }
    const doc = [`Backward spike jump at t_start + dt for the neurons with spiked[idx] set (the spikes ${this.M}_spike found`,
      'in the step that started at t_start). lambda holds lambda+ (just after the spike) and becomes lambda-:',
      `  phi = ${plain(sp.phi)}`, ...plan.states.map((s) => `  lambda_${s.name}- = ${plain(sp.jump.get(s.name)!)}`),
      'pre: the state just before the spike jump (record of the forward spike). couplings: the sum over this',
      `neuron's targets of their coupling_out from ${this.M}_backward_incoming for this spike; dlp_dts: dl_p/dt_k of`,
      'the spike-time loss; lV_pres/lV_posts: l_V just before/after the event. Each may be NULL (0).'];
    if (plan.gradParams.some((p) => plan.adjoint.paramGradients.get(p)!.spike && !isZero(plan.adjoint.paramGradients.get(p)!.spike!))) {
      doc.push('Parameter gradients: grads.p += lambda+ . dh/dp + phi dg/dp.');
    }
    const params = [this.common()[0]!, this.p('adj', `${this.M}_adjoint adj`), ...this.common().slice(1),
      this.p('spiked', 'const unsigned char *spiked'), this.p('pre', `${this.M}_state pre`),
      this.p('couplings', `const ${R} *couplings`), this.p('dlp_dts', `const ${R} *dlp_dts`),
      this.p('lV_pres', `const ${R} *lV_pres`), this.p('lV_posts', `const ${R} *lV_posts`), ...this.gradsParam()];
    const all = ['if (!spiked[idx]) SKIP', ...scope.loads(), ...body];
    return { name: 'backward_spike', doc, params, setup: this.setup(scope, all), body: all };
  }

  backwardIncoming(): PhaseCode {
    const plan = this.plan, inc = plan.adjoint.incoming!, scope = new CScope(plan, this.f, 'pre', 't_start');
    const body: string[] = [`if (weight_grad) weight_grad[idx] = ${scope.e(inc.weightGradient)};`,
      `if (coupling_out) coupling_out[idx] = ${scope.e(inc.coupling)};`];
    for (const p of plan.gradParams) body.push(...this.grad(scope, p, plan.adjoint.paramGradients.get(p)!.incoming));
    for (const s of plan.states) {
      const j = inc.jump.get(s.name)!;
      if (j.k === 'sym' && j.name === lambdaName(s.name)) continue;
      body.push(`adj.lambda_${s.id}[idx] = ${scope.e(j)};`);
    }
    const doc = ['Backward incoming jump at t_start for the neurons that received a spike of weight weights[idx] there',
      '(received NULL: all). lambda holds lambda+ and becomes lambda-:',
      ...plan.states.map((s) => `  lambda_${s.name}- = ${plain(inc.jump.get(s.name)!)}`),
      `weight_grad (may be NULL): dL/dw of this spike's synapse, ${plain(inc.weightGradient)} (add it to that synapse's gradient).`,
      `coupling_out (may be NULL): this target's term of the sender's coupling, ${plain(inc.coupling)}.`,
      `pre: the state just before the incoming jump (record of ${this.M}_incoming).`];
    const params = [this.common()[0]!, this.p('adj', `${this.M}_adjoint adj`), ...this.common().slice(1),
      this.p('weights', `const ${R(this.f)} *weights`), this.p('received', 'const unsigned char *received'), this.p('pre', `${this.M}_state pre`),
      this.p('weight_grad', `${R(this.f)} *weight_grad`), this.p('coupling_out', `${R(this.f)} *coupling_out`), ...this.gradsParam()];
    const all = ['if (received && !received[idx]) SKIP', ...scope.loads(), ...body];
    return { name: 'backward_incoming', doc, params, setup: this.setup(scope, all), body: all };
  }

  all(): PhaseCode[] {
    const out = [this.forwardStep()];
    if (this.plan.fire) out.push(this.spike());
    if (this.plan.incoming) out.push(this.incoming());
    out.push(this.backwardStep());
    if (this.plan.fire && this.plan.adjoint.spike) out.push(this.backwardSpike());
    if (this.plan.incoming && this.plan.adjoint.incoming) out.push(this.backwardIncoming());
    return out;
  }
}

const R = (f: CFlavour): string => cTypes(f).R;
