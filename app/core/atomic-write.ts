// Atomic file writes: write a temporary file beside the target, flush it, then rename over the
// target, so a crash leaves either the old file or the new one, never half of either.
import { closeSync, fsyncSync, mkdirSync, openSync, renameSync, unlinkSync, writeSync } from 'node:fs';
import { dirname, basename, join } from 'node:path';
import { randomBytes } from 'node:crypto';

/**
 * `durable: false` skips the fsync: still atomic for readers (rename), but a power cut may lose
 * the newest files. Right for bulk renders that a resumed run re-checks by hash.
 */
export function writeFileAtomic(file: string, content: Uint8Array | string, options: { durable?: boolean } = {}): void {
  mkdirSync(dirname(file), { recursive: true });
  const tmp = join(dirname(file), `.${basename(file)}.${randomBytes(6).toString('hex')}.tmp`);
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
