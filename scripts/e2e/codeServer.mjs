// Starts real VS Code (code-server, served to a browser) with a .vsix installed, for the
// end-to-end test, and stops it again with everything it started.
// Invariants: every path it writes is under the given scratch folder (config, user data,
// extensions, XDG folders, logs), never $HOME; it listens on 127.0.0.1 only, without auth;
// stop() kills code-server's whole process group (it has children: the extension host,
// the language server) and waits until the group is gone.
import { spawn } from 'node:child_process';
import { mkdirSync, openSync, readdirSync, readFileSync, statSync, writeFileSync, closeSync } from 'node:fs';
import { createServer } from 'node:net';
import { join } from 'node:path';
import { log, mustRun, node24Env, NODE24 } from './tools.mjs';

/** User settings that keep the window quiet and the screenshots about Saltus. */
const USER_SETTINGS = {
  'workbench.startupEditor': 'none',
  'workbench.tips.enabled': false,
  'workbench.welcomePage.walkthroughs.openOnInstall': false,
  'workbench.secondarySideBar.defaultVisibility': 'hidden',
  'workbench.enableExperiments': false,
  'chat.disableAIFeatures': true,
  'chat.commandCenter.enabled': false,
  'security.workspace.trust.enabled': false,
  'extensions.autoCheckUpdates': false,
  'extensions.autoUpdate': false,
  'extensions.ignoreRecommendations': true,
  'telemetry.telemetryLevel': 'off',
  'update.mode': 'none',
  'git.enabled': false,
  'editor.minimap.enabled': false,
  'editor.hover.delay': 200,
  'editor.lightbulb.enabled': 'on',
  'files.autoSave': 'off',
  'window.restoreWindows': 'none',
  // the extension's own setting: LSP messages go to the "Saltus" output channel, whose log
  // file is printed when a check fails
  'saltus.trace.server': 'messages',
};

function freePort() {
  return new Promise((resolvePort, reject) => {
    const srv = createServer();
    srv.on('error', reject);
    srv.listen(0, '127.0.0.1', () => {
      const { port } = srv.address();
      srv.close(() => resolvePort(port));
    });
  });
}

function csEnv(scratch) {
  return node24Env({
    XDG_CONFIG_HOME: join(scratch, 'xdg-config'),
    XDG_DATA_HOME: join(scratch, 'xdg-data'),
    XDG_CACHE_HOME: join(scratch, 'xdg-cache'),
    HOME: join(scratch, 'home'),
  });
}

async function waitForHealth(url, child, timeoutMs) {
  const until = Date.now() + timeoutMs;
  while (Date.now() < until) {
    if (child.exitCode !== null) throw new Error(`code-server exited with ${child.exitCode} before it was ready`);
    try {
      const r = await fetch(`${url}/healthz`, { signal: AbortSignal.timeout(2000) });
      if (r.ok) return;
    } catch { /* not up yet */ }
    await new Promise((r) => setTimeout(r, 250));
  }
  throw new Error(`code-server did not answer ${url}/healthz within ${timeoutMs / 1000} s`);
}

/**
 * Installs `vsix` and serves VS Code on a free port with `workspace` open.
 * @returns {Promise<{ url: string, folderUrl: string, userDataDir: string, logFile: string, stop: () => Promise<void>, extensionLogs: () => string }>}
 */
export async function startCodeServer({ entry, vsix, workspace, scratch }) {
  const userDataDir = join(scratch, 'user-data');
  const extensionsDir = join(scratch, 'extensions');
  for (const d of ['xdg-config', 'xdg-data', 'xdg-cache', 'home', 'user-data/User', 'extensions']) mkdirSync(join(scratch, d), { recursive: true });
  writeFileSync(join(userDataDir, 'User', 'settings.json'), JSON.stringify(USER_SETTINGS, null, 2));
  const port = await freePort();
  const config = join(scratch, 'code-server.yaml');
  writeFileSync(config, `bind-addr: 127.0.0.1:${port}\nauth: none\ncert: false\n`);
  const env = csEnv(scratch);
  const base = ['--config', config, '--user-data-dir', userDataDir, '--extensions-dir', extensionsDir];

  log(`code-server --install-extension ${vsix}`);
  const installed = await mustRun(NODE24, [entry, ...base, '--force', '--install-extension', vsix], { env, timeoutMs: 120_000 });
  if (!/successfully installed/i.test(installed)) throw new Error(`installing the .vsix did not report success:\n${installed.slice(-3000)}`);
  const listed = await mustRun(NODE24, [entry, ...base, '--list-extensions', '--show-versions'], { env, timeoutMs: 60_000 });

  const logFile = join(scratch, 'code-server.log');
  const fd = openSync(logFile, 'w');
  const child = spawn(NODE24, [entry, ...base, '--bind-addr', `127.0.0.1:${port}`, '--auth', 'none', '--disable-telemetry',
    '--disable-update-check', '--disable-workspace-trust', '--disable-getting-started-override', '--ignore-last-opened', workspace],
  { env, detached: true, stdio: ['ignore', fd, fd] });
  closeSync(fd);
  const url = `http://127.0.0.1:${port}`;
  let stopped = false;
  const stop = async () => {
    if (stopped) return;
    stopped = true;
    for (const sig of ['SIGTERM', 'SIGKILL']) {
      try { process.kill(-child.pid, sig); } catch { return; } // the group is gone
      const until = Date.now() + (sig === 'SIGTERM' ? 5000 : 3000);
      while (Date.now() < until) {
        try { process.kill(-child.pid, 0); } catch { return; }
        await new Promise((r) => setTimeout(r, 100));
      }
    }
  };
  process.once('exit', () => { try { process.kill(-child.pid, 'SIGKILL'); } catch { /* gone */ } });
  try {
    await waitForHealth(url, child, 60_000);
  } catch (e) {
    await stop();
    throw new Error(`${e.message}\n--- code-server log ---\n${readFileSync(logFile, 'utf8').slice(-3000)}`);
  }
  log(`code-server ready at ${url} (${listed.trim().split('\n').filter((l) => l.includes('@')).join(', ')})`);
  return {
    url,
    folderUrl: `${url}/?folder=${encodeURIComponent(workspace)}`,
    userDataDir,
    logFile,
    stop,
    extensionLogs: () => collectLogs(join(userDataDir, 'logs')),
  };
}

/** The newest lines of the logs VS Code wrote for the extension host and the Saltus output channel. */
function collectLogs(dir) {
  const files = [];
  const walk = (d) => {
    let names = [];
    try { names = readdirSync(d); } catch { return; }
    for (const n of names) {
      const p = join(d, n);
      if (statSync(p).isDirectory()) walk(p);
      else if (/saltus|exthost|remoteagent/i.test(n) && n.endsWith('.log')) files.push(p);
    }
  };
  walk(dir);
  return files.map((f) => `--- ${f.slice(dir.length + 1)} ---\n${readFileSync(f, 'utf8').split('\n').slice(-40).join('\n')}`).join('\n');
}
