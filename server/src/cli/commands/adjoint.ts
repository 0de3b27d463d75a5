// `saltus adjoint FILE [--model NAME] [--format text|markdown|latex|json] [--html FILE]`:
// prints the derived EventProp adjoint of every well-formed neuron in FILE (or of one), in
// the JSON contract of docs/adjoint.md or for people; `--html` also writes the typeset
// preview page. Exit 1 when the file has errors (the neurons with errors are not derived).
import { copyFileSync, existsSync, mkdirSync, readdirSync, renameSync, writeFileSync } from 'node:fs';
import { dirname, join, resolve } from 'node:path';
import { randomBytes } from 'node:crypto';
import { analyse, derivations } from '../../pipeline';
import { adjointJson, renderLatex, renderMarkdown, renderText } from '../../adjoint/index';
import { adjointPreview } from '../../outputs/adjointPreview';
import { renderPage } from '../../outputs/preview';
import { oneOf, parseCommandArgs, UsageError, type Command } from '../command';
import { readSourceFiles } from '../sourceFiles';

const FORMATS = ['text', 'markdown', 'latex', 'json'] as const;

export const adjointCommand: Command = {
  name: 'adjoint',
  summary: 'derive the EventProp adjoint (flow, spike jumps, gradients) of each neuron',
  help: `Usage: saltus adjoint FILE [--model NAME] [--format text|markdown|latex|json] [--html OUT.html]

Derives, for every neuron of FILE without errors, the adjoint system that exact
event-based gradients need: the adjoint flow, the guard slope and phi at a spike, the
jump of every adjoint, the received-spike jump, weight and parameter gradients, what to
record at each spike, and whether the backward pass needs the forward trajectory.
Convention: lambda(t) = dL/dx(t), integrated backwards from lambda(T) = 0.

Options:
  --model NAME     only this neuron
  --format text    for people (default); markdown and latex for documents;
           json    the stable contract of docs/adjoint.md (mathjs-readable expressions)
  --html OUT.html  also write the typeset preview page (KaTeX) to OUT.html
  -h, --help       show this help

Exit status: 0 derived, 1 the file has errors or NAME has errors, 2 usage error.`,

  async run(argv, io) {
    const { values, positionals } = parseCommandArgs('adjoint', argv, { model: { type: 'string' }, format: { type: 'string' }, html: { type: 'string' } });
    if (values.help) { io.out(adjointCommand.help + '\n'); return { exitCode: 0 }; }
    const format = oneOf('adjoint', 'format', values.format as string | undefined, FORMATS, 'text');
    if (positionals.length !== 1) throw new UsageError('give exactly one FILE', 'adjoint');
    const [source] = readSourceFiles('adjoint', positionals, io.cwd);
    const a = analyse(source!.text);
    const model = values.model as string | undefined;
    if (model !== undefined && !a.model.neurons.some((n) => n.name === model)) {
      throw new UsageError(`no neuron named '${model}' in ${source!.path} (it has: ${a.model.neurons.map((n) => n.name).join(', ') || 'none'})`, 'adjoint', false);
    }
    const ds = derivations(a).filter((d) => model === undefined || d.name === model);
    const broken = a.model.neurons.filter((n) => !n.wellFormed && (model === undefined || n.name === model));
    for (const n of broken) io.err(`saltus adjoint: ${n.name} has errors and is not derived (run 'saltus check ${source!.path}')\n`);
    if (format === 'json') io.out(JSON.stringify(adjointJson(ds), null, 2) + '\n');
    else if (format === 'markdown') io.out(ds.map(renderMarkdown).join('\n\n') + '\n');
    else if (format === 'latex') io.out(ds.map((d) => `% ${d.name}\n${renderLatex(d)}`).join('\n\n') + '\n');
    else io.out(ds.map(renderText).join('\n\n') + '\n');
    if (values.html !== undefined) writeHtml(resolve(io.cwd, values.html as string), a, source!.path);
    return { exitCode: broken.length > 0 ? 1 : 0 };
  },
};

/** Writes the preview page and, beside it, the KaTeX stylesheet and fonts it links to. */
function writeHtml(out: string, a: ReturnType<typeof analyse>, label: string): void {
  const p = adjointPreview(a, label);
  const dir = dirname(out);
  mkdirSync(dir, { recursive: true });
  const katexDir = findKatex();
  if (katexDir) {
    mkdirSync(join(dir, 'katex', 'fonts'), { recursive: true });
    copyFileSync(join(katexDir, 'katex.min.css'), join(dir, 'katex', 'katex.min.css'));
    for (const f of listFonts(katexDir)) copyFileSync(join(katexDir, 'fonts', f), join(dir, 'katex', 'fonts', f));
  }
  const html = renderPage(p.body, { title: p.title, subtitle: p.subtitle, katexCssHref: 'katex/katex.min.css', nonce: randomBytes(12).toString('base64') });
  const tmp = `${out}.${process.pid}.tmp`;
  writeFileSync(tmp, html);
  renameSync(tmp, out);
}

function findKatex(): string | undefined {
  for (const c of [join(__dirname, 'katex'), join(__dirname, '..', 'dist', 'katex'), join(process.cwd(), 'dist', 'katex')]) {
    if (existsSync(join(c, 'katex.min.css'))) return c;
  }
  return undefined;
}
function listFonts(dir: string): string[] {
  try { return readdirSync(join(dir, 'fonts')).filter((f) => f.endsWith('.woff2')); } catch { return []; }
}
