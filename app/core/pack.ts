// Preset packs: one ZIP (extension .plpack) that production can verify against the exact
// generator it was audited on. Layout (docs/preset-pack.md):
//   manifest.json                  format, version, generator fingerprint, creation info, SHA-256 per entry
//   directions/<name>.npy|.json    each approved direction with its metadata
//   previews/<name>.png            seeds × strengths preview, reproducible with `plumbline apply`
//   report.html                    self-contained report (nothing fetched from anywhere)
// Reading never trusts the archive: names, sizes, counts, ratios and hashes are all checked, and
// nothing is extracted to disk.
import { createHash } from 'node:crypto';
import yauzl from 'yauzl';
import yazl from 'yazl';
import { z } from 'zod';
import { PlumblineError, type ErrorCode } from './errors.ts';

export const PACK_FORMAT = 'plumbline.pack';
export const PACK_VERSION = 1;
/** Caps against zip bombs and hostile archives. */
export const PACK_LIMITS = { entries: 2000, entryBytes: 64 * 1024 * 1024, totalBytes: 512 * 1024 * 1024, ratio: 200 };

export type PackFailure = 'archive' | 'hostile' | 'hash' | 'version' | 'generator' | 'range' | 'missing';

/** Each failure class has its own code in the protocol's catalogue, so the app can tell them apart too. */
const PACK_ERROR_CODES: Record<PackFailure, ErrorCode> = {
  archive: 'pack-unreadable',
  hostile: 'pack-unsafe',
  hash: 'pack-tampered',
  version: 'pack-version',
  generator: 'pack-wrong-generator',
  range: 'pack-invalid-direction',
  missing: 'pack-incomplete',
};

export class PackError extends PlumblineError {
  constructor(readonly failure: PackFailure, message: string, extra: { file?: string } = {}) {
    super(PACK_ERROR_CODES[failure], message, extra);
    this.name = 'PackError';
  }
}

const interval = z.object({ value: z.number().nullable(), low: z.number().nullable(), high: z.number().nullable() });

export const packDirectionSchema = z.object({
  name: z.string().regex(/^[A-Za-z0-9_.-]{1,120}$/),
  npy: z.string(),
  meta: z.string(),
  preview: z.string().nullable(),
  target: z.string().nullable(),
  layers: z.tuple([z.number().int(), z.number().int()]).nullable(),
  sigma: z.number().positive(),
  safeRange: z.tuple([z.number(), z.number()]),
  audit: z.object({ verdict: z.enum(['pass', 'review', 'fail']), reason: z.string(), leakage: interval, pathLength: interval, probes: z.number().int(), file: z.string().nullable() }),
  signOff: z.object({ status: z.literal('approved'), reviewer: z.string(), at: z.string(), note: z.string() }),
  previewSpec: z.object({ seeds: z.array(z.number().int().min(0)), strengths: z.array(z.number()), psi: z.number() }).nullable(),
});

export const manifestSchema = z.object({
  format: z.literal(PACK_FORMAT),
  version: z.number().int(),
  createdAt: z.string(),
  createdBy: z.string(),
  project: z.string(),
  generator: z.object({ name: z.string(), fingerprint: z.string().regex(/^[0-9a-f]{64}$/) }),
  entries: z.array(z.object({ path: z.string(), size: z.number().int().min(0), sha256: z.string().regex(/^[0-9a-f]{64}$/) })),
  directions: z.array(packDirectionSchema),
  caution: z.string(),
});
export type PackManifest = z.infer<typeof manifestSchema>;

export const sha256 = (b: Uint8Array) => createHash('sha256').update(b).digest('hex');

/** A safe relative entry name: forward slashes, no '..', no absolute or drive paths, no control characters. */
export function safeEntryName(name: string): boolean {
  if (!name || name.length > 255) return false;
  if (name.startsWith('/') || name.includes('\\') || /^[A-Za-z]:/.test(name)) return false;
  // eslint-disable-next-line no-control-regex
  if (/[\u0000-\u001f]/.test(name)) return false;
  return name.split('/').every((part) => part !== '..' && part !== '.' && part !== '');
}

export function writePack(files: { path: string; bytes: Uint8Array }[], manifest: Omit<PackManifest, 'entries'>): Promise<Uint8Array> {
  for (const f of files) if (!safeEntryName(f.path)) throw new PackError('hostile', `refusing to write unsafe entry name '${f.path}'`);
  const entries = files.map((f) => ({ path: f.path, size: f.bytes.length, sha256: sha256(f.bytes) }));
  const full: PackManifest = { ...manifest, entries };
  const zip = new yazl.ZipFile();
  const fixed = new Date('2000-01-01T00:00:00Z'); // reproducible archives: fixed timestamps
  zip.addBuffer(Buffer.from(JSON.stringify(full, null, 2) + '\n'), 'manifest.json', { mtime: fixed, mode: 0o100644 });
  for (const f of files) zip.addBuffer(Buffer.from(f.bytes), f.path, { mtime: fixed, mode: 0o100644, compress: !f.path.endsWith('.png') });
  zip.end();
  return new Promise((resolve, reject) => {
    const chunks: Buffer[] = [];
    zip.outputStream.on('data', (c: Buffer) => chunks.push(c));
    zip.outputStream.on('end', () => resolve(new Uint8Array(Buffer.concat(chunks))));
    zip.outputStream.on('error', reject);
  });
}

export interface ReadPack {
  manifest: PackManifest;
  files: Map<string, Uint8Array>;
}

