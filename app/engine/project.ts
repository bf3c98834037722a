// A project folder a team can keep in version control:
//   project.json        generator fingerprint, the kept directions, interface state
//   directions/         one .npy + .json per direction
//   audits/             audit reports (JSON)
//   review-log.jsonl    append-only sign-off history, one JSON object per line
//   .plumbline-lock.json who has the project open for writing (pid, host, session, renewed at)
// Every write except the log is atomic (temp file + rename); the log is appended and flushed.
// Every path goes through the path policy: nothing is read or written outside the folder, and a
// bad entry on disk (a hostile name, a file outside) is refused on its own — the project opens.
// A new project is made only in a folder that does not exist yet or is empty, and never in or
// under a system folder (newProjectFolderProblem); a second window or tab on a locked project
// gets a read-only Project whose writes are refused.
import { appendFileSync, closeSync, existsSync, fsyncSync, mkdirSync, openSync, readFileSync, readdirSync, renameSync, rmSync, statSync, writeFileSync } from 'node:fs';
import { basename, join, resolve } from 'node:path';
import { createHash } from 'node:crypto';
import { hostname, userInfo } from 'node:os';
import { z } from 'zod';
import { removeStaleTemps, writeFileAtomic } from '../core/atomic-write.ts';
import { READ_LIMITS, isHomeOrTemp, projectFile, readRegularFile, readTextFile, systemFolderProblem } from '../core/path-policy.ts';
import { requestSession } from './request-session.ts';
import { directionNameKey, directionNameProblem } from '../protocol/names.ts';
import { decodeOwnPng, encodePng } from '../core/image.ts';
import { writeDirections } from '../core/direction-files.ts';
import { parseDirectionsMeta, readDirections, type Direction, type LatentLayout } from '../core/directions.ts';
import { PlumblineError } from '../core/errors.ts';
import { parseJsonFile } from '../core/json-file.ts';
import { reviewEntrySchema, variantDraftSchema, PROBE_LIMITS, type LockHolder, type ReviewEntry, type SignOff, type ReviewStatusName } from '../protocol/messages.ts';
import { approvalGate, checkTransition, transitions, type AuditRecord, type Override } from '../core/signoff-rules.ts';

export const PROJECT_FORMAT = 'plumbline.project';

const uiSchema = z.object({
  seed: z.number().int().min(0),
  psi: z.number(),
  strengths: z.record(z.string(), z.number()),
  pinned: z.array(z.number().int().min(0)),
  tags: z.record(z.string(), z.enum(['has', 'lacks'])),
  variants: variantDraftSchema.optional(),
  auditProbes: z.number().int().min(PROBE_LIMITS.min).max(PROBE_LIMITS.max).optional(),
});

const projectSchema = z.object({
  format: z.literal(PROJECT_FORMAT),
  version: z.literal(1),
  name: z.string(),
  generator: z.object({ name: z.string(), fingerprint: z.string() }).nullable(),
  // Names are checked entry by entry on open (Project.open), so one bad entry does not lock the project.
  /** hash and changedAt: the vector's hash and when it last changed (audits before that do not count for sign-off). */
  directions: z.array(z.object({ name: z.string(), file: z.string(), hash: z.string().optional(), changedAt: z.string().optional() })),
  ui: uiSchema.nullable().default(null),
  savedAt: z.string(),
});
export type ProjectDoc = z.infer<typeof projectSchema>;
export type ProjectUi = z.infer<typeof uiSchema>;

export function vectorHash(vector: Float32Array, layers: [number, number] | null): string {
  return createHash('sha256').update(new Uint8Array(vector.buffer, vector.byteOffset, vector.byteLength)).update(JSON.stringify(layers)).digest('hex').slice(0, 32);
}

/** Sub-folders a project writes into; each is swept for leftovers of interrupted writes on open. */
const PROJECT_FOLDERS = ['', 'directions', 'audits', 'renders'];

/**
 * Why a new project may not be made at `path`, or null when it may: the folder must not exist
 * yet or be empty, must be a folder, and must not be in or under a system folder. Checks only;
 * writes nothing. (The engine-wide path policy for every write is a separate, wider module.)
 */
