// End-to-end checks of the packaged extension in real VS Code (code-server 4.139.1 =
// VS Code 1.139.1, in headless Chromium): each check is one async function that acts as a
// user would (vscodeUi.mjs) and returns a one-line detail, throws on failure, or throws
// Skip(reason) when the feature it checks is not in this build yet. Add a later check by
// writing one more function and listing it in CHECKS.
// Oracles, independent of the UI under test: the sample's own text (where a mistake is),
// the packaged CLI's JSON diagnostics (same analysis, other path: message, line, column),
// and the installed extension's package.json (which commands are contributed).
// Invariants: the workspace is a scratch copy of samples/ (a quick fix never edits the
// repository); each check opens what it needs itself; screenshots of passing checks go to
// the run's screenshot folder (.e2e/out/screenshots/NAME.png; docs/screenshots/ only with
// --update-screenshots). The checks of the commands that derive results (generated code,
// gradient cross-check) are in vscodeDerived.e2e.mjs, those of the editor conventions (walkthrough,
// restored preview, test explorer, check task) in vscodeConventions.e2e.mjs.
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { expect, lineOf, Skip } from './checkKit.mjs';
import { checkGenerateCode, checkGenerateCodeLens, crossCheck } from './vscodeDerived.e2e.mjs';
import { checkCheckTask, checkFixAll, checkRestoredPreview, checkTestExplorer, checkWalkthrough } from './vscodeConventions.e2e.mjs';

export { Skip };

/** Error squiggles and Problems entries for the deliberate mistakes, against the CLI. */
async function checkProblems(t) {
  const { ui } = t;
  const file = 'mistakes.saltus';
  const text = t.sample(file);
  const flowLine = lineOf(text, 'dV/dt = I - V');
  const cli = t.cliDiagnostics(file).filter((d) => d.severity === 'error');
  expect(cli.length >= 5, `the CLI reports ${cli.length} errors for ${file}; the sample has five deliberate mistakes`);
  const flow = cli.find((d) => d.range.start.line + 1 === flowLine);
  expect(flow && /tau_m/.test(flow.message), `the CLI has no error naming tau_m on the flow line ${flowLine}: ${JSON.stringify(cli.map((d) => [d.range.start.line + 1, d.message]))}`);

  await ui.openFile(file);
  await ui.page.locator('.editor-group-container.active .squiggly-error').first().waitFor({ timeout: 30_000 });
  // the server may publish in more than one round (basic checks, then derived ones): wait
  // up to 15 s for the panel to settle on the CLI's list
  const wants = cli.map((d) => `Error: ${d.message} at line ${d.range.start.line + 1} and character ${d.range.start.character + 1}`);
  let rows = [], missing = wants;
  for (const until = Date.now() + 15_000; Date.now() < until;) {
    rows = await ui.problems();
    missing = wants.filter((w) => !rows.some((r) => r.label.startsWith(w)));
    if (missing.length === 0 && rows.filter((r) => r.label.startsWith('Error: ')).length === cli.length) break;
    await ui.page.waitForTimeout(250);
  }
  expect(missing.length === 0, `Problems has no entry "${missing[0]}"; it shows:\n  ${rows.map((r) => r.label).join('\n  ')}`);
  const errorRows = rows.filter((r) => r.label.startsWith('Error: '));
  expect(errorRows.length === cli.length, `Problems lists ${errorRows.length} errors, the CLI ${cli.length}`);

  await ui.goTo(flowLine, flow.range.start.character + 1);
  const squiggled = await ui.squiggleLines('error');
  const visible = new Set((await ui.visibleLines()).map((l) => l.line));
  const wanted = [...new Set(cli.map((d) => d.range.start.line + 1).filter((l) => visible.has(l)))].sort((a, b) => a - b);
  expect(squiggled.includes(flowLine), `no error squiggle on line ${flowLine} (squiggles on ${squiggled.join(', ')})`);
  expect(JSON.stringify(squiggled) === JSON.stringify(wanted), `error squiggles on lines ${squiggled.join(', ')}, expected ${wanted.join(', ')}`);
  await ui.page.mouse.move(5, 400);
  await ui.screenshot('problems');
  return `${cli.length} errors in Problems match the CLI; squiggles on lines ${squiggled.join(', ')}; flow error at line ${flowLine}: "${flow.message}"`;
}

