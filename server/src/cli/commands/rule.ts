// `saltus adjoint|eligibility FILE [--model NAME] [--format text|markdown|latex|json] [--html FILE]`:
// one subcommand per learning rule of the registry (rules/index.ts), printing that rule's
// derivation of every well-formed neuron in FILE (or of one), in the rule's JSON contract or
// for people; `--html` also writes the typeset preview page (every rule's sections). Exit 1
// when the file has errors (the neurons with errors are not derived).
import { copyFileSync, existsSync, mkdirSync, readdirSync, renameSync, writeFileSync } from 'node:fs';
import { dirname, join, resolve } from 'node:path';
import { randomBytes } from 'node:crypto';
import { analyse } from '../../pipeline';
import { adjointPreview } from '../../outputs/adjointPreview';
import { loadTypesetter, renderPage } from '../../outputs/preview';
import type { LearningRule } from '../../rules/types';
import { oneOf, parseCommandArgs, timestepArg, timestepHelp, TIMESTEP_OPTIONS, UsageError, type Command } from '../command';
import { readSourceFiles } from '../sourceFiles';

const FORMATS = ['text', 'markdown', 'latex', 'json'] as const;

export function ruleCommand(rule: LearningRule): Command {
  const name = rule.command;
  const dtUsage = rule.usesTimestep ? ' [--timestep TIME]' : '';
  const command: Command = {
    name,
    summary: rule.summary,
    help: `Usage: saltus ${name} FILE [--model NAME] [--format text|markdown|latex|json]${dtUsage} [--html OUT.html]

${rule.describe}

Options:
  --model NAME     only this neuron
  --format text    for people (default); markdown and latex for documents;
           json    the stable contract of ${rule.doc} (mathjs-readable expressions)
${rule.usesTimestep ? `${timestepHelp("the grid step the JSON reports instead of the file's 'timestep'")}\n` : ''}  --html OUT.html  also write the typeset preview page (KaTeX) to OUT.html
  -h, --help       show this help

Exit status: 0 derived, 1 the file has errors or NAME has errors, 2 usage error.`,

    async run(argv, io) {
      const { values, positionals } = parseCommandArgs(name, argv, { model: { type: 'string' }, format: { type: 'string' }, html: { type: 'string' },
        ...(rule.usesTimestep ? TIMESTEP_OPTIONS : {}) });
      if (values.help) { io.out(command.help + '\n'); return { exitCode: 0 }; }
      const format = oneOf(name, 'format', values.format as string | undefined, FORMATS, 'text');
      if (positionals.length !== 1) throw new UsageError('give exactly one FILE', name);
      const [source] = readSourceFiles(name, positionals, io.cwd);
      const timestep = rule.usesTimestep ? timestepArg(name, values as { timestep?: unknown; dt?: unknown }) : undefined;
      const a = analyse(source!.text, timestep ? { timestep } : {});
      const model = values.model as string | undefined;
      if (model !== undefined && !a.model.neurons.some((n) => n.name === model)) {
        throw new UsageError(`no neuron named '${model}' in ${source!.path} (it has: ${a.model.neurons.map((n) => n.name).join(', ') || 'none'})`, name, false);
      }
      const chosen = a.model.neurons.filter((n) => model === undefined || n.name === model);
      const ok = chosen.filter((n) => n.wellFormed);
      for (const n of chosen.filter((x) => !x.wellFormed)) io.err(`saltus ${name}: ${n.name} has errors and is not derived (run 'saltus check ${source!.path}')\n`);
      io.out(rule.render(ok, format, a.timestep ? { dt: a.timestep.seconds } : {}) + '\n');
      if (values.html !== undefined) await writeHtml(resolve(io.cwd, values.html as string), a, source!.path);
      return { exitCode: ok.length < chosen.length ? 1 : 0 };
    },
  };
  return command;
}

/** Writes the preview page and, beside it, the KaTeX stylesheet and fonts it links to. */
async function writeHtml(out: string, a: ReturnType<typeof analyse>, label: string): Promise<void> {
  await loadTypesetter();
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