export function newProjectFolderProblem(path: string): string | null {
  const dir = resolve(path);
  const system = systemFolderProblem(dir);
  if (system) return `${system}; choose a new or empty folder in your home or on a project drive`;
  if (isHomeOrTemp(dir)) return `${dir} is your home or temporary folder itself; choose a new or empty folder inside it`;
  if (existsSync(dir)) {
    if (!statSync(dir).isDirectory()) return `${dir} is a file, not a folder`;
    const entries = readdirSync(dir);
    if (entries.length) return `${dir} is not empty (it holds ${entries.slice(0, 3).join(', ')}${entries.length > 3 ? `, … ${entries.length} entries` : ''}); a new project needs a new or empty folder`;
  }
  return null;
}

export const LOCK_FILE = '.plumbline-lock.json';
/** Holders renew their lock every LOCK_RENEW_MS; one not renewed for LOCK_STALE_MS is stale (missed 4 renewals). Our own choice. */
export const LOCK_RENEW_MS = 20_000;
export const LOCK_STALE_MS = 90_000;

function pidAlive(pid: number): boolean {
  try {
    process.kill(pid, 0);
    return true;
  } catch (err) {
    // EPERM: the process exists but belongs to someone else.
    return (err as NodeJS.ErrnoException).code === 'EPERM';
  }
}

/** Reads a lock file; a torn or unreadable one counts as no lock. */
function readLock(file: string): LockHolder | null {
  try {
    const v = JSON.parse(readFileSync(file, 'utf8')) as LockHolder;
    if (!(typeof v.pid === 'number' && typeof v.host === 'string' && typeof v.session === 'string' && typeof v.at === 'string')) return null;
    // Only the known fields, bounded: the file may come from anywhere and is shown to the user.
    return { pid: v.pid, host: v.host.slice(0, 256), session: v.session.slice(0, 200), at: v.at.slice(0, 64), ...(typeof v.user === 'string' && v.user ? { user: v.user.slice(0, 64) } : {}) };
  } catch {
    return null;
  }
}

/** Whether a lock no longer holds: its process is gone (same machine) or it has not been renewed. */
export function lockIsStale(holder: LockHolder, now = Date.now()): boolean {
  if (holder.host === hostname() && !pidAlive(holder.pid)) return true;
  const at = Date.parse(holder.at);
  return !Number.isFinite(at) || now - at > LOCK_STALE_MS;
}

/**
 * Takes or renews the project's lock for `session`. Returns the holder; the caller is read-only
 * when the holder is another live session.
 */
/** The account name for the lock (empty where the system cannot say). */
function accountName(): string {
  try {
    return userInfo().username;
  } catch {
    return '';
  }
}

export function acquireLock(dir: string, session: string): { readOnly: boolean; holder: LockHolder } {
  const file = join(dir, LOCK_FILE);
  const mine: LockHolder = { pid: process.pid, host: hostname(), session, at: new Date().toISOString(), user: accountName() };
  const current = existsSync(file) ? readLock(file) : null;
  if (current && current.session !== session && !lockIsStale(current)) return { readOnly: true, holder: current };
  if (!current && !existsSync(file)) {
    try {
      // Exclusive create: of two openers racing for a free project, exactly one wins.
      writeFileSync(file, JSON.stringify(mine) + '\n', { flag: 'wx' });
      return { readOnly: false, holder: mine };
    } catch {
      const raced = readLock(file);
      if (raced && raced.session !== session) return { readOnly: true, holder: raced };
    }
  }
  writeFileAtomic(file, JSON.stringify(mine) + '\n');
  return { readOnly: false, holder: mine };
}

export function releaseLock(dir: string, session: string): void {
  const file = join(dir, LOCK_FILE);
  if (readLock(file)?.session === session) rmSync(file, { force: true });
}

/** A stored audit result of one direction, with the name it was stored under. */
export type StoredAudit = AuditRecord & { name: string };

export class Project {
  /** Entries refused on open or on loading, each with its reason (shown to the user, never silently dropped). */
  readonly refused: string[] = [];
  /** Temporary files of interrupted writes removed on open. */
  cleaned: string[] = [];
  /** Set when another session holds the lock: every write is refused. */
  readOnly = false;
  lockHolder: LockHolder | null = null;
  #audits: StoredAudit[] | null = null;

  private constructor(readonly dir: string, public doc: ProjectDoc) {}