/** A plain LIF file: Problems shows no warning and no error, only the grazing set as information. */
async function checkPlainLif(t) {
  const { ui } = t;
  const file = 'lif_current.saltus';
  const cli = t.cliDiagnostics(file);
  expect(!cli.some((d) => d.severity === 'error' || d.severity === 'warning'), `the CLI reports a warning or error for ${file}: ${JSON.stringify(cli.map((d) => d.message))}`);
  await ui.tidy();
  await ui.openFile(file);
  // the derived checks arrive after the basic ones: wait for the grazing-set information
  let rows = [];
  for (const until = Date.now() + 30_000; Date.now() < until;) {
    rows = await ui.problems().catch(() => []);
    if (rows.some((r) => r.label.startsWith('Info: ') && r.label.includes('not transversal'))) break;
    await ui.page.waitForTimeout(250);
  }
  const info = rows.filter((r) => r.label.startsWith('Info: '));
  expect(info.some((r) => r.label.includes('not transversal')), `Problems shows no grazing-set information for ${file}; rows:\n  ${rows.map((r) => r.label).join('\n  ')}`);
  const loud = rows.filter((r) => /^(Warning|Error): /.test(r.label));
  expect(loud.length === 0, `Problems shows ${loud.length} warning(s) or error(s) for a plain LIF file:\n  ${loud.map((r) => r.label).join('\n  ')}`);
  await ui.runCommand('View: Close All Editors');
  return `${file}: no warning or error in Problems; ${info.length} information entr${info.length === 1 ? 'y' : 'ies'} (the grazing set)`;
}

/** Hover on a parameter's use shows its unit and docstring, as declared in the file. */
async function checkHover(t) {
  const { ui } = t;
  const file = 'lif_current.saltus';
  const text = t.sample(file);
  const decl = /param\s+tau_m\s*=\s*[\d.eE+-]+\s*\[\s*([^\]]+?)\s*\](?:\s+trainable)?\s*#~\s*(.*?)\s*$/m.exec(text);
  expect(decl, `${file} no longer declares tau_m with a unit and a note (#~)`);
  const [, unit, doc] = decl;
  const useLine = lineOf(text, 'dV/dt = (I - V) / tau_m');

  await ui.openFile(file);
  await ui.goTo(useLine, 1);
  const shown = await ui.hover(useLine, 'tau_m');
  expect(new RegExp(`\\b${unit.replace(/[.*+?^${}()|[\]\\]/g, '\\$&')}\\b`).test(shown), `the hover does not show the unit ${unit}:\n${shown}`);
  expect(shown.includes(doc), `the hover does not show the docstring "${doc}":\n${shown}`);
  expect(/param|parameter/i.test(shown), `the hover does not say tau_m is a parameter:\n${shown}`);
  await ui.screenshot('hover');
  await ui.page.keyboard.press('Escape');
  return `hover on tau_m (line ${useLine}) shows [${unit}] and "${doc}"`;
}

/** The light bulb on the flow without a rate offers the division by tau_m; applying it fixes the line. */
async function checkQuickFix(t) {
  const { ui } = t;
  const file = 'mistakes.saltus';
  const flowLine = lineOf(t.sample(file), 'dV/dt = I - V');
  const title = "Divide the right side by 'tau_m'";

  await ui.openFile(file);
  await ui.page.locator('.editor-group-container.active .squiggly-error').first().waitFor({ timeout: 30_000 });
  await ui.goTo(flowLine, (await ui.lineText(flowLine)).indexOf('I - V') + 2);
  const before = await ui.lineText(flowLine);
  const entries = await ui.openLightBulb();
  expect(entries.some((e) => e.includes(title)), `the light bulb offers ${JSON.stringify(entries)}, not "${title}"`);
  await ui.screenshot('quick-fix');
  await ui.chooseAction(title);
  let after = before;
  for (let i = 0; i < 40 && after === before; i++) { await ui.page.waitForTimeout(100); after = await ui.lineText(flowLine); }
  expect(after.replace(/\s+/g, ' ').trim() === 'dV/dt = (I - V) / tau_m', `line ${flowLine} reads "${after.trim()}" after the fix`);
  // the server re-checks the edited text: the flow's error goes away, the other errors stay
  let squiggled = [];
  for (let i = 0; i < 50; i++) {
    squiggled = await ui.squiggleLines('error');
    if (!squiggled.includes(flowLine) && squiggled.length > 0) break;
    await ui.page.waitForTimeout(100);
  }
  expect(!squiggled.includes(flowLine), `line ${flowLine} still has an error squiggle after the fix`);
  const rows = await ui.problems();
  expect(!rows.some((r) => r.label.includes(`at line ${flowLine} and`) && r.label.startsWith('Error:')), `Problems still lists an error at line ${flowLine}`);
  await ui.runCommand('File: Revert File'); // leave the sample as it was for the checks that follow
  return `"${before.trim()}" became "${after.trim()}"; the error at line ${flowLine} is gone, ${rows.filter((r) => r.label.startsWith('Error:')).length} errors remain`;
}

