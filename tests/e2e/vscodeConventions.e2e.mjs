// End-to-end checks of the editor conventions in real VS Code (listed in CHECKS of
// vscode.e2e.mjs): "Fix All" (source.fixAll.saltus), the getting-started walkthrough, the
// adjoint preview restored after a window reload, the scenarios as tests in the test
// explorer, and the `saltus: check` task whose problem matcher fills the Problems panel.
// Oracles, independent of the UI under test: the installed extension's package.json (the
// walkthrough's steps), the packaged CLI of the same build (`saltus check --format json` for
// the task's problems, `saltus crosscheck --format json` for the rows and verdict of each
// scenario), and the workspace's own files (which scenarios have a model beside them).
// Invariants: each check opens what it needs itself and leaves the editors closed; the
// screenshots go to the run's screenshot folder like every other check's.
import { existsSync, readdirSync } from 'node:fs';
import { join } from 'node:path';
import { expect, lineOf, Skip } from './checkKit.mjs';

const frameOf = (t) => `iframe.webview.ready[src*="extensionId=${t.manifest.publisher}.${t.manifest.name}"]`;

/** "Fix All" on the mistakes sample applies each fix that needs no choice; the error without a fix stays. */
export async function checkFixAll(t) {
  const { ui } = t;
  const file = 'mistakes.saltus';
  const text = t.sample(file);
  const cli = t.cliDiagnostics(file).filter((d) => d.severity === 'error');
  const unfixable = cli.filter((d) => d.code === 'dimensioned-argument');
  expect(unfixable.length === 1, `the CLI reports ${unfixable.length} dimensioned-argument errors in ${file}`);
  await ui.tidy();
  await ui.openFile(file);
  await ui.page.locator('.editor-group-container.active .squiggly-error').first().waitFor({ timeout: 30_000 });
  const flow = lineOf(text, 'dV/dt = I - V'), typo = lineOf(text, 'dI/dt = -I / tau_sn'), jump = lineOf(text, 'v := 0');
  await ui.goTo(flow, 1);
  expect(await ui.runCommand('Fix All'), 'the palette has no "Fix All"');
  // the duplicate's line goes away, so look the lines up by their new text
  let shown = [];
  for (const until = Date.now() + 15_000; Date.now() < until; await ui.page.waitForTimeout(200)) {
    shown = (await ui.visibleLines()).map((l) => l.text.trim());
    if (shown.includes('dI/dt = -I / tau_s')) break;
  }
  for (const want of ['dV/dt = (I - V) / tau_m', 'dI/dt = -I / tau_s', 'V := 0']) expect(shown.includes(want), `after Fix All no line reads "${want}":\n${shown.join('\n')}`);
  expect(!shown.some((l) => l.startsWith('param tau_m = 10')), 'the second declaration of tau_m is still there');
  let errors = [];
  for (const until = Date.now() + 15_000; Date.now() < until; await ui.page.waitForTimeout(250)) {
    errors = (await ui.problems()).filter((r) => r.label.startsWith('Error: '));
    if (errors.length === 1) break;
  }
  expect(errors.length === 1 && errors[0].label.includes(unfixable[0].message), `after Fix All Problems lists ${JSON.stringify(errors.map((e) => e.label))}; only the exp error (no fix) should remain`);
  await ui.runCommand('File: Revert File');
  return `Fix All changed lines ${flow}, ${typo}, ${jump} and removed the duplicate; 1 error left ("${unfixable[0].message.slice(0, 60)}…"), as the CLI has no fix for it`;
}

/** Waits for a quick pick row that contains `text`, clicks it, and returns the row's text. */
async function pickRow(ui, text) {
  const row = ui.page.locator('.quick-input-widget .quick-input-list .monaco-list-row', { hasText: text }).first();
  await row.waitFor({ timeout: 20_000 });
  const shown = (await row.innerText()).replace(/\s+/g, ' ').trim();
  await ui.page.waitForTimeout(150);
  await row.click();
  return shown;
}

