// Drives the real VS Code workbench (code-server in headless Chromium, through
// playwright-core) the way a person does: clicks in the Explorer, keys, the mouse over
// exact characters, the light bulb, the command palette. The checks in vscode.e2e.mjs use
// only these helpers, so each check reads as a list of user actions.
// Invariants: every wait has a timeout; lines and columns are 1-based as VS Code shows
// them; text read from the editor is the document's: Monaco's non-breaking spaces turned
// back into spaces, inlay hints (injected text, class dyn-rule-*) left out.
import { mkdirSync } from 'node:fs';
import { join } from 'node:path';

const WAIT = 20_000;

export class VscodeUi {
  /** @param {import('playwright-core').Page} page */
  constructor(page, { screenshotsDir }) {
    this.page = page;
    this.screenshotsDir = screenshotsDir;
    page.setDefaultTimeout(WAIT);
  }

  async open(url) {
    await this.page.goto(url, { timeout: 60_000 });
    await this.page.waitForSelector('.monaco-workbench', { timeout: 60_000 });
    await this.page.waitForSelector('.explorer-folders-view .monaco-list-row', { timeout: 60_000 });
  }

  async screenshot(name) {
    mkdirSync(this.screenshotsDir, { recursive: true });
    const file = join(this.screenshotsDir, `${name}.png`);
    await this.page.screenshot({ path: file });
    return file;
  }

  /** Clicks the file's row in the Explorer and waits until its editor is the active one. */
  async openFile(name) {
    await this.page.locator('.explorer-folders-view .monaco-list-row', { hasText: name }).first().click();
    await this.page.locator('.tabs-container .tab.active', { hasText: name }).waitFor();
    await this.page.locator('.editor-group-container.active .monaco-editor .view-lines').first().waitFor();
    await this.page.waitForTimeout(300);
  }

  get editor() {
    return this.page.locator('.editor-group-container.active .monaco-editor').first();
  }

  /** Puts the caret at line:column with Go to Line (Ctrl+G), which also scrolls it into view. */
  async goTo(line, column = 1) {
    await this.page.keyboard.press('Control+G');
    const box = this.page.locator('.quick-input-widget input');
    await box.waitFor();
    await box.fill(`:${line}:${column}`);
    await this.page.keyboard.press('Enter');
    await this.page.locator('.quick-input-widget').waitFor({ state: 'hidden' });
    await this.page.waitForTimeout(200);
  }

  /** Visible editor lines as { line, top, text }, from the line-number gutter and the view lines. */
  async visibleLines() {
    return this.editor.evaluate((ed) => {
      const topOf = (el) => Math.round(parseFloat(el.style.top || el.parentElement?.style.top || 'NaN'));
      const numbers = new Map();
      for (const n of ed.querySelectorAll('.margin-view-overlays .line-numbers')) {
        const top = topOf(n.closest('.margin-view-overlays > div') ?? n);
        const num = Number(n.textContent.trim());
        if (Number.isFinite(top) && Number.isInteger(num) && num > 0) numbers.set(top, num);
      }
      const lines = [];
      for (const v of ed.querySelectorAll('.view-lines .view-line')) {
        const top = topOf(v);
        if (!numbers.has(top)) continue;
        const copy = v.cloneNode(true);
        for (const injected of copy.querySelectorAll('[class*="dyn-rule"]')) injected.remove(); // inlay hints
        lines.push({ line: numbers.get(top), top, text: copy.textContent.replace(/\u00a0/g, ' ') });
      }
      return lines.sort((a, b) => a.line - b.line);
    });
  }

  async lineText(line) {
    const found = (await this.visibleLines()).find((l) => l.line === line);
    if (!found) throw new Error(`line ${line} is not on screen`);
    return found.text;
  }

  /** Lines that carry a squiggle of the given kind (error, warning, info, hint). */
  async squiggleLines(kind = 'error') {
    const lines = await this.visibleLines();
    const tops = await this.editor.evaluate((ed, k) => [...ed.querySelectorAll(`.view-overlays .squiggly-${k}`)]
      .map((s) => Math.round(parseFloat(s.closest('.view-overlays > div')?.style.top ?? 'NaN'))), kind);
    return [...new Set(tops.map((t) => lines.find((l) => l.top === t)?.line).filter((n) => n !== undefined))].sort((a, b) => a - b);
  }