/** "Saltus: Show derived adjoint" opens a webview with typeset equations (KaTeX). */
async function checkAdjointPreview(t) {
  const { ui } = t;
  const commandTitle = 'Show derived adjoint';
  const contributed = (t.manifest.contributes?.commands ?? []).find((c) => c.title === commandTitle || c.command === 'saltus.showAdjoint');
  if (!contributed) throw new Skip(`the extension does not contribute "Saltus: ${commandTitle}" yet (package.json contributes.commands)`);
  const file = 'lif_current.saltus';
  await ui.tidy();
  await ui.openFile(file);
  expect(await ui.runCommand(`${contributed.category ?? 'Saltus'}: ${contributed.title}`), `the command palette does not list "Saltus: ${contributed.title}"`);
  await ui.page.locator('.tabs-container .tab', { hasText: file.replace(/\.saltus$/, '') }).last().waitFor();
  // the webview of this extension (VS Code tags its frame with the extension's id)
  const frameSel = `iframe.webview.ready[src*="extensionId=${t.manifest.publisher}.${t.manifest.name}"]`;
  await ui.page.locator(frameSel).last().waitFor({ timeout: 30_000 });
  const inner = ui.page.frameLocator(frameSel).last().frameLocator('#active-frame');
  await inner.locator('.katex').first().waitFor({ timeout: 30_000 });
  const info = await inner.locator('body').evaluate(async (body) => {
    await document.fonts.ready;
    const k = body.querySelector('.katex-html');
    const struts = [...body.querySelectorAll('.katex .strut')];
    return {
      text: body.innerText,
      equations: body.querySelectorAll('.katex').length,
      errors: body.querySelectorAll('.katex-error').length,
      font: k ? getComputedStyle(k.querySelector('.mord') ?? k).fontFamily : '',
      fontsFailed: [...document.fonts].filter((f) => f.status === 'error').map((f) => f.family),
      // KaTeX sizes every box with inline style attributes; if they are not applied (a CSP
      // without inline style attributes), struts collapse to 0 px and formulas are clipped
      flatStruts: struts.filter((s) => /height:/.test(s.getAttribute('style') ?? '') && s.getBoundingClientRect().height < 1).length,
      struts: struts.length,
      // a box that hides its overflow and is more than 8 px shorter than the formula in it
      // (KaTeX's depth struts overhang by 2-4 px as a rule; a clipped fraction loses ~15 px)
      clipped: [...body.querySelectorAll('.katex-display, .katex')].filter((d) => d.scrollHeight > d.clientHeight + 8 && getComputedStyle(d).overflowY !== 'visible').length,
    };
  });
  expect(info.equations >= 2, `the preview shows ${info.equations} typeset equations`);
  expect(info.errors === 0, `the preview has ${info.errors} KaTeX errors`);
  expect(/KaTeX/i.test(info.font), `the equations are not in the KaTeX fonts (font-family: ${info.font}): the stylesheet did not load`);
  expect(info.fontsFailed.length === 0, `KaTeX fonts failed to load: ${info.fontsFailed.join(', ')}`);
  expect(/adjoint flow/i.test(info.text) && /λ/.test(info.text), `the preview does not show the adjoint flow:\n${info.text.slice(0, 600)}`);
  expect(info.flatStruts === 0, `${info.flatStruts} of ${info.struts} KaTeX struts have no height: the webview did not apply KaTeX's inline style attributes (its Content-Security-Policy needs style-src-attr 'unsafe-inline'), so the formulas are garbled`);
  expect(info.clipped === 0, `${info.clipped} typeset formulas are cut off by their box`);
  await ui.page.waitForTimeout(500);
  await ui.screenshot('adjoint-preview');
  return `${info.equations} equations typeset in ${info.font.split(',')[0]}, ${info.struts} struts sized, none clipped, no KaTeX errors`;
}

