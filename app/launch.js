// `npm start`: builds the app, then opens it in Electron. When Electron's binary is missing (it is
// fetched on first use, not by the npm registry), Electron's own installer
// (node_modules/electron/install.js) runs first; only if that fails does the web shell open
// instead — the same interface in the browser — and the launcher says why.
import { spawn, spawnSync } from 'node:child_process';
import { existsSync, readFileSync } from 'node:fs';
import { dirname, join, resolve } from 'node:path';
import { fileURLToPath, pathToFileURL } from 'node:url';

const here = dirname(fileURLToPath(import.meta.url));
/** The installer downloads about 100 MB; past this it is treated as failed. */
const INSTALL_TIMEOUT_MS = 15 * 60 * 1000;

/** The Electron executable under `root`, or null when it is not installed. */
export function findElectron(root) {
  const pkg = join(root, 'node_modules', 'electron');
  const pathFile = join(pkg, 'path.txt');
  if (!existsSync(pathFile)) return null;
  const exe = join(pkg, 'dist', readFileSync(pathFile, 'utf8').trim());
  return existsSync(exe) ? exe : null;
}

/** Runs an installer script with Node; resolves to null on success or to the reason it failed. */
export function runInstaller(installer, options = {}) {
  if (!existsSync(installer)) return `${installer} is missing (is the electron package installed? run npm ci)`;
  const r = spawnSync(process.execPath, [installer], { cwd: dirname(installer), encoding: 'utf8', timeout: options.timeout ?? INSTALL_TIMEOUT_MS, stdio: ['ignore', 'inherit', 'pipe'] });
  if (r.error) return r.error.code === 'ETIMEDOUT' ? `the installer did not finish within ${Math.round((options.timeout ?? INSTALL_TIMEOUT_MS) / 60000)} minutes` : r.error.message;
  if (r.status === 0) return null;
  // The installer prints a stack; its first line says what went wrong (e.g. getaddrinfo ENOTFOUND github.com).
  const first = (r.stderr ?? '').split('\n').map((l) => l.trim()).find(Boolean);
  return `the installer exited with code ${r.status}${first ? `: ${first}` : ''}`;
}

/**
 * Which shell to open: Electron when its binary exists or its installer provides it, else the web
 * shell with the reason. `install` is the installer runner (replaceable in tests).
 */
export function chooseShell(root, install = (installer) => runInstaller(installer)) {
  const existing = findElectron(root);
  if (existing) return { shell: 'electron', exe: existing, installed: false };
  const failure = install(join(root, 'node_modules', 'electron', 'install.js'));
  const exe = failure === null ? findElectron(root) : null;
  if (exe) return { shell: 'electron', exe, installed: true };
  return { shell: 'web', reason: failure ?? 'the installer finished but no Electron binary appeared in node_modules/electron/dist' };
}

function main() {
  const root = resolve(here, '..');
  const npm = process.platform === 'win32' ? 'npm.cmd' : 'npm';
  const build = spawnSync(npm, ['run', '--silent', 'build'], { cwd: root, stdio: 'inherit' });
  if (build.status !== 0) {
    console.error('plumbline: the build failed; see the messages above.');
    process.exit(build.status ?? 1);
  }
  if (!findElectron(root)) console.log('plumbline: Electron\'s binary is not installed yet; running its installer (node_modules/electron/install.js)…');
  const choice = chooseShell(root);
  let child;
  if (choice.shell === 'electron') child = spawn(choice.exe, [root, ...process.argv.slice(2)], { cwd: root, stdio: 'inherit' });
  else {
    console.log(`plumbline: could not install Electron (${choice.reason}).\nOpening the web shell instead — the same interface, in your browser.`);
    child = spawn(process.execPath, ['--import', 'tsx', join(root, 'app', 'web', 'serve.ts')], { cwd: root, stdio: 'inherit' });
  }
  child.on('exit', (code) => process.exit(code ?? 0));
}

if (process.argv[1] && pathToFileURL(resolve(process.argv[1])).href === import.meta.url) main();