/** "Welcome: Open Walkthrough…" lists ours; its page shows every step, the picture and a step's page. */
export async function checkWalkthrough(t) {
  const { ui } = t;
  const w = t.manifest.contributes?.walkthroughs?.[0];
  if (!w) throw new Skip('the extension contributes no walkthrough yet');
  await ui.tidy();
  // the walkthrough shows its pictures beside the steps only in a wide editor: hide the side bar
  const sideBarHidden = await ui.runCommand('View: Close Primary Side Bar');
  expect(await ui.runCommand('Welcome: Open Walkthrough'), 'the palette has no "Welcome: Open Walkthrough..."');
  const offered = await pickRow(ui, w.title);
  const page = ui.page.locator('.gettingStartedContainer');
  await page.waitFor({ timeout: 30_000 });
  const stepTitles = ui.page.locator('.gettingStartedContainer .getting-started-step .step-title');
  await stepTitles.first().waitFor({ timeout: 30_000 });
  const shown = (await stepTitles.allInnerTexts()).map((s) => s.trim()).filter(Boolean);
  const want = w.steps.map((s) => s.title);
  expect(JSON.stringify(shown) === JSON.stringify(want), `the walkthrough shows the steps ${JSON.stringify(shown)}, the manifest has ${JSON.stringify(want)}`);
  const headings = (await page.locator(':is(h1, h2, h3, .category-title):visible').allInnerTexts()).map((x) => x.replace(/\s+/g, ' ').trim());
  const heading = headings.find((x) => x === w.title);
  expect(heading, `no heading of the walkthrough reads "${w.title}": ${JSON.stringify(headings)}`);
  // the first step's picture (an SVG of our own, drawn in the theme's colours)
  const media = page.locator('.getting-started-media:visible');
  await media.first().waitFor({ timeout: 20_000 });
  const mediaInfo = await media.first().evaluate((m) => ({
    html: m.innerHTML.slice(0, 400), boxes: [...m.querySelectorAll('img, iframe, svg')].map((e) => { const r = e.getBoundingClientRect(); return { tag: e.tagName, w: r.width, h: r.height }; }),
  }));
  expect(mediaInfo.boxes.some((b) => b.w > 100 && b.h > 50), `the first step's picture has no size: ${JSON.stringify(mediaInfo)}`);
  await ui.page.waitForTimeout(800);
  await ui.screenshot('walkthrough');
  // a step with a Markdown page: its text is ours
  const checks = w.steps.findIndex((s) => s.id === 'checks');
  expect(checks >= 0, 'the walkthrough has no "checks" step');
  await ui.page.locator('.gettingStartedContainer .getting-started-step').nth(checks).click();
  let text = '';
  for (const until = Date.now() + 20_000; Date.now() < until && !/⇒ \[mV\/ms\]/.test(text);) {
    await ui.page.waitForTimeout(300);
    for (const f of ui.page.frames()) {
      try { text = await f.evaluate(() => document.body?.innerText ?? ''); } catch { continue; }
      if (/⇒ \[mV\/ms\]/.test(text)) break;
    }
  }
  expect(/⇒ \[mV\/ms\]/.test(text) && /source\.fixAll\.saltus/.test(text), `the "checks" step's page does not show its Markdown (seen: ${text.slice(0, 300)})`);
  await ui.screenshot('walkthrough-checks');
  await ui.runCommand('View: Close All Editors');
  if (sideBarHidden) await ui.runCommand('View: Show Explorer');
  return `picked "${offered}" -> "${heading}": ${shown.length} steps as in the manifest; picture ${JSON.stringify(mediaInfo.boxes[0])}; the "checks" page shows its Markdown`;
}

/** The preview comes back after a window reload, even with the model's editor closed, and still shows the equations. */
export async function checkRestoredPreview(t) {
  const { ui } = t;
  const file = 'lif_current.saltus';
  await ui.tidy();
  await ui.openFile(file);
  expect(await ui.runCommand('Saltus: Show derived adjoint'), 'the palette has no "Saltus: Show derived adjoint"');
  const tab = ui.page.locator('.tabs-container .tab', { hasText: `Adjoint · ${file}` });
  await tab.first().waitFor({ timeout: 30_000 });
  const equations = async () => {
    await ui.page.locator(frameOf(t)).last().waitFor({ timeout: 30_000 });
    const inner = ui.page.frameLocator(frameOf(t)).last().frameLocator('#active-frame');
    await inner.locator('.katex').first().waitFor({ timeout: 30_000 });
    return inner.locator('body').evaluate((b) => ({ count: b.querySelectorAll('.katex').length, text: b.innerText.slice(0, 2000) }));
  };
  const before = await equations();
  // close the model's own editor: only the preview stays, so restoring must open the model itself
  await ui.page.locator('.tabs-container .tab', { hasText: file }).filter({ hasNotText: 'Adjoint' }).first().click();
  expect(await ui.runCommand('View: Close Editor'), 'the palette has no "View: Close Editor"');
  const tabsBefore = (await ui.page.locator('.tabs-container .tab').allInnerTexts()).map((s) => s.trim());
  expect(tabsBefore.length === 1 && tabsBefore[0].includes('Adjoint'), `after closing the model the tabs are ${JSON.stringify(tabsBefore)}`);
  // VS Code's own reload: the workbench stores its state (open editors, the extension's
  // workspace state) as it shuts the window down, then starts again
  expect(await ui.runCommand('Developer: Reload Window'), 'the palette has no "Developer: Reload Window"');
  await ui.page.waitForTimeout(2000);
  await ui.page.waitForSelector('.monaco-workbench', { timeout: 60_000 });
  await tab.first().waitFor({ timeout: 60_000 });
  const after = await equations();
  const tabsAfter = (await ui.page.locator('.tabs-container .tab').allInnerTexts()).map((s) => s.trim());
  expect(after.count === before.count, `the restored preview shows ${after.count} equations, ${before.count} before the reload:\n${after.text.slice(0, 400)}`);
  expect(tabsAfter.length === 1, `after the reload the tabs are ${JSON.stringify(tabsAfter)}; only the preview was open before it`);
  expect(/adjoint flow/i.test(after.text) && /λ/.test(after.text), `the restored preview does not show the adjoint:\n${after.text.slice(0, 400)}`);
  await ui.page.waitForTimeout(500);
  await ui.screenshot('restored-preview');
  await ui.page.waitForSelector('.explorer-folders-view .monaco-list-row', { timeout: 60_000 });
  await ui.runCommand('View: Close All Editors');
  return `tab "${tabsAfter.join(' | ')}" restored by "Developer: Reload Window" with ${after.count} typeset equations (as before), the model's own editor closed before and after`;
}

