// Paths that arrive in protocol requests. The engine runs in its own process with no meaningful
// working folder, so every path from a request must be absolute (a dialog's answer in the desktop
// app, a typed absolute path in the web shell; the CLI resolves its arguments before calling).
import { isAbsolute, resolve } from 'node:path';
import { PlumblineError } from '../core/errors.ts';
import { READ_LIMITS, chosenOutputFile, readRegularFile } from '../core/path-policy.ts';

export function requestPath(path: string, what: string): string {
  if (!isAbsolute(path)) throw new PlumblineError('path-refused', `${path}: ${what} must be an absolute path (the engine has no working folder of its own)`, { file: path });
  return resolve(path);
}

/** Where to write a pack the user asked for: absolute, and an existing file only with `overwrite`. */
export const packOutput = (out: string, overwrite: boolean): string => chosenOutputFile(requestPath(out, 'the pack'), 'the pack', { overwrite });

export const readPackFile = (path: string): Uint8Array => readRegularFile(requestPath(path, 'the pack'), 'pack', READ_LIMITS.packBytes);
