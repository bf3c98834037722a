// Debian's Python with NumPy and SciPy as an outside reference for tests. Always /usr/bin/python3
// (the python3 first on PATH may be another interpreter without them); `.ci/run` installs
// python3-numpy and python3-scipy. Tests skip with the reason only when it truly is not there.
import { spawnSync } from 'node:child_process';
import { existsSync } from 'node:fs';
import assert from 'node:assert/strict';

export const PYTHON = '/usr/bin/python3';

function probe(): { versions: string | null; reason: string | false } {
  if (!existsSync(PYTHON)) return { versions: null, reason: `${PYTHON} is missing (install python3-numpy python3-scipy with apt-get)` };
  const r = spawnSync(PYTHON, ['-c', 'import numpy, scipy; print(f"NumPy {numpy.__version__}, SciPy {scipy.__version__}")'], { encoding: 'utf8' });
  if (r.status !== 0) return { versions: null, reason: `${PYTHON} lacks NumPy/SciPy: ${(r.stderr || r.error?.message || '').trim().split('\n').pop()}` };
  return { versions: r.stdout.trim(), reason: false };
}

const found = probe();
/** "NumPy x, SciPy y" when available. */
export const scipyVersions = found.versions;
/** false when NumPy and SciPy are available, else the reason to skip. */
export const scipySkip: string | false = found.reason;

/** Runs Python code and parses its stdout as JSON. */
export function runPythonJson<T = unknown>(code: string, input?: unknown): T {
  const r = spawnSync(PYTHON, ['-c', code], { encoding: 'utf8', input: input === undefined ? undefined : JSON.stringify(input), maxBuffer: 64 << 20 });
  assert.equal(r.status, 0, r.stderr);
  return JSON.parse(r.stdout) as T;
}