/** The extension's page (Extensions view) shows its name, icon and README. */
async function checkExtensionPage(t) {
  const { ui } = t;
  await ui.tidy();
  expect(await ui.runCommand('Extensions: Show Installed Extensions'), 'the palette has no "Extensions: Show Installed Extensions"');
  const row = ui.page.locator('.extensions-viewlet .monaco-list-row', { hasText: t.manifest.displayName }).first();
  await row.waitFor({ timeout: 30_000 });
  await row.click();
  const header = ui.page.locator('.extension-editor .header');
  await header.waitFor({ timeout: 30_000 });
  const name = (await header.locator('.name').first().innerText()).trim();
  expect(name.startsWith(t.manifest.displayName), `the page's title is "${name}"`);
  const icon = await header.locator('img.icon').first().evaluate((img) => ({ w: img.naturalWidth, h: img.naturalHeight, src: img.src }));
  expect(icon.w === 128 && icon.h === 128, `the icon did not load as 128x128 (${icon.w}x${icon.h}, ${icon.src})`);
  // the README is a webview of the workbench itself (no extension id on its frame)
  const readme = ui.page.frameLocator('iframe.webview.ready[src*="extensionId=&"]').last().frameLocator('#active-frame');
  const h1 = readme.locator('h1').first();
  await h1.waitFor({ timeout: 30_000 });
  const firstHeading = (await h1.innerText()).trim();
  const wantHeading = /^#\s+(.+)$/m.exec(readFileSync(join(t.extensionDir, 'readme.md'), 'utf8'))?.[1]?.trim();
  expect(firstHeading === wantHeading, `the README's first heading shows as "${firstHeading}", expected "${wantHeading}"`);
  const rendered = await readme.locator('body').evaluate((b) => ({
    text: b.innerText, code: b.querySelectorAll('pre').length, headings: b.querySelectorAll('h2').length,
    images: [...b.querySelectorAll('img')].map((i) => ({ alt: i.alt, src: i.getAttribute('src') ?? '', ok: i.complete && i.naturalWidth > 0 })),
  }));
  const md = readFileSync(join(t.extensionDir, 'readme.md'), 'utf8');
  expect(rendered.headings === (md.match(/^##\s/gm) ?? []).length, `the page shows ${rendered.headings} second-level headings, readme.md has ${(md.match(/^##\s/gm) ?? []).length}`);
  expect(rendered.code >= (md.match(/^```/gm) ?? []).length / 2, `code blocks did not render (${rendered.code} on the page)`);
  expect(!/^\s*(#{1,6}\s|```)/m.test(rendered.text) && !/\]\(/.test(rendered.text), 'raw Markdown shows on the page');
  // VS Code shows README images only from https: URLs; offline they cannot load, and a
  // relative one is dropped (vsce rewrites it only for a GitHub/GitLab repository)
  const remote = rendered.images.filter((i) => /^https:/.test(i.src));
  const dropped = rendered.images.filter((i) => !i.src);
  const broken = rendered.images.filter((i) => i.src && !/^https:/.test(i.src) && !i.ok);
  expect(broken.length === 0, `README images that do not load: ${broken.map((i) => i.src).join(', ')}`);
  const imageNote = rendered.images.length === 0 ? 'no images'
    : `${rendered.images.length} image(s): ${remote.length} https (not loadable offline), ${dropped.length} relative (shown by VS Code only once the repository is on GitHub/GitLab: ${dropped.map((i) => i.alt).join(', ')})`;
  await ui.page.waitForTimeout(500);
  await ui.screenshot('extension-page');
  return `"${name}" with its 128x128 icon; README "${firstHeading}" with ${rendered.headings} sections and ${rendered.code} code blocks rendered; ${imageNote}`;
}


export const CHECKS = [
  { name: 'vscode: error squiggles and Problems entries for the mistakes sample', run: checkProblems },
  { name: 'vscode: a plain LIF file shows no warning in Problems', run: checkPlainLif },
  { name: 'vscode: hover on a parameter shows its unit', run: checkHover },
  { name: 'vscode: quick fix from the light bulb divides by tau_m', run: checkQuickFix },
  { name: 'vscode: "Fix All" applies every fix that needs no choice (source.fixAll.saltus)', run: checkFixAll },
  { name: 'vscode: derived-adjoint preview shows typeset equations', run: checkAdjointPreview },
  { name: 'vscode: "Generate code…" from the palette writes the NumPy files the CLI writes', run: checkGenerateCode },
  { name: 'vscode: the "generate code…" CodeLens writes one model\'s C99 files', run: checkGenerateCodeLens },
  { name: 'vscode: "Cross-check gradients" shows the report webview and the verdict', run: crossCheck },
  { name: 'vscode: the adjoint preview is restored after a window reload', run: checkRestoredPreview },
  { name: 'vscode: scenarios are tests in the test explorer, each gradient row a child', run: checkTestExplorer },
  { name: 'vscode: the saltus: check task fills Problems through the $saltus problem matcher', run: checkCheckTask },
  { name: 'vscode: the getting-started walkthrough shows its steps and pages', run: checkWalkthrough },
  // last: it leaves the Extensions view in the side bar, where the others use the Explorer
  { name: 'vscode: extension page shows the icon and README', run: checkExtensionPage },
];
