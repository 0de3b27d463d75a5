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
    await this.page.keyboard.press('F1');
    const box = this.page.locator('.quick-input-widget input');
    await box.waitFor();
    await box.fill(`>${title}`);
    const row = this.page.locator('.quick-input-list .monaco-list-row', { hasText: title }).first();
    if (!(await row.waitFor({ timeout: 5000 }).then(() => true, () => false))) {
      await this.page.keyboard.press('Escape');
      return false;
    }
    await row.click();
    return true;
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
