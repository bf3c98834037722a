// `npm start`: builds the app, then opens it in Electron. Where the Electron binary is missing
// (an offline install cannot download it), it says so and opens the web shell instead.
import { spawn, spawnSync } from 'node:child_process';
import { existsSync, readFileSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';

const root = join(dirname(fileURLToPath(import.meta.url)), '..');
const npm = process.platform === 'win32' ? 'npm.cmd' : 'npm';

function electronBinary() {
  const pkg = join(root, 'node_modules', 'electron');
  const pathFile = join(pkg, 'path.txt');
  if (!existsSync(pathFile)) return null;
  const exe = join(pkg, 'dist', readFileSync(pathFile, 'utf8').trim());
  return existsSync(exe) ? exe : null;
}

const build = spawnSync(npm, ['run', '--silent', 'build'], { cwd: root, stdio: 'inherit' });
if (build.status !== 0) {
  console.error('plumbline: the build failed; see the messages above.');
  process.exit(build.status ?? 1);
}

const exe = electronBinary();
const child = exe
  ? spawn(exe, [root, ...process.argv.slice(2)], { cwd: root, stdio: 'inherit' })
  : (console.log(
      'plumbline: the Electron binary is not installed (node_modules/electron has no dist/; its download\n' +
        'needs internet access beyond the npm registry). Opening the web shell instead — same interface,\n' +
        'in your browser. To get the desktop app, run `npx electron --version` once with internet access.',
    ),
    spawn(process.execPath, ['--import', 'tsx', join(root, 'app', 'web', 'serve.ts')], { cwd: root, stdio: 'inherit' }));
child.on('exit', (code) => process.exit(code ?? 0));
