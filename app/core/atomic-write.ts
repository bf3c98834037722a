// Atomic file writes: write a temporary file beside the target, flush it, then rename over the
// target, so a crash leaves either the old file or the new one, never half of either.
import { closeSync, fsyncSync, lstatSync, mkdirSync, openSync, readdirSync, renameSync, unlinkSync, writeSync } from 'node:fs';
import { dirname, basename, join } from 'node:path';
import { randomBytes } from 'node:crypto';

/** Random bytes in a temporary file's name: '.<target name>.<12 hex digits>.tmp'. */
const TEMP_RANDOM_BYTES = 6;
const TEMP_NAME = /^\..+\.[0-9a-f]{12}\.tmp$/;
/**
 * A temporary file older than this is left over from an interrupted write (a write takes
 * milliseconds; a renderer's bulk write well under a minute), so removing it cannot race a
 * writer that is still running.
 */
export const STALE_TEMP_AGE_MS = 10 * 60 * 1000;

/** Removes leftovers of interrupted atomic writes from `dir` (not recursive). Returns the names removed. */
export function removeStaleTemps(dir: string, now = Date.now()): string[] {
  let names: string[];
  try {
    names = readdirSync(dir);
  } catch {
    return [];
  }
  const removed: string[] = [];
  for (const name of names) {
    if (!TEMP_NAME.test(name)) continue;
    const p = join(dir, name);
    try {
      const s = lstatSync(p);
      if (!s.isFile() || now - s.mtimeMs < STALE_TEMP_AGE_MS) continue;
      unlinkSync(p);
      removed.push(name);
    } catch {
      // Gone already, or not ours to remove: leave it.
    }
  }
  return removed;
}

/**
 * `durable: false` skips the fsync: still atomic for readers (rename), but a power cut may lose
 * the newest files. Right for bulk renders that a resumed run re-checks by hash.
 */
export function writeFileAtomic(file: string, content: Uint8Array | string, options: { durable?: boolean; folderExists?: boolean } = {}): void {
  // `folderExists`: the caller made the folder already (a writer thread writing thousands of files into a few).
  if (!options.folderExists) mkdirSync(dirname(file), { recursive: true });
  const tmp = join(dirname(file), `.${basename(file)}.${randomBytes(TEMP_RANDOM_BYTES).toString('hex')}.tmp`);
  const bytes = typeof content === 'string' ? new TextEncoder().encode(content) : content;
  const fd = openSync(tmp, 'wx', 0o644);
  try {
    let at = 0;
    while (at < bytes.length) at += writeSync(fd, bytes, at, bytes.length - at);
    if (options.durable ?? true) fsyncSync(fd);
  } catch (err) {
    closeSync(fd);
    unlinkSync(tmp);
    throw err;
  }
  closeSync(fd);
  try {
    renameSync(tmp, file);
  } catch (err) {
    unlinkSync(tmp);
    throw err;
  }
}