  static open(path: string, create: boolean, generator: { name: string; fingerprint: string }): Project {
    const dir = resolve(path);
    const file = join(dir, 'project.json');
    if (!existsSync(file)) {
      if (!create) throw new PlumblineError('file-missing', `${file}: no Plumbline project here (create one first)`, { file });
      const problem = newProjectFolderProblem(dir);
      if (problem) throw new PlumblineError('bad-request', `cannot create a project here: ${problem}`, { file: dir });
      for (const sub of PROJECT_FOLDERS) mkdirSync(join(dir, sub), { recursive: true });
      const p = new Project(dir, { format: PROJECT_FORMAT, version: 1, name: basename(dir), generator, directions: [], ui: null, savedAt: new Date().toISOString() });
      p.save();
      return p;
    }
    const cleaned = PROJECT_FOLDERS.flatMap((sub) => removeStaleTemps(join(dir, sub)).map((n) => (sub ? `${sub}/${n}` : n)));
    const doc = parseJsonFile(projectSchema, readTextFile(file, 'project file'), file, 'not a valid project');
    const refused: string[] = [];
    const seen = new Set<string>();
    doc.directions = doc.directions.filter((d) => {
      const problem = directionNameProblem(d.name);
      if (problem) refused.push(`'${d.name.slice(0, 60)}': the name ${problem}`);
      else if (seen.has(directionNameKey(d.name))) refused.push(`'${d.name}': listed twice (names are compared ignoring case)`);
      else if (d.file !== `directions/${d.name}.npy`) refused.push(`'${d.name}': its file '${d.file.slice(0, 200)}' is not directions/${d.name}.npy`);
      else {
        seen.add(directionNameKey(d.name));
        return true;
      }
      return false;
    });
    const p = new Project(dir, doc);
    p.refused.push(...refused.map((r) => `${file}: refused direction ${r}`));
    p.cleaned = cleaned;
    return p;
  }

  /**
   * Takes (or finds taken) the lock for a session; a project locked by another session becomes
   * read-only. An instance shared by several tabs of one engine changes hands only when the lock
   * does: another tab finding the lock taken leaves the holder's instance as it was.
   */
  lock(session: string): { readOnly: boolean; holder: LockHolder } {
    const r = acquireLock(this.dir, session);
    if (!r.readOnly || this.lockHolder === null || this.lockHolder.session === session) {
      this.readOnly = r.readOnly;
      this.lockHolder = r.holder;
    }
    return r;
  }

  /**
   * Whether a write now would be refused: the instance is read-only, or the request being handled
   * comes from a session other than the lock holder's (another tab of the same web shell).
   */
  get readOnlyHere(): boolean {
    if (this.readOnly) return true;
    const session = requestSession();
    return session !== undefined && this.lockHolder !== null && session !== this.lockHolder.session;
  }

  /** Throws the read-only error (naming the lock holder) when a write now would be refused. */
  requireWritable(): void {
    if (this.readOnlyHere) {
      const h = this.lockHolder;
      throw new PlumblineError('bad-request', `${this.dir}: opened read-only — another window${h ? ` (${h.user ? `${h.user}, ` : ''}process ${h.pid} on ${h.host}, since ${h.at})` : ''} has this project open; close it there to edit here`, { file: this.dir });
    }
  }

  save(): void {
    this.requireWritable();
    this.doc.savedAt = new Date().toISOString();
    writeFileAtomic(join(this.dir, 'project.json'), JSON.stringify(this.doc, null, 2) + '\n');
  }

  saveUi(ui: ProjectUi): string {
    this.doc.ui = uiSchema.parse(ui);
    this.save();
    return this.doc.savedAt;
  }

