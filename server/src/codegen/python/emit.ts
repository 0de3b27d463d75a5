// Python files of the array targets (docs/codegen.md): one module per model with its kernels
// (kernels.ts printed through the `X` array dialect), the dialect module, the grid runtime
// (runtime.py, shared by every model and by the NumPy and PyTorch dialects) and, for a
// network, the runner `run.py`. A new array target is a dialect file plus a few names here,
// not a copy of the printer.
// Invariants: every file starts with the generated-code header and a hash line (hash.ts);
// model text reaches comments and strings only through escape.ts.
import type { Sym } from '../../symbolic/sym';
import { toPlain, toPython } from '../../symbolic/print';
import { epropFunctions } from './eprop';
import { oneLine, pyComment, pyStringBody } from '../escape';
import { type KernelPlan, headerLines, kernelNamer } from '../kernelPlan';
import type { Kernel } from '../kernels';
import type { Renaming } from '../names';
import type { FileDelay } from '../network';
import runtimeText from './runtime.py?raw';
import numpyDialectText from './numpy_dialect.py?raw';
import torchDialectText from './torch_dialect.py?raw';

export interface GeneratedFile { name: string; content: string }

export interface PyDialect {
  id: 'numpy' | 'torch';
  /** Words for headers. */
  label: string;
  precision: string;
  /** The dialect module's text. */
  dialectText: string;
  /** The files form a package (relative imports, with a fallback for scripts run in the folder). */
  package: boolean;
}

export const NUMPY_DIALECT: PyDialect = { id: 'numpy', label: 'NumPy', precision: 'float64 (NumPy arrays)', dialectText: numpyDialectText, package: false };
export const TORCH_DIALECT: PyDialect = { id: 'torch', label: 'PyTorch', precision: 'the dtype of the tensors passed in (float64 or float32), on their device', dialectText: torchDialectText, package: true };

/** `from saltus_dialect import X` (and for a package, the relative import first); [module, '', alias] imports a module under an alias. */
export function importLines(d: PyDialect, what: readonly (readonly [module: string, names: string, alias?: string])[]): string[] {
  const as = (alias?: string): string => (alias ? ` as ${alias}` : '');
  const plain = what.map(([m, n, a]) => (n ? `from ${m} import ${n}` : `import ${m}${as(a)}`));
  if (!d.package) return plain;
  const rel = what.map(([m, n, a]) => (n ? `from .${m} import ${n}` : `from . import ${m}${as(a)}`));
  return ['try:  # inside the generated package', ...ind(rel), 'except ImportError:  # run as a script next to the files', ...ind(plain)];
}
/** FILE_DELAYS: the model file's `connect A -> B [via W] delay D` by (from model, to model, block weight), D in s;
 *  the runtime gives it to a projection without its own "delay_s" (runtime.py `load_network`). */
export function fileDelaysLines(fileDelays: readonly FileDelay[]): string[] {
  return ['# the model file\'s delays (s) by (from model, to model, receiving block): a projection without its own "delay_s" takes them',
    'FILE_DELAYS = {', ...fileDelays.map((d) => `    ("${pyStringBody(d.from)}", "${pyStringBody(d.to)}", "${pyStringBody(d.via)}"): ${repr(d.delay)},`), '}', ''];
}

const ind = (lines: readonly string[], n = 1): string[] => lines.map((l) => (l ? '    '.repeat(n) + l : l));
const repr = (v: number): string => (Number.isNaN(v) ? 'float("nan")' : v === Infinity ? 'float("inf")' : v === -Infinity ? 'float("-inf")' : String(v));