  /** Opens the Problems panel (Ctrl+Shift+M) and returns its rows' accessible labels. */
  async problems() {
    if (!(await this.page.locator('.markers-panel').isVisible().catch(() => false))) {
      await this.page.keyboard.press('Control+Shift+M');
    }
    await this.page.locator('.markers-panel .monaco-list-row').first().waitFor();
    await this.page.waitForTimeout(300);
    return this.page.locator('.markers-panel .monaco-list-row').evaluateAll((rows) => rows.map((r) => ({
      label: r.getAttribute('aria-label') ?? '', text: r.innerText.replace(/\s+/g, ' ').trim(),
    })));
  }

  /** Screen box of the first occurrence of `text` on the given editor line. */
  async textBox(line, text) {
    const { top } = (await this.visibleLines()).find((l) => l.line === line) ?? {};
    if (top === undefined) throw new Error(`line ${line} is not on screen`);
    const box = await this.editor.evaluate((ed, { top: t, text: needle }) => {
      const view = [...ed.querySelectorAll('.view-lines .view-line')].find((v) => Math.round(parseFloat(v.style.top)) === t);
      if (!view) return null;
      const walker = document.createTreeWalker(view, NodeFilter.SHOW_TEXT);
      let acc = '';
      const nodes = [];
      for (let n = walker.nextNode(); n; n = walker.nextNode()) {
        if (n.parentElement?.closest('[class*="dyn-rule"]')) continue; // an inlay hint, not text
        nodes.push({ n, start: acc.length });
        acc += n.textContent;
      }
      const at = acc.replace(/\u00a0/g, ' ').indexOf(needle);
      if (at < 0) return null;
      const range = document.createRange();
      const locate = (offset) => {
        const hit = nodes.findLast((x) => x.start <= offset) ?? nodes[0];
        return [hit.n, Math.min(offset - hit.start, hit.n.textContent.length)];
      };
      range.setStart(...locate(at));
      range.setEnd(...locate(at + needle.length));
      const r = range.getBoundingClientRect();
      return { x: r.x, y: r.y, width: r.width, height: r.height };
    }, { top, text });
    if (!box) throw new Error(`"${text}" is not on line ${line}`);
    return box;
  }

  /** Moves the mouse onto `text` on `line` in small steps and returns the hover's text. */
  async hover(line, text) {
    const b = await this.textBox(line, text);
    await this.page.mouse.move(b.x - 40, b.y + b.height * 3, { steps: 2 });
    await this.page.mouse.move(b.x + b.width / 2, b.y + b.height / 2, { steps: 6 });
    const hover = this.page.locator('.monaco-hover:visible .monaco-hover-content, .monaco-hover:visible .hover-contents').first();
    await hover.waitFor({ timeout: WAIT });
    await this.page.waitForTimeout(300);
    return (await hover.innerText()).trim();
  }

  /** Waits for the light bulb at the caret, clicks it and returns the menu's entries. */
  async openLightBulb() {
    const bulb = this.page.locator('.lightBulbWidget:visible').first();
    await bulb.waitFor({ timeout: WAIT });
    await bulb.click();
    const menu = this.page.locator('.action-widget:visible');
    await menu.waitFor();
    await this.page.waitForTimeout(200);
    return menu.locator('.monaco-list-row').evaluateAll((rows) => rows.map((r) => r.innerText.trim()).filter(Boolean));
  }

  async chooseAction(title) {
    await this.page.locator('.action-widget:visible .monaco-list-row', { hasText: title }).first().click();
    await this.page.locator('.action-widget').waitFor({ state: 'hidden' }).catch(() => {});
  }