  saveDirection(d: { name: string; target: string | null; layers: [number, number] | null; vector: Float32Array; notes: string; source: object }, space: 'z' | 'w' | 'w+'): void {
    this.requireWritable();
    const problem = directionNameProblem(d.name);
    if (problem) throw new PlumblineError('directions-invalid', `${join(this.dir, 'project.json')}: cannot save direction '${String(d.name).slice(0, 60)}': the name ${problem}`, { file: join(this.dir, 'project.json') });
    const clash = this.doc.directions.find((x) => x.name !== d.name && directionNameKey(x.name) === directionNameKey(d.name));
    if (clash) throw new PlumblineError('directions-invalid', `${join(this.dir, 'project.json')}: cannot save direction '${d.name}': '${clash.name}' exists and differs only in case (one file on macOS and Windows)`, { file: join(this.dir, 'project.json') });
    const rel = `directions/${d.name}.npy`;
    // Both files are checked, so a symlinked directions/ folder cannot carry the write elsewhere.
    projectFile(this.dir, rel);
    projectFile(this.dir, `directions/${d.name}.json`);
    writeDirections(join(this.dir, rel), [d], space);
    const hash = vectorHash(d.vector, d.layers);
    const entry = this.doc.directions.find((x) => x.name === d.name);
    if (!entry) this.doc.directions.push({ name: d.name, file: rel, hash, changedAt: new Date().toISOString() });
    else if (entry.hash !== hash) Object.assign(entry, { hash, changedAt: new Date().toISOString() });
    this.save();
  }

  /**
   * Renames a direction before it has a history: its review log entries and audits are keyed by
   * name, so a direction that has either keeps its name (a copy under the new name is the way).
   */
  renameDirection(from: string, to: string): void {
    this.requireWritable();
    const entry = this.doc.directions.find((x) => x.name === from);
    if (!entry) throw new PlumblineError('bad-request', `${this.dir}: no direction '${from}' in the project`);
    const problem = directionNameProblem(to);
    if (problem) throw new PlumblineError('bad-request', `cannot rename '${from}': the name ${problem}`);
    const clash = this.doc.directions.find((x) => x !== entry && directionNameKey(x.name) === directionNameKey(to));
    if (clash) throw new PlumblineError('bad-request', `a direction is already named '${clash.name}' (names are compared ignoring case)`);
    if (this.reviews().some((e) => e.direction === from) || this.storedAudits().some((a) => a.name === from)) {
      throw new PlumblineError('bad-request', `'${from}' has sign-off or audit history under its name; it keeps that name so the history stays attached`);
    }
    // Every file through the path policy: a symlinked directions/ cannot carry the move elsewhere.
    const npy = projectFile(this.dir, entry.file);
    const meta = projectFile(this.dir, entry.file.replace(/\.npy$/, '.json'));
    const rel = `directions/${to}.npy`;
    const target = projectFile(this.dir, rel);
    projectFile(this.dir, `directions/${to}.json`);
    if (existsSync(meta)) {
      const doc = JSON.parse(readTextFile(meta, 'directions metadata')) as { file?: string; directions?: { name: string }[] };
      doc.file = `${to}.npy`;
      for (const d of doc.directions ?? []) if (d.name === from) d.name = to;
      writeFileAtomic(join(this.dir, `directions/${to}.json`), JSON.stringify(doc, null, 2) + '\n');
      rmSync(meta);
    }
    renameSync(npy, target);
    Object.assign(entry, { name: to, file: rel });
    this.save();
  }

  /**
   * Takes a direction out of the project. Its files move to directions/deleted/ with a time
   * stamp (nothing is destroyed); its review log and audits stay as history.
   */
  deleteDirection(name: string): void {
    this.requireWritable();
    const entry = this.doc.directions.find((x) => x.name === name);
    if (!entry) throw new PlumblineError('bad-request', `${this.dir}: no direction '${name}' in the project`);
    const stamp = new Date().toISOString().replace(/[:.]/g, '-');
    mkdirSync(join(this.dir, 'directions', 'deleted'), { recursive: true });
    for (const file of [entry.file, entry.file.replace(/\.npy$/, '.json')]) {
      const from = projectFile(this.dir, file);
      if (existsSync(from)) renameSync(from, projectFile(this.dir, `directions/deleted/${stamp}-${basename(file)}`));
    }
    this.doc.directions = this.doc.directions.filter((x) => x !== entry);
    this.save();
  }

  /**
   * Keeps an unkept discovery candidate (vector, metadata and its preview strip) in candidates/
   * until it is kept or discarded, so a reload or a crash does not lose it.
   */
  saveCandidate(key: string, d: { name: string; target: string | null; layers: [number, number] | null; vector: Float32Array; notes: string; source: object }, space: 'z' | 'w' | 'w+', strip: { seeds: number[]; strengths: number[]; images: { width: number; height: number; rgba: Uint8Array }[] }): void {
    this.requireWritable();
    if (!/^[A-Za-z0-9_-]{1,80}$/.test(key)) throw new PlumblineError('bad-request', `bad candidate key '${key}'`);
    writeDirections(projectFile(this.dir, `candidates/${key}.npy`), [d], space);
    projectFile(this.dir, `candidates/${key}.json`);
    const images = strip.images.map((i) => Buffer.from(encodePng({ width: i.width, height: i.height, data: new Uint8ClampedArray(i.rgba.buffer, i.rgba.byteOffset, i.rgba.byteLength) })).toString('base64'));
    writeFileAtomic(projectFile(this.dir, `candidates/${key}.strip.json`), JSON.stringify({ seeds: strip.seeds, strengths: strip.strengths, png: images }) + '\n');
  }