/** Rows of the test explorer as { label, depth, state } (state from the row's icon). */
async function testRows(ui) {
  return ui.page.locator('.test-explorer .monaco-list-row').evaluateAll((rows) => rows.map((r) => {
    const icon = r.querySelector('.computed-state');
    const cls = icon ? [...icon.classList].find((c) => c.startsWith('codicon-testing-')) ?? '' : '';
    // the label's own text, without its description (a child span)
    const labelEl = r.querySelector('.label');
    const label = labelEl ? [...labelEl.childNodes].filter((n) => n.nodeType === Node.TEXT_NODE).map((n) => n.textContent).join('').trim() : '';
    return { label, description: r.querySelector('.test-label-description')?.textContent?.trim() ?? '', depth: Number(r.getAttribute('aria-level') ?? 0),
      state: cls.replace('codicon-testing-', '').replace('-icon', ''), expanded: r.getAttribute('aria-expanded'), html: r.outerHTML.slice(0, 1500) };
  }));
}

/** The scenarios as tests: one item per scenario with its model, rows after running, all passed as the CLI says. */
export async function checkTestExplorer(t) {
  const { ui } = t;
  const scenariosDir = join(t.workspace, 'scenarios');
  const scenarios = readdirSync(scenariosDir).filter((f) => f.endsWith('.json') && existsSync(join(t.workspace, f.replace(/\.json$/, '.saltus')))).sort();
  expect(scenarios.length > 0, 'the workspace has no scenario beside a model');
  const pick = 'lif_current.json';
  const cli = t.runCli(['crosscheck', 'lif_current.saltus', '--scenario', `scenarios/${pick}`, '--format', 'json']);
  const want = JSON.parse(cli.stdout);
  const wantRows = want.gradients.length + want.params.length;

  await ui.tidy();
  let opened = false;
  for (const title of ['Testing: Focus on Test Explorer View', 'View: Show Testing']) if ((opened = await ui.runCommand(title))) break;
  expect(opened, 'the palette opens no Testing view');
  const rowLoc = ui.page.locator('.test-explorer .monaco-list-row');
  await rowLoc.filter({ hasText: pick }).first().waitFor({ timeout: 30_000 });
  let rows = await testRows(ui);
  const items = rows.filter((r) => r.label.endsWith('.json')).map((r) => r.label).sort();
  expect(JSON.stringify(items) === JSON.stringify(scenarios), `the test explorer lists ${JSON.stringify(items)}; the workspace has ${JSON.stringify(scenarios)} beside their models; first row: ${rows[0]?.html}`);
  // run one scenario from its row's own run button
  const row = rowLoc.filter({ hasText: pick }).first();
  await row.hover();
  const run = row.locator('.action-label.codicon-testing-run-icon, .codicon-testing-run-icon').first();
  await run.click();
  for (const until = Date.now() + 60_000; Date.now() < until; await ui.page.waitForTimeout(300)) {
    rows = await testRows(ui);
    const r = rows.find((x) => x.label === pick);
    if (r && /passed|failed|error/.test(r.state)) break;
  }
  let item = rows.find((x) => x.label === pick);
  expect(item && item.state === 'passed', `${pick} shows "${item?.state}" after its run; the CLI says passed=${want.passed}`);
  // expand the scenario (a click on its twistie) until its rows show
  let at = -1;
  const children = [];
  for (let attempt = 0; attempt < 10; attempt++) {
    rows = await testRows(ui);
    at = rows.findIndex((x) => x.label === pick);
    children.length = 0;
    for (let i = at + 1; i < rows.length && rows[i].depth > rows[at].depth; i++) children.push(rows[i]);
    if (children.length > 0) break;
    if (rows[at]?.expanded !== 'true') await rowLoc.filter({ hasText: pick }).first().locator('.monaco-tl-twistie').click();
    await ui.page.waitForTimeout(500);
  }
  expect(children.length === wantRows, `${pick} has ${children.length} rows in the test explorer; the CLI compares ${wantRows}: ${JSON.stringify(children.map((c) => c.label))}`);
  const cliLabels = [...want.gradients.map((g) => `w${g.projection} ${g.fromPopulation}[${g.from}] -> ${g.toPopulation}[${g.to}]`), ...want.params.map((p) => `${p.population}.${p.name}`)];
  expect(JSON.stringify(children.map((c) => c.label)) === JSON.stringify(cliLabels), `the rows are ${JSON.stringify(children.map((c) => c.label))}, the CLI's ${JSON.stringify(cliLabels)}`);
  expect(children.every((c) => c.state === 'passed'), `not every row passed: ${JSON.stringify(children.map((c) => [c.label, c.state]))}`);
  item = rows[at];
  await ui.page.mouse.move(900, 300);
  await ui.page.waitForTimeout(400);
  await ui.screenshot('test-explorer');
  await ui.runCommand('View: Close All Editors');
  for (const title of ['View: Show Explorer', 'File: Focus on Files Explorer']) if (await ui.runCommand(title)) break;
  return `${items.length} scenarios listed (${items.join(', ')}); ${pick} passed with ${children.length} rows, each passed, labels as the CLI's`;
}

