// A project folder a team can keep in version control:
//   project.json        generator fingerprint, the kept directions, interface state
//   directions/         one .npy + .json per direction
//   audits/             audit reports (JSON)
//   review-log.jsonl    append-only sign-off history, one JSON object per line
// Every write except the log is atomic (temp file + rename); the log is appended and flushed.
// Every path goes through the path policy: nothing is read or written outside the folder, and a
// bad entry on disk (a hostile name, a file outside) is refused on its own — the project opens.
import { appendFileSync, closeSync, existsSync, fsyncSync, mkdirSync, openSync, readFileSync, readdirSync } from 'node:fs';
import { basename, join, resolve } from 'node:path';
import { createHash } from 'node:crypto';
import { z } from 'zod';
import { removeStaleTemps, writeFileAtomic } from '../core/atomic-write.ts';
import { READ_LIMITS, projectFile, readRegularFile, readTextFile } from '../core/path-policy.ts';
import { directionNameKey, directionNameProblem } from '../protocol/names.ts';
import { writeDirections } from '../core/direction-files.ts';
import { parseDirectionsMeta, readDirections, type Direction, type LatentLayout } from '../core/directions.ts';
import { PlumblineError } from '../core/errors.ts';
import { parseJsonFile } from '../core/json-file.ts';
import { reviewEntrySchema, type ReviewEntry, type SignOff } from '../protocol/messages.ts';

export const PROJECT_FORMAT = 'plumbline.project';

const uiSchema = z.object({
  seed: z.number().int().min(0),
  psi: z.number(),
  strengths: z.record(z.string(), z.number()),
  pinned: z.array(z.number().int().min(0)),
  tags: z.record(z.string(), z.enum(['has', 'lacks'])),
});

const projectSchema = z.object({
  format: z.literal(PROJECT_FORMAT),
  version: z.literal(1),
  name: z.string(),
  generator: z.object({ name: z.string(), fingerprint: z.string() }).nullable(),
  // Checked entry by entry on open (Project.open), so one bad entry does not lock the project.
  directions: z.array(z.object({ name: z.string(), file: z.string() })),
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

export class Project {
  /** Entries refused on open or on loading, each with its reason (shown to the user, never silently dropped). */
  readonly refused: string[] = [];
  /** Temporary files of interrupted writes removed on open. */
  cleaned: string[] = [];

  private constructor(readonly dir: string, public doc: ProjectDoc) {}

  static open(path: string, create: boolean, generator: { name: string; fingerprint: string }): Project {
    const dir = resolve(path);
    const file = join(dir, 'project.json');
    if (!existsSync(file)) {
      if (!create) throw new PlumblineError('file-missing', `${file}: no Plumbline project here (create one first)`, { file });
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

  save(): void {
    this.doc.savedAt = new Date().toISOString();
    writeFileAtomic(join(this.dir, 'project.json'), JSON.stringify(this.doc, null, 2) + '\n');
  }

  saveUi(ui: ProjectUi): string {
    this.doc.ui = uiSchema.parse(ui);
    this.save();
    return this.doc.savedAt;
  }

  saveDirection(d: { name: string; target: string | null; layers: [number, number] | null; vector: Float32Array; notes: string; source: object }, space: 'z' | 'w' | 'w+'): void {
    const problem = directionNameProblem(d.name);
    if (problem) throw new PlumblineError('directions-invalid', `${join(this.dir, 'project.json')}: cannot save direction '${String(d.name).slice(0, 60)}': the name ${problem}`, { file: join(this.dir, 'project.json') });
    const clash = this.doc.directions.find((x) => x.name !== d.name && directionNameKey(x.name) === directionNameKey(d.name));
    if (clash) throw new PlumblineError('directions-invalid', `${join(this.dir, 'project.json')}: cannot save direction '${d.name}': '${clash.name}' exists and differs only in case (one file on macOS and Windows)`, { file: join(this.dir, 'project.json') });
    const rel = `directions/${d.name}.npy`;
    // Both files are checked, so a symlinked directions/ folder cannot carry the write elsewhere.
    projectFile(this.dir, rel);
    projectFile(this.dir, `directions/${d.name}.json`);
    writeDirections(join(this.dir, rel), [d], space);
    if (!this.doc.directions.some((x) => x.name === d.name)) this.doc.directions.push({ name: d.name, file: rel });
    this.save();
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

  saveAudit(report: object): string {
    const name = `audit-${new Date().toISOString().replace(/[:.]/g, '-')}.json`;
    writeFileAtomic(join(this.dir, 'audits', name), JSON.stringify(report, null, 2) + '\n');
    return `audits/${name}`;
  }

  audits(): string[] {
    const dir = join(this.dir, 'audits');
    return existsSync(dir) ? readdirSync(dir).filter((f) => f.endsWith('.json')).sort() : [];
  }

  appendReview(entry: ReviewEntry): void {
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
    if (!last) return { status: 'draft', approvalReset: false, history };
    if (last.vectorHash !== hash && (last.status === 'approved' || last.status === 'rejected')) return { status: 'in-review', approvalReset: true, history };
    return { status: last.status, approvalReset: false, history };
  }
}