  /** The candidates kept in candidates/, oldest first; unreadable ones are skipped. */
  loadCandidates(layout: LatentLayout): { key: string; direction: Direction; strip: { seeds: number[]; strengths: number[]; images: { width: number; height: number; rgba: Uint8Array }[] } }[] {
    const dir = join(this.dir, 'candidates');
    if (!existsSync(dir)) return [];
    return readdirSync(dir).filter((f) => f.endsWith('.npy')).sort().flatMap((f) => {
      const key = f.slice(0, -4);
      try {
        // Read through the path policy with its size caps; an unreadable candidate is skipped.
        const npy = projectFile(this.dir, `candidates/${f}`);
        const metaFile = projectFile(this.dir, `candidates/${key}.json`);
        const meta = parseDirectionsMeta(readTextFile(metaFile, 'candidate metadata'), metaFile);
        const [direction] = readDirections(readRegularFile(npy, 'candidate array', READ_LIMITS.npyBytes), npy, meta, layout, key);
        const s = JSON.parse(readTextFile(projectFile(this.dir, `candidates/${key}.strip.json`), 'candidate strip')) as { seeds: number[]; strengths: number[]; png: string[] };
        const images = s.png.map((b) => {
          const png = decodeOwnPng(Buffer.from(b, 'base64'), `candidates/${key}.strip.json`);
          return { width: png.width, height: png.height, rgba: new Uint8Array(png.data.buffer, png.data.byteOffset, png.data.byteLength) };
        });
        return [{ key, direction, strip: { seeds: s.seeds, strengths: s.strengths, images } }];
      } catch {
        return [];
      }
    });
  }

  removeCandidate(key: string): void {
    this.requireWritable();
    for (const ext of ['.npy', '.json', '.strip.json']) rmSync(join(this.dir, 'candidates', `${basename(key)}${ext}`), { force: true });
  }

  /** When a direction's vector last changed, as recorded (null for projects from before this was kept). */
  changedAt(name: string): string | null {
    return this.doc.directions.find((x) => x.name === name)?.changedAt ?? null;
  }

  /** The project's directions; an entry that cannot be read safely is refused (see `refused`), the rest load. */
  loadDirections(layout: Pick<LatentLayout, 'size' | 'layers'>): Direction[] {
    return this.doc.directions.flatMap((entry) => {
      try {
        const npy = projectFile(this.dir, entry.file);
        const json = projectFile(this.dir, entry.file.replace(/\.npy$/, '.json'));
        const meta = existsSync(json) ? parseDirectionsMeta(readTextFile(json, 'directions metadata'), json) : null;
        const dirs = readDirections(readRegularFile(npy, 'directions array', READ_LIMITS.npyBytes), npy, meta, layout, entry.name);
        if (dirs.length !== 1 || dirs[0].name !== entry.name) throw new PlumblineError('directions-invalid', `${npy}: holds ${dirs.map((d) => `'${d.name}'`).join(', ')}, the project lists '${entry.name}'`, { file: npy });
        return dirs;
      } catch (err) {
        this.refused.push(`${(err as Error).message}`);
        return [];
      }
    });
  }

  /**
   * Stores a full audit report (settings, probes, thumbnails) as a new file: audits are history
   * and never overwrite one another. `hashes` gives each audited direction's vector hash, kept
   * beside its result so sign-off can tell which version was audited.
   */
  saveAudit(report: { directions: { name: string }[] }, hashes: Record<string, string> = {}): string {
    this.requireWritable();
    const stamp = new Date().toISOString().replace(/[:.]/g, '-');
    let name = `audit-${stamp}.json`;
    for (let k = 2; existsSync(join(this.dir, 'audits', name)); k++) name = `audit-${stamp}-${k}.json`;
    const stored = { ...report, directions: report.directions.map((d) => ({ ...d, vectorHash: hashes[d.name] ?? null })) };
    writeFileAtomic(join(this.dir, 'audits', name), JSON.stringify(stored, null, 2) + '\n');
    this.#audits = null;
    return `audits/${name}`;
  }