  /** Runs a command by its palette title; returns false when the palette does not list it. */
  async runCommand(title) {
    const box = this.page.locator('.quick-input-widget input');
    // The command box can open inert while a webview holds the focus (seen once after the
    // cross-check report opened): then close it, focus the first editor group and try again.
    for (let attempt = 0; ; attempt++) {
      await this.page.keyboard.press('F1');
      await box.waitFor();
      const filled = await box.fill(`>${title}`, { timeout: attempt === 0 ? 8000 : 20000 }).then(() => true, (e) => (attempt === 0 ? false : Promise.reject(e)));
      if (filled) break;
      await this.page.keyboard.press('Escape');
      await this.page.keyboard.press('Escape');
      await this.page.keyboard.press('Control+1');
      await this.page.waitForTimeout(500);
    }
    const row = this.page.locator('.quick-input-list .monaco-list-row', { hasText: title }).first();
    if (!(await row.waitFor({ timeout: 5000 }).then(() => true, () => false))) {
      await this.page.keyboard.press('Escape');
      return false;
    }
    await row.click();
    return true;
  }

  /**
   * Waits for a quick pick, then clicks the item whose label is `label`.
   * @returns {Promise<{ title: string, labels: string[] }>} what the pick offered
   */
  async pick(label) {
    const widget = this.page.locator('.quick-input-widget');
    const read = () => widget.evaluate((w) => ({
      title: w.querySelector('.quick-input-title')?.textContent?.trim() ?? '',
      labels: [...w.querySelectorAll('.quick-input-list .monaco-list-row .label-name')].map((l) => l.textContent.trim()),
    }));
    // the command palette that ran the command may still show for a moment: wait for the pick
    let offered = { title: '', labels: [] };
    for (const until = Date.now() + WAIT; Date.now() < until; await this.page.waitForTimeout(100)) {
      offered = (await widget.isVisible()) ? await read() : offered;
      if (offered.labels.includes(label)) break;
    }
    const at = offered.labels.indexOf(label);
    if (at < 0) throw new Error(`the quick pick "${offered.title}" offers ${JSON.stringify(offered.labels)}, not "${label}"`);
    await this.page.waitForTimeout(150);
    await widget.locator('.quick-input-list .monaco-list-row').nth(at).click();
    return offered;
  }

  /**
   * In VS Code's own (simple) file dialog, types the path of an existing folder, waits until
   * the dialog lists that folder's contents, and presses the dialog's OK button.
   * @returns {Promise<{ title: string, okLabel: string }>}
   */
  async chooseFolder(dir, { empty = false } = {}) {
    const widget = this.page.locator('.quick-input-widget');
    const box = widget.locator('input').first();
    const names = () => widget.locator('.quick-input-list .monaco-list-row .label-name').evaluateAll((r) => r.map((x) => x.textContent.trim()));
    // the dialog sets the input to its start folder once it has listed it; typing before
    // that is overwritten, so wait for the list, and type again if the value was replaced
    await box.waitFor();
    for (const until = Date.now() + WAIT; !(await box.inputValue()).startsWith('/');) {
      if (Date.now() > until) throw new Error(`no folder dialog (the input shows "${await box.inputValue()}")`);
      await this.page.waitForTimeout(100);
    }
    await widget.locator('.quick-input-list .monaco-list-row').first().waitFor();
    const title = ((await widget.locator('.quick-input-title').textContent()) ?? '').trim();
    const typed = `${dir.replace(/\/+$/, '')}/`;
    let value = '', listed = [];
    for (let attempt = 1, ready = false; !ready; attempt++) {
      if (attempt > 4) throw new Error(`the folder dialog shows "${value}" listing ${JSON.stringify(listed)} after typing ${typed} ${attempt - 1} times`);
      await box.fill(typed);
      for (let i = 0, stable = 0; i < 30; i++) {
        await this.page.waitForTimeout(100);
        value = await box.inputValue();
        listed = await names();
        if (value !== typed) break;
        // an empty folder lists only ".." once the dialog has read it
        stable = empty ? (listed.length === 1 && listed[0] === '..' ? 3 : 0) : stable + 1;
        if (stable >= 3) { ready = true; break; }
      }
    }
    const ok = widget.locator('.quick-input-action .monaco-button, .quick-input-header .monaco-button').first();
    const okLabel = ((await ok.textContent()) ?? '').trim();
    await ok.click();
    await widget.waitFor({ state: 'hidden' });
    return { title, okLabel };
  }