/** Text inside a triple-quoted docstring: one line, backslashes doubled, no closing quotes. */
const docText = (text: string, max = 400): string => oneLine(text, max).replace(/\\/g, '\\\\').replace(/"""/g, '\\"\\"\\"').replace(/"$/, '\\"');

function headerDocstring(lines: readonly string[]): string[] {
  return ['"""', ...lines.map((l) => docText(l)), '"""'];
}

/** The model module: constants and one function per kernel. */
export function modelModule(plan: KernelPlan, d: PyDialect, ctx: { source?: string; renamed: readonly Renaming[] }): GeneratedFile {
  const name = `${plan.prefix.toLowerCase()}.py`;
  const L: string[] = [...headerDocstring(headerLines(plan, { file: name, ...(ctx.source ? { source: ctx.source } : {}), target: d.label,
    precision: d.precision, renamed: ctx.renamed, esc: (s) => s }))];
  L.push(...importLines(d, [['saltus_dialect', 'X']]), '');
  const S = plan.states, P = plan.params;
  const grad = plan.params.filter((p) => plan.grid.gradParams.includes(p.name));
  L.push(`NAME = "${pyStringBody(plan.neuron.name)}"`);
  L.push(`STATES = (${S.map((s) => `"${s.id}"`).join(', ')}${S.length === 1 ? ',' : ''})`);
  L.push(`PARAMS = (${P.map((p) => `"${p.id}"`).join(', ')}${P.length === 1 ? ',' : ''})`);
  L.push(`GRAD_PARAMS = (${grad.map((p) => `"${p.id}"`).join(', ')}${grad.length === 1 ? ',' : ''})`);
  L.push(`DEFAULT_PARAMS = {${P.map((p) => `"${p.id}": ${repr(p.valueSI)}`).join(', ')}}`);
  L.push(`INITIAL = {${S.map((s) => `"${s.id}": ${repr(s.initialSI)}`).join(', ')}}`);
  L.push(`EXACT = ${plan.grid.exact ? 'True' : 'False'}`);
  L.push(`STATE_DEPENDENT_DERIVATIVES = ${plan.stateDependent ? 'True' : 'False'}`);
  L.push(`RATE = ${repr(plan.rate)}`);
  L.push(`HAS_GUARD = ${plan.grid.guard ? 'True' : 'False'}`);
  // a quiet period (`quiet for`): its own map kernels (quiet_*), exactness, sub-step rate and
  // whether its map's derivatives read the segment-start state
  const q = plan.grid.quiet;
  L.push(`HAS_QUIET = ${q ? 'True' : 'False'}`);
  L.push(`QUIET_EXACT = ${q?.exact ? 'True' : 'False'}`);
  L.push(`QUIET_RATE = ${repr(plan.quietRate ?? 0)}`);
  L.push(`QUIET_STATE_DEPENDENT_DERIVATIVES = ${q && q.segmentStates.length > 0 ? 'True' : 'False'}`);
  L.push(`DIRECTION = ${plan.grid.guard ? `"${plan.grid.guard.direction}"` : 'None'}`);
  L.push(`WEIGHT = ${plan.weight ? `"${plan.weight.id}"` : 'None'}`);
  // the incoming blocks by their weight names as written (a projection's "via" names one)
  const inc = plan.neuron.receptors.map((r) => `"${pyStringBody(r.weight)}"`);
  L.push(`INCOMING = (${inc.join(', ')}${inc.length === 1 ? ',' : ''})`);
  L.push('', '');
  for (const k of plan.kernels) L.push(...kernelFunction(plan, k), '', '');
  const eprop = epropFunctions(plan);
  L.push(...eprop.lines);
  L.push(`__all__ = ["NAME", "STATES", "PARAMS", "GRAD_PARAMS", "DEFAULT_PARAMS", "INITIAL", ${plan.kernels.map((k) => `"${k.name}"`).concat(eprop.names.map((n) => `"${n}"`)).join(', ')}]`);
  return { name, content: L.join('\n').trimEnd() + '\n' };
}

const ARG_NAMES: Record<string, string> = { x: 'x', p: 'p', t: 't', dt: 'dt', w: 'weight', lam: 'lam', dx: 'dx' };

function kernelFunction(plan: KernelPlan, k: Kernel): string[] {
  const { locals, used, name } = kernelNamer(plan, k, (kind, i) => `${kind}[${i}]`, (n) => n);
  const e = (s: Sym): string => toPython(s, { module: 'X', name, expdd: { phi1: 'X.phi1', expdd: () => 'X.expdd' } });
  const body: string[] = [];
  for (const a of k.locals) body.push(`${locals.get(a.name)} = ${e(a.expr)}`);
  const outs = k.outputs.map((o) => e(o.expr));
  const unpackX = plan.states.map((s) => s.id), unpackP = plan.params.map((p) => p.id);
  const head: string[] = [];
  if (k.args.includes('x') && plan.states.some((_, i) => used.has(`x.${i}`))) head.push(`${unpackX.join(', ')}${unpackX.length === 1 ? ',' : ''} = x`);
  if (k.args.includes('p') && plan.params.some((_, i) => used.has(`p.${i}`))) head.push(`${unpackP.join(', ')}${unpackP.length === 1 ? ',' : ''} = p`);
  const doc = [...k.doc, `Returns (${k.outputs.map((o) => o.name).join(', ')}).`];
  const formulas = k.outputs.length <= 12 ? k.outputs.map((o) => `${o.name} = ${toPlain(o.expr)}`) : [];
  return [`def ${k.name}(${k.args.map((a) => ARG_NAMES[a]).join(', ')}):`,
    ...ind(['"""' + docText(doc.join(' '), 600), ...formulas.map((f) => docText(f, 300)), '"""']),
    ...ind(head), ...ind(body),
    ...ind([`return (${outs.join(', ')}${outs.length === 1 ? ',' : ''})`])];
}

/** The dialect module and the grid runtime: fixed files, the same for every model. */
export function runtimeFiles(d: PyDialect): GeneratedFile[] {
  const stamp = (file: string, what: string): string[] =>
    ['# ' + pyComment(`${file}: ${what}, generated by Saltus (the same for every model).`),
      '# saltus-hash: sha256:@@SALTUS_HASH@@ (of this file without this line). Saltus will not overwrite this file once it has been changed, unless forced.',
      '# Generated: do not edit.', ''];
  return [
    { name: 'saltus_dialect.py', content: [...stamp('saltus_dialect.py', `the ${d.label} array dialect`), d.dialectText].join('\n') },
    { name: 'saltus_grid.py', content: [...stamp('saltus_grid.py', 'the grid runtime (events inside steps, exact gradient)'),
      ...importLines(d, [['saltus_dialect', 'X']]), '', runtimeText].join('\n') },
  ];
}

/** run.py: `python3 run.py NET.json --dt 0.1ms --format json` (the runner contract of docs/codegen.md). */
export function runnerFile(models: readonly KernelPlan[], d: PyDialect = NUMPY_DIALECT, fileDelays: readonly FileDelay[] = []): GeneratedFile {
  const torch = d.id === 'torch';
  const imports = models.map((m) => `import ${m.prefix.toLowerCase()}`);
  const table = models.map((m) => `    "${pyStringBody(m.neuron.name)}": ${m.prefix.toLowerCase()},`);
  const L = [
    '# ' + pyComment('run.py: runs a network description on the generated grid step and prints its loss, spikes and exact gradient.'),
    '# saltus-hash: sha256:@@SALTUS_HASH@@ (of this file without this line). Saltus will not overwrite this file once it has been changed, unless forced.',
    '# Generated: do not edit.',
    `"""Usage: python3 run.py NET.json --dt 0.1ms [--format json|text]${torch ? ' [--device cpu|cuda]' : ''}`,
    '',
    'Prints {"loss": L, "spikes": {POP: [[t, i], ...]}, "weights": [dL/dW per projection, weights[to][from]],',
    '"params": {"POP.NAME": dL/dp}} in SI units (docs/codegen.md, "Runner")."""',
    'import json', 'import os', 'import re', 'import sys', '',
    'sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))', '',
    'import saltus_grid  # noqa: E402', ...imports.map((l) => `${l}  # noqa: E402`),
    ...(torch ? ['import torch  # noqa: E402', 'import network  # noqa: E402'] : []), '',
    'MODELS = {', ...table, '}', '', ...(torch ? [] : fileDelaysLines(fileDelays)),
    '_UNITS = {"s": 1.0, "ms": 1e-3, "us": 1e-6, "µs": 1e-6, "ns": 1e-9}', '', '',
    'def parse_time(text):',
    '    """A time as the CLI writes it: 0.1ms, 0.1 ms, 0.1 [ms], 1e-4 s."""',
    '    m = re.fullmatch(r"\\s*([0-9.eE+-]+)\\s*\\[?\\s*([a-zµ]+)\\s*\\]?\\s*", text)',
    '    if not m or m.group(2) not in _UNITS:',
    '        raise SystemExit("run.py: --dt must be a time with a unit, e.g. 0.1ms; got %r" % text)',
    '    value = float(m.group(1)) * _UNITS[m.group(2)]',
    '    if not value > 0:',
    '        raise SystemExit("run.py: --dt must be positive; got %r" % text)',
    '    return value', '', '',
    'def main(argv):',
    '    if "--rule" in argv:  # --rule eventprop (this runner, the default) or eprop (docs/eprop.md)',
    '        return saltus_grid.rule_main(argv, MODELS, parse_time, main)',
    '    args = list(argv)',
    '    fmt = "text"',
    '    dt = None',
    '    path = None',
    ...(torch ? ['    device = "cpu"'] : []),
    '    while args:',
    '        a = args.pop(0)',
    '        if a in ("--dt", "--timestep"):',
    '            dt = parse_time(args.pop(0))',
    ...(torch ? ['        elif a == "--device":', '            device = args.pop(0)'] : []),
    '        elif a == "--format":',
    '            fmt = args.pop(0)',
    '        elif path is None:',
    '            path = a',
    '        else:',
    '            raise SystemExit("run.py: unexpected argument %r" % a)',
    '    if path is None or dt is None:',
    '        raise SystemExit(__doc__)',
    '    with open(path, encoding="utf-8") as f:',
    ...(torch ? [
      '        description = json.load(f)',
      '    if device not in ("cpu", "cuda") or (device == "cuda" and not torch.cuda.is_available()):',
      '        raise SystemExit("run.py: --device must be cpu or cuda (and cuda needs a GPU that torch sees); got %r" % device)',
      '    try:',
      '        net = network.Network(description, dt, dtype=torch.float64, device=device)',
      '        net().backward()',
      '    except saltus_grid.GridError as e:',
      '        raise SystemExit("run.py: %s" % e)',
      '    out = net.report()',
    ] : [
      '        net = saltus_grid.load_network(json.load(f), MODELS, FILE_DELAYS)',
      '    try:',
      '        run = saltus_grid.forward(net, dt)',
      '    except saltus_grid.GridError as e:',
      '        raise SystemExit("run.py: %s" % e)',
      '    out = saltus_grid.report(run, saltus_grid.backward(run))',
    ]),
    '    if fmt == "json":',
    '        print(json.dumps(out))',
    '    else:',
    '        print("loss %.17g" % out["loss"])',
    '        for k, w in enumerate(out["weights"]):',
    '            print("dL/dW projection %d: %s" % (k, w))',
    '        for k, v in out["params"].items():',
    '            print("dL/d%s: %.17g" % (k, v))',
    '    return 0', '', '',
    'if __name__ == "__main__":',
    '    sys.exit(main(sys.argv[1:]))',
  ];
  return { name: 'run.py', content: L.join('\n') + '\n' };
}