/** Reads and checks a pack entirely in memory. Throws PackError with a failure class. */
export function readPack(bytes: Uint8Array, label = 'the pack'): Promise<ReadPack> {
  return new Promise((resolve, reject) => {
    const fail = (failure: PackFailure, msg: string) => reject(new PackError(failure, `${label}: ${msg}`));
    yauzl.fromBuffer(Buffer.from(bytes), { lazyEntries: true, validateEntrySizes: true, strictFileNames: true, decodeStrings: true }, (err, zip) => {
      if (err || !zip) return fail('archive', `not a readable ZIP archive (${err?.message ?? 'no archive'})`);
      if (zip.entryCount > PACK_LIMITS.entries) {
        zip.close();
        return fail('hostile', `holds ${zip.entryCount} entries, more than the ${PACK_LIMITS.entries} allowed`);
      }
      const files = new Map<string, Uint8Array>();
      let total = 0;
      let done = false;
      const stop = (failure: PackFailure, msg: string) => {
        if (done) return;
        done = true;
        zip.close();
        fail(failure, msg);
      };
      // yauzl itself rejects '..', absolute and backslash names: those are attacks, not corruption.
      // yauzl itself rejects '..', absolute and backslash names, and sizes that disagree: those are
      // attacks (or forgeries), not mere corruption.
      zip.on('error', (e: Error) => {
        if (/relative path|absolute path|invalid characters|backslash/i.test(e.message)) stop('hostile', `an entry has an unsafe path (${e.message})`);
        else if (/size mismatch|too many bytes|too few bytes|expected \d+ bytes/i.test(e.message)) stop('hostile', `an entry's recorded size lies (${e.message})`);
        else stop('archive', `corrupt archive (${e.message})`);
      });
      zip.on('entry', (entry: yauzl.Entry) => {
        const name = entry.fileName;
        const mode = (entry.externalFileAttributes >>> 16) & 0o170000;
        if (!safeEntryName(name.replace(/\/$/, '') || '.')) return stop('hostile', `entry '${name}' has an unsafe path (absolute, '..', or odd characters)`);
        if (mode === 0o120000) return stop('hostile', `entry '${name}' is a symbolic link`);
        if (name.endsWith('/')) return zip.readEntry();
        if (files.has(name)) return stop('hostile', `entry '${name}' appears twice`);
        if (entry.uncompressedSize > PACK_LIMITS.entryBytes) return stop('hostile', `entry '${name}' claims ${entry.uncompressedSize} bytes, more than the ${PACK_LIMITS.entryBytes} allowed per entry`);
        if (entry.compressedSize > 0 && entry.uncompressedSize / entry.compressedSize > PACK_LIMITS.ratio && entry.uncompressedSize > 1024 * 1024) return stop('hostile', `entry '${name}' expands ${Math.round(entry.uncompressedSize / entry.compressedSize)}× (a zip bomb?)`);
        total += entry.uncompressedSize;
        if (total > PACK_LIMITS.totalBytes) return stop('hostile', `entries total more than ${PACK_LIMITS.totalBytes} bytes`);
        zip.openReadStream(entry, (e, stream) => {
          if (e || !stream) return stop('archive', `entry '${name}' cannot be read (${e?.message})`);
          const chunks: Buffer[] = [];
          let size = 0;
          stream.on('data', (c: Buffer) => {
            size += c.length;
            if (size > entry.uncompressedSize || size > PACK_LIMITS.entryBytes) {
              stream.destroy();
              stop('hostile', `entry '${name}' holds more data than its header says (size lies)`);
            } else chunks.push(c);
          });
          stream.on('error', (se: Error) => stop('hostile', `entry '${name}': ${se.message}`));
          stream.on('end', () => {
            if (done) return;
            files.set(name, new Uint8Array(Buffer.concat(chunks)));
            zip.readEntry();
          });
        });
      });
      zip.on('end', () => {
        if (done) return;
        done = true;
        const raw = files.get('manifest.json');
        if (!raw) return fail('missing', 'has no manifest.json');
        let json: unknown;
        try {
          json = JSON.parse(new TextDecoder().decode(raw));
        } catch (e) {
          return fail('archive', `manifest.json is not valid JSON (${(e as Error).message})`);
        }
        const version = (json as { version?: unknown })?.version;
        if ((json as { format?: unknown })?.format === PACK_FORMAT && typeof version === 'number' && version !== PACK_VERSION) {
          return fail('version', `format version ${version} is not supported (this Plumbline reads version ${PACK_VERSION}); update Plumbline or rebuild the pack`);
        }
        const m = manifestSchema.safeParse(json);
        if (!m.success) return fail('archive', `manifest.json is invalid — ${m.error.issues.slice(0, 3).map((i) => `${i.path.join('.')}: ${i.message}`).join('; ')}`);
        const listed = new Set(m.data.entries.map((e) => e.path));
        for (const e of m.data.entries) {
          if (!safeEntryName(e.path)) return fail('hostile', `manifest lists unsafe path '${e.path}'`);
          const f = files.get(e.path);
          if (!f) return fail('missing', `manifest lists '${e.path}' but the archive does not hold it`);
          if (f.length !== e.size) return fail('hash', `'${e.path}' is ${f.length} bytes, the manifest says ${e.size}`);
          if (sha256(f) !== e.sha256) return fail('hash', `'${e.path}' does not match its SHA-256 in the manifest (tampered or corrupted)`);
        }
        for (const name of files.keys()) if (name !== 'manifest.json' && !listed.has(name)) return fail('hash', `'${name}' is in the archive but not in the manifest`);
        for (const d of m.data.directions) for (const p of [d.npy, d.meta, ...(d.preview ? [d.preview] : [])]) if (!listed.has(p)) return fail('missing', `direction '${d.name}' refers to '${p}', which the manifest does not list`);
        resolve({ manifest: m.data, files });
      });
      zip.readEntry();
    });
  });
}