/** Tasks: Run Task -> saltus: check fills the Problems panel through $saltus, as the CLI reports. */
export async function checkCheckTask(t) {
  const { ui } = t;
  if (!t.manifest.contributes?.taskDefinitions?.some((d) => d.type === 'saltus')) throw new Skip('the extension contributes no saltus task yet');
  const files = readdirSync(t.workspace).filter((f) => f.endsWith('.saltus')).sort();
  const cli = files.flatMap((f) => t.cliDiagnostics(f).map((d) => ({ file: f, ...d })));
  const errors = cli.filter((d) => d.severity === 'error');
  expect(errors.length > 0, 'the CLI finds no error in the workspace (mistakes.saltus has some on purpose)');

  await ui.tidy(); // every .saltus editor closed: the language server's own problems are cleared
  expect(await ui.runCommand('Tasks: Run Task'), 'the palette has no "Tasks: Run Task"');
  const first = await ui.pick('saltus');
  const second = await ui.pick('saltus: check').catch(async (e) => {
    // a VS Code that lists the task directly in the first pick
    if (first.labels.includes('saltus: check')) return first;
    throw e;
  });
  const wants = errors.map((d) => `Error: ${d.message} at line ${d.range.start.line + 1} and character ${d.range.start.character + 1}`);
  let rows = [], missing = wants;
  for (const until = Date.now() + 45_000; Date.now() < until; await ui.page.waitForTimeout(400)) {
    rows = await ui.problems().catch(() => []);
    missing = wants.filter((w) => !rows.some((r) => r.label.startsWith(w) && /saltus check/.test(r.text)));
    if (missing.length === 0) break;
  }
  expect(missing.length === 0, `Problems has no task entry "${missing[0]}"; it shows:\n  ${rows.map((r) => `${r.label} [${r.text}]`).join('\n  ')}`);
  const fromTask = rows.filter((r) => /saltus check/.test(r.text) && /^(Error|Warning|Info)/.test(r.label));
  expect(fromTask.filter((r) => r.label.startsWith('Error: ')).length === errors.length, `the task put ${fromTask.filter((r) => r.label.startsWith('Error: ')).length} errors in Problems; the CLI reports ${errors.length}`);
  await ui.page.waitForTimeout(500);
  await ui.screenshot('check-task');
  if (await ui.page.locator('.part.panel').isVisible().catch(() => false)) await ui.page.keyboard.press('Control+J');
  return `picks [${first.labels.slice(0, 6).join(', ')}] -> "${second === first ? 'saltus: check' : second.labels.find((l) => l === 'saltus: check')}"; ${fromTask.length} problems from the task (${errors.length} errors, as the CLI reports, at the same lines and columns)`;
}
