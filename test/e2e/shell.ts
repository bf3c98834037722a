// Starts the web shell as a child process for a test file and returns its URL.
import { spawn, type ChildProcess } from 'node:child_process';
import { join } from 'node:path';

const root = join(import.meta.dirname, '..', '..');

export async function startShell(env: Record<string, string> = {}): Promise<{ url: string; stop: () => void; origin: string; token: string }> {
  const child: ChildProcess = spawn(process.execPath, ['--import', 'tsx', join(root, 'app', 'web', 'serve.ts')], {
    cwd: root,
    env: { ...process.env, PLUMBLINE_THREADS: '1', ...env },
    stdio: ['ignore', 'pipe', 'inherit'],
  });
  const url = await new Promise<string>((ok, fail) => {
    let out = '';
    const t = setTimeout(() => fail(new Error(`web shell did not print its URL: ${out}`)), 30000);
    child.stdout!.on('data', (c) => {
      out += c;
      const m = /http:\/\/127\.0\.0\.1:\d+\/\?token=[0-9a-f]+/.exec(out);
      if (m) {
        clearTimeout(t);
        ok(m[0]);
      }
    });
    child.once('exit', (code) => fail(new Error(`web shell exited with ${code}: ${out}`)));
  });
  const u = new URL(url);
  return { url, origin: u.origin, token: u.searchParams.get('token')!, stop: () => child.kill('SIGTERM') };
}
