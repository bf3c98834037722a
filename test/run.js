// The whole test suite, in tiers that run on a plain CPU machine:
//   typecheck → build → unit → engine → web shell → end to end (Chromium) → Electron
// Prints pass / fail / skip counts per tier and exits non-zero if anything failed.
import { spawnSync } from 'node:child_process';
import { existsSync, readFileSync, mkdirSync, readdirSync } from 'node:fs';
import { join, dirname } from 'node:path';
import { fileURLToPath } from 'node:url';

const root = join(dirname(fileURLToPath(import.meta.url)), '..');
const only = process.argv.slice(2);
const results = [];
mkdirSync(join(root, 'test-output'), { recursive: true });

const list = (dir) => readdirSync(join(root, dir)).filter((f) => f.endsWith('.test.ts')).map((f) => join(dir, f));

function run(name, cmd, args, parse) {
  if (only.length && !only.includes(name)) return;
  process.stdout.write(`\n━━ ${name} ━━ ${cmd} ${args.join(' ')}\n`);
  const started = Date.now();
  const r = spawnSync(cmd, args, { cwd: root, stdio: ['ignore', 'pipe', 'inherit'], encoding: 'utf8', env: { ...process.env, PLUMBLINE_THREADS: process.env.PLUMBLINE_THREADS ?? '1' }, maxBuffer: 64 * 1024 * 1024 });
  process.stdout.write(r.stdout ?? '');
  const counts = parse ? parse(r.stdout ?? '') : { pass: r.status === 0 ? 1 : 0, fail: r.status === 0 ? 0 : 1, skip: 0 };
  if (r.status !== 0 && counts.fail === 0) counts.fail = 1;
  results.push({ name, ...counts, seconds: ((Date.now() - started) / 1000).toFixed(1), ok: r.status === 0 });
}

const nodeTap = (out) => {
  const n = (k) => Number((new RegExp(`^# ${k} (\\d+)`, 'm').exec(out) ?? [0, 0])[1]);
  return { pass: n('pass'), fail: n('fail') + n('cancelled'), skip: n('skipped') + n('todo') };
};
const nodeTest = (files) => [process.execPath, ['--import', 'tsx', '--test', '--test-reporter=tap', '--test-concurrency=1', ...files], nodeTap];

run('typecheck', 'npm', ['run', '--silent', 'typecheck']);
run('build', 'npm', ['run', '--silent', 'build']);
run('unit', ...nodeTest(list('test/unit')));
run('engine', ...nodeTest(list('test/engine')));
run('web shell', ...nodeTest(list('test/web')));
run('end to end', process.execPath, [join(root, 'node_modules', '@playwright', 'test', 'cli.js'), 'test', '-c', 'test/e2e/playwright.config.ts'], () => {
  const file = join(root, 'test-output', 'e2e', 'results.json');
  if (!existsSync(file)) return { pass: 0, fail: 1, skip: 0 };
  const s = JSON.parse(readFileSync(file, 'utf8')).stats;
  return { pass: s.expected, fail: s.unexpected + s.flaky, skip: s.skipped };
});
run('electron', ...nodeTest(list('test/electron')));

process.stdout.write('\n tier        pass  fail  skip   seconds\n');
for (const r of results) process.stdout.write(` ${r.name.padEnd(11)} ${String(r.pass).padStart(4)}  ${String(r.fail).padStart(4)}  ${String(r.skip).padStart(4)}   ${r.seconds.padStart(7)}\n`);
const failed = results.filter((r) => !r.ok || r.fail > 0);
process.stdout.write(failed.length ? `\nFAILED: ${failed.map((r) => r.name).join(', ')}\n` : '\nall tiers passed\n');
process.exit(failed.length ? 1 : 0);
