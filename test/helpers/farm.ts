// Farm workers for tests: `plumbline worker` processes in their own process groups (so a test can
// kill one with its sandbox, as a crash would), with short lock and stall-check times.
import { spawn, type ChildProcess } from 'node:child_process';
import { readdirSync, readFileSync } from 'node:fs';
import { join } from 'node:path';

const root = join(import.meta.dirname, '..', '..');

/** Short enough to see a killed worker's unit come back within seconds; long enough not to stall a live one. */
export const TEST_LOCK_MS = 3000;
export const TEST_STALLED_CHECK_MS = 1000;

export interface TestWorker {
  name: string;
  child: ChildProcess;
  log: () => string;
  /** SIGKILL to the worker and its sandbox processes (its process group). */
  kill(): Promise<void>;
  /** SIGKILL to the worker process alone, as a crash would; returns the sandbox processes it had. */
  killAlone(): Promise<number[]>;
  /** SIGTERM: finish the unit in hand, then stop. */
  stop(): Promise<void>;
}

export async function startWorker(url: string, name: string, extra: string[] = [], env: Record<string, string> = {}): Promise<TestWorker> {
  const child = spawn(process.execPath, [join(root, 'app', 'cli', 'bin.js'), 'worker', '--farm', url, '--name', name, '--threads', '1', ...extra], {
    detached: true,
    stdio: ['ignore', 'pipe', 'pipe'],
    env: { ...process.env, PLUMBLINE_FARM_LOCK_MS: String(TEST_LOCK_MS), PLUMBLINE_FARM_STALLED_CHECK_MS: String(TEST_STALLED_CHECK_MS), ...env },
  });
  let out = '';
  child.stdout!.on('data', (b) => (out += b));
  child.stderr!.on('data', (b) => (out += b));
  const exited = () => child.exitCode !== null || child.signalCode !== null;
  await new Promise<void>((done, fail) => {
    const t = setInterval(() => {
      if (out.includes(`worker ${name} ready`)) {
        clearInterval(t);
        done();
      } else if (exited()) {
        clearInterval(t);
        fail(new Error(`worker ${name} exited before it was ready:\n${out}`));
      }
    }, 50);
  });
  const waitExit = () => new Promise<void>((done) => (exited() ? done() : child.once('exit', () => done())));
  return {
    name, child, log: () => out,
    kill: async () => {
      if (exited()) return;
      process.kill(-child.pid!, 'SIGKILL');
      await waitExit();
    },
    killAlone: async () => {
      const sandboxes = childrenOf(child.pid!);
      if (!exited()) {
        process.kill(child.pid!, 'SIGKILL');
        await waitExit();
      }
      return sandboxes;
    },
    stop: async () => {
      if (exited()) return;
      child.kill('SIGTERM');
      await waitExit();
      // Its sandbox children share the group; make sure none outlive it.
      try {
        process.kill(-child.pid!, 'SIGKILL');
      } catch {
        // already gone
      }
    },
  };
}

/** Processes whose parent is `pid` (Linux: field 4 of /proc/<pid>/stat). */
export function childrenOf(pid: number): number[] {
  const out: number[] = [];
  for (const entry of readdirSync('/proc')) {
    if (!/^\d+$/.test(entry)) continue;
    try {
      const stat = readFileSync(`/proc/${entry}/stat`, 'utf8');
      // The command name (field 2) is in parentheses and may hold spaces: fields follow its last ')'.
      const fields = stat.slice(stat.lastIndexOf(')') + 2).split(' ');
      if (Number(fields[1]) === pid) out.push(Number(entry));
    } catch {
      // gone meanwhile
    }
  }
  return out;
}

/** Whether a process still runs (a zombie, dead but not yet reaped, counts as gone). */
export function running(pid: number): boolean {
  try {
    const stat = readFileSync(`/proc/${pid}/stat`, 'utf8');
    return stat.slice(stat.lastIndexOf(')') + 2)[0] !== 'Z';
  } catch {
    return false;
  }
}