  /** Every stored result of every direction, oldest file first (read once, then cached). */
  storedAudits(): StoredAudit[] {
    if (this.#audits) return this.#audits;
    const out: StoredAudit[] = [];
    for (const file of this.audits()) {
      const report = this.readAudit(file);
      if (!report) continue;
      for (const d of report.directions) out.push({ name: d.name, at: report.createdAt, file: `audits/${file}`, vectorHash: d.vectorHash ?? null, verdict: d.verdict, reason: d.reason, probes: report.probes.count, safeRange: d.safeRange });
    }
    return (this.#audits = out);
  }

  /** One stored report, or null when it cannot be read (skipped, never fatal). */
  readAudit(file: string): StoredReport | null {
    try {
      const r = JSON.parse(readFileSync(join(this.dir, 'audits', basename(file)), 'utf8')) as StoredReport;
      return Array.isArray(r.directions) && typeof r.createdAt === 'string' && r.probes ? r : null;
    } catch {
      return null;
    }
  }

  audits(): string[] {
    const dir = join(this.dir, 'audits');
    return existsSync(dir) ? readdirSync(dir).filter((f) => f.endsWith('.json')).sort() : [];
  }

  appendReview(entry: ReviewEntry): void {
    this.requireWritable();
    const file = join(this.dir, 'review-log.jsonl');
    appendFileSync(file, JSON.stringify(reviewEntrySchema.parse(entry)) + '\n', { flag: 'a' });
    const fd = openSync(file, 'r+');
    fsyncSync(fd);
    closeSync(fd);
  }

  reviews(): ReviewEntry[] {
    const file = join(this.dir, 'review-log.jsonl');
    if (!existsSync(file)) return [];
    const out: ReviewEntry[] = [];
    for (const line of readFileSync(file, 'utf8').split('\n')) {
      if (!line.trim()) continue;
      try {
        const r = reviewEntrySchema.safeParse(JSON.parse(line));
        if (r.success) out.push(r.data);
      } catch {
        // A torn last line (crash mid-append) is skipped; earlier history stays intact.
      }
    }
    return out;
  }

  signOff(name: string, hash: string): SignOff {
    const history = this.reviews().filter((e) => e.direction === name);
    const last = history.at(-1);
    const base = (status: ReviewStatusName, approvalReset: boolean): SignOff => {
      const mine = this.storedAudits().filter((a) => a.name === name);
      const changedAt = this.changedAt(name);
      const gate = approvalGate({ vectorHash: hash, changedAt }, mine);
      return {
        status, approvalReset, history,
        gate: { state: gate.state, explanation: gate.explanation },
        transitions: transitions(status, gate),
        audits: mine.map((a) => ({ at: a.at, file: a.file, verdict: a.verdict, reason: a.reason, probes: a.probes, current: a.vectorHash === hash && (!changedAt || a.at >= changedAt) })).reverse(),
      };
    };
    if (!last) return base('draft', false);
    if (last.vectorHash !== hash && (last.status === 'approved' || last.status === 'rejected')) return base('in-review', true);
    return base(last.status, false);
  }

  /**
   * Records one sign-off step after the rule module allows it: refused for a no-op, and for an
   * approval the audits do not support unless an override reason is given (then recorded as one).
   */
  review(name: string, hash: string, step: { status: ReviewStatusName; reviewer: string; note: string; override?: string }): SignOff {
    const now = this.signOff(name, hash);
    const gate = approvalGate({ vectorHash: hash, changedAt: this.changedAt(name) }, this.storedAudits().filter((a) => a.name === name));
    const override: Override | null = step.override?.trim() ? { reason: step.override } : null;
    const r = checkTransition(name, now.status, step.status, gate, override);
    this.appendReview({
      at: new Date().toISOString(), direction: name, vectorHash: hash, status: step.status, reviewer: step.reviewer, note: step.note,
      ...(r.override ? { override: override!.reason.trim(), gate: gate.explanation } : {}),
    });
    return this.signOff(name, hash);
  }
}

/** The fields of a stored audit report this module reads. */
export interface StoredReport {
  createdAt: string;
  probes: { count: number };
  directions: { name: string; vectorHash?: string | null; verdict: 'pass' | 'review' | 'fail' | 'no-measure'; reason: string; safeRange: [number, number]; changeMap?: ({ png: string } & Record<string, unknown>) | null; worstProbes?: { seed: number; strength: number; attribute: string; leakage: number; before: string; after: string }[] }[];
  attributes?: { name: string }[];
  combinations?: unknown[];
  warnings?: string[];
}

export interface AuditThumbnail { direction: string; seed: number; strength: number; attribute: string; leakage: number; before: Uint8Array; after: Uint8Array }

/**
 * Every stored audit merged into one report: for each direction of the project, its newest
 * result (with the file and time it came from), so an audit of two directions never hides the
 * earlier results of the others. Attributes are the union; combinations and warnings come from
 * the newest report. Null when nothing was audited yet.
 */
export function mergedAuditHistory(project: Project, names: readonly string[]): { report: Record<string, unknown> | null; thumbnails: AuditThumbnail[]; changeMaps: { direction: string; png: Uint8Array }[]; files: string[] } {
  const files = project.audits();
  const reports = files.map((f) => ({ file: `audits/${f}`, report: project.readAudit(f) })).filter((r): r is { file: string; report: StoredReport } => !!r.report);
  if (!reports.length) return { report: null, thumbnails: [], changeMaps: [], files };
  reports.sort((a, b) => (a.report.createdAt < b.report.createdAt ? -1 : a.report.createdAt > b.report.createdAt ? 1 : 0));
  const newest = reports.at(-1)!;
  const latest = new Map<string, { entry: StoredReport['directions'][number]; file: string; at: string }>();
  for (const r of reports) for (const d of r.report.directions) latest.set(d.name, { entry: d, file: r.file, at: r.report.createdAt });
  const attributes = new Map<string, unknown>();
  for (const r of [...reports].reverse()) for (const a of r.report.attributes ?? []) if (!attributes.has(a.name)) attributes.set(a.name, a);
  const keep = names.filter((n) => latest.has(n));
  const thumbnails: AuditThumbnail[] = keep.flatMap((n) => (latest.get(n)!.entry.worstProbes ?? []).map((w) => ({ direction: n, seed: w.seed, strength: w.strength, attribute: w.attribute, leakage: w.leakage, before: fromDataUri(w.before), after: fromDataUri(w.after) })));
  // Change maps travel as PNG bytes beside the report, like the thumbnails.
  const changeMaps = keep.flatMap((n) => {
    const map = latest.get(n)!.entry.changeMap;
    return map && typeof map.png === 'string' ? [{ direction: n, png: fromDataUri(map.png) }] : [];
  });
  const directions = keep.map((n) => {
    const { entry, file, at } = latest.get(n)!;
    const { worstProbes, changeMap, ...rest } = entry;
    const wireMap = changeMap ? (({ png: _png, ...m }) => m)(changeMap) : changeMap;
    return { ...rest, ...(changeMap !== undefined ? { changeMap: wireMap } : {}), worstProbes: (worstProbes ?? []).map(({ before: _b, after: _a, ...w }) => w), auditedAt: at, auditFile: file };
  });
  return { report: { ...newest.report, attributes: [...attributes.values()], directions }, thumbnails, changeMaps, files };
}

function fromDataUri(uri: string): Uint8Array {
  return new Uint8Array(Buffer.from(uri.slice(uri.indexOf(',') + 1), 'base64'));
}

/** What the use rules need to know of each direction: its sign-off status and its audited safe range. */
export function directionUses(project: Project | null, dirs: readonly { name: string; vector: Float32Array; layers: [number, number] | null }[]): { name: string; status: ReviewStatusName | null; safeRange: [number, number] | null }[] {
  return dirs.map((d) => {
    if (!project) return { name: d.name, status: null, safeRange: null };
    const hash = vectorHash(d.vector, d.layers);
    const gate = approvalGate({ vectorHash: hash, changedAt: project.changedAt(d.name) }, project.storedAudits().filter((a) => a.name === d.name));
    return { name: d.name, status: project.signOff(d.name, hash).status, safeRange: gate.audit?.safeRange ?? null };
  });
}