  /** Waits for a notification toast whose message matches `pattern` (string: contained, case-insensitive); returns the message. */
  async notification(pattern, timeout = WAIT) {
    const toast = this.page.locator('.notifications-toasts .notification-toast', { has: this.page.locator('.notification-list-item-message', { hasText: pattern }) }).first();
    await toast.waitFor({ timeout });
    return (await toast.locator('.notification-list-item-message').first().innerText()).replace(/\s+/g, ' ').trim();
  }

  /** Starts recording every notification toast that appears, including ones shown only briefly (a short progress). */
  async recordToasts() {
    await this.page.evaluate(() => {
      const seen = (window.__e2eToasts = []);
      const take = () => {
        for (const t of document.querySelectorAll('.notifications-toasts .notification-toast')) {
          const message = t.querySelector('.notification-list-item-message')?.textContent?.replace(/\s+/g, ' ').trim() ?? '';
          const buttons = [...t.querySelectorAll('.notification-list-item-buttons-container .monaco-button')].map((b) => b.textContent.trim()).filter(Boolean);
          const progress = !!t.querySelector('.monaco-progress-container.active, .monaco-progress-container.infinite, .monaco-progress-container.discrete');
          if (message && !seen.some((x) => x.message === message && x.buttons.join() === buttons.join())) seen.push({ message, buttons, progress });
        }
      };
      window.__e2eToastObserver?.disconnect();
      window.__e2eToastObserver = new MutationObserver(take);
      window.__e2eToastObserver.observe(document.body, { subtree: true, childList: true, characterData: true, attributes: true });
    });
  }

  /** The toasts seen since recordToasts(), as { message, buttons, progress } (progress: a progress bar showed). */
  async recordedToasts() {
    return this.page.evaluate(() => { window.__e2eToastObserver?.disconnect(); return window.__e2eToasts ?? []; });
  }

  /** Clicks the CodeLens command `title` shown above editor line `line`; returns all the lens titles on that line. */
  async clickCodeLens(line, title) {
    const { top } = (await this.visibleLines()).find((l) => l.line === line) ?? {};
    if (top === undefined) throw new Error(`line ${line} is not on screen`);
    await this.editor.locator('.codelens-decoration a').first().waitFor();
    const lens = await this.editor.evaluate((ed, lineTop) => {
      const tops = [...ed.querySelectorAll('.codelens-decoration')].map((d) => ({ d, top: parseFloat(d.style.top || d.parentElement?.style.top || 'NaN') }))
        .filter((x) => x.top < lineTop).sort((a, b) => b.top - a.top);
      if (!tops.length) return null;
      const d = tops[0].d;
      d.setAttribute('data-e2e-lens', 'here');
      return [...d.querySelectorAll('a')].map((a) => a.textContent.trim());
    }, top);
    if (!lens) throw new Error(`no CodeLens above line ${line}`);
    const at = lens.indexOf(title);
    if (at < 0) throw new Error(`the CodeLens above line ${line} offers ${JSON.stringify(lens)}, not "${title}"`);
    await this.editor.locator('.codelens-decoration[data-e2e-lens="here"] a').nth(at).click();
    return lens;
  }

  /** Closes every editor and the panel, for a screenshot of one thing. Dirty files must be reverted first. */
  async tidy() {
    await this.runCommand('View: Close All Editors');
    await this.page.waitForTimeout(300);
    if (await this.page.locator('.part.panel').isVisible().catch(() => false)) await this.page.keyboard.press('Control+J');
    await this.page.waitForTimeout(300);
  }

  /** What the window shows, in words, for a failure report. */
  async describe() {
    return this.page.evaluate(() => {
      const text = (sel, n = 1200) => [...document.querySelectorAll(sel)].map((e) => e.innerText.trim()).filter(Boolean).join(' | ').slice(0, n);
      return [
        `title: ${document.title}`,
        `tabs: ${text('.tabs-container .tab', 300)}`,
        `notifications: ${text('.notifications-toasts .notification-toast, .notification-list-item', 800)}`,
        `editor: ${text('.editor-group-container.active .view-lines', 1200)}`,
        `hover: ${text('.monaco-hover', 400)}`,
        `panel: ${text('.part.panel .content', 1200)}`,
        `status bar: ${text('.part.statusbar', 400)}`,
      ].join('\n');
    });
  }
}
