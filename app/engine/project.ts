// A project folder a team can keep in version control:
//   project.json        generator fingerprint, the kept directions, interface state
//   directions/         one .npy + .json per direction
//   audits/             audit reports (JSON)
//   review-log.jsonl    append-only sign-off history, one JSON object per line
// Every write except the log is atomic (temp file + rename); the log is appended and flushed.
import { appendFileSync, closeSync, existsSync, fsyncSync, mkdirSync, openSync, readFileSync, readdirSync } from 'node:fs';
import { basename, join, resolve } from 'node:path';
import { createHash } from 'node:crypto';
import { z } from 'zod';
import { writeFileAtomic } from '../core/atomic-write.ts';
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
  directions: z.array(z.object({ name: z.string().regex(/^[A-Za-z0-9_.-]+$/), file: z.string() })),
  ui: uiSchema.nullable().default(null),
  savedAt: z.string(),
});
export type ProjectDoc = z.infer<typeof projectSchema>;
export type ProjectUi = z.infer<typeof uiSchema>;

export function vectorHash(vector: Float32Array, layers: [number, number] | null): string {
  return createHash('sha256').update(new Uint8Array(vector.buffer, vector.byteOffset, vector.byteLength)).update(JSON.stringify(layers)).digest('hex').slice(0, 32);
}

export class Project {
  private constructor(readonly dir: string, public doc: ProjectDoc) {}

  static open(path: string, create: boolean, generator: { name: string; fingerprint: string }): Project {
    const dir = resolve(path);
    const file = join(dir, 'project.json');
    if (!existsSync(file)) {
      if (!create) throw new PlumblineError('file-missing', `${file}: no Plumbline project here (create one first)`, { file });
      for (const sub of ['', 'directions', 'audits', 'renders']) mkdirSync(join(dir, sub), { recursive: true });
      const p = new Project(dir, { format: PROJECT_FORMAT, version: 1, name: basename(dir), generator, directions: [], ui: null, savedAt: new Date().toISOString() });
      p.save();
      return p;
    }
    const doc = parseJsonFile(projectSchema, readFileSync(file, 'utf8'), file, 'not a valid project');
    for (const d of doc.directions) if (d.file.includes('..') || d.file.startsWith('/')) throw new PlumblineError('card-invalid', `${file}: direction file '${d.file}' points outside the project`, { file });
    return new Project(dir, doc);
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
    const rel = `directions/${d.name}.npy`;
    writeDirections(join(this.dir, rel), [d], space);
    if (!this.doc.directions.some((x) => x.name === d.name)) this.doc.directions.push({ name: d.name, file: rel });
    this.save();
  }

  loadDirections(layout: Pick<LatentLayout, 'size' | 'layers'>): Direction[] {
    return this.doc.directions.flatMap((entry) => {
      const npy = join(this.dir, entry.file);
      const json = npy.replace(/\.npy$/, '.json');
      const meta = existsSync(json) ? parseDirectionsMeta(readFileSync(json, 'utf8'), json) : null;
      return readDirections(new Uint8Array(readFileSync(npy)), npy, meta, layout, entry.name);
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
