// Named references in a project: latents found by `locate`, pinned so they can be used wherever a
// seed can. Stored beside the project's other folders without touching project.json:
//   references/<name>.npy    the latent, [1, layers, size] (or [1, size])
//   references/<name>.json   the locate report (plumbline.locate-report): image SHA-256, match
//                            quality, budget used, generator fingerprint
// Names are restricted like direction names, so files stay inside references/.
import { existsSync, mkdirSync, readdirSync, readFileSync } from 'node:fs';
import { basename, join } from 'node:path';
import { createHash } from 'node:crypto';
import { READ_LIMITS, readRegularFile } from '../core/path-policy.ts';
import { writeFileAtomic } from '../core/atomic-write.ts';
import { encodeNpy, decodeNpy } from '../core/npy.ts';
import { PlumblineError } from '../core/errors.ts';

export const REFERENCE_NAME = /^[A-Za-z0-9_-][A-Za-z0-9_.-]{0,119}$/;

export interface StoredReference {
  name: string;
  latent: Float32Array;
  shape: number[];
  report: {
    image: { sha256: string; file?: string };
    generator: { name: string; fingerprint: string };
    match: { found: boolean; ssim: number; meanDeltaE00: number; message: string };
    budget: { evaluations: number; budget: number };
    [key: string]: unknown;
  };
}

function folder(projectDir: string): string {
  return join(projectDir, 'references');
}

export function saveReference(projectDir: string, name: string, latent: Float32Array, shape: number[], report: StoredReference['report']): void {
  if (!REFERENCE_NAME.test(name) || name.startsWith('.')) throw new PlumblineError('bad-request', `reference name '${name}' may hold only letters, digits, _ . - (1 to 120 characters, not starting with '.')`);
  const dir = folder(projectDir);
  mkdirSync(dir, { recursive: true });
  const npy = join(dir, `${name}.npy`);
  writeFileAtomic(npy, encodeNpy(latent, [1, ...shape]));
  writeFileAtomic(join(dir, `${name}.json`), JSON.stringify({ ...report, name, latent: { file: `references/${name}.npy`, shape: [1, ...shape] } }, null, 2) + '\n');
}

export function loadReference(projectDir: string, name: string): StoredReference {
  if (!REFERENCE_NAME.test(name) || name.startsWith('.')) throw new PlumblineError('bad-request', `'${name}' is not a reference name`);
  const dir = folder(projectDir);
  const npyFile = join(dir, `${name}.npy`);
  const jsonFile = join(dir, `${name}.json`);
  if (!existsSync(npyFile) || !existsSync(jsonFile)) throw new PlumblineError('file-missing', `${npyFile}: no reference named '${name}' in this project`, { file: npyFile });
  const a = decodeNpy(new Uint8Array(readFileSync(npyFile)), npyFile);
  let report: StoredReference['report'];
  try {
    report = JSON.parse(readFileSync(jsonFile, 'utf8'));
  } catch (err) {
    throw new PlumblineError('card-invalid', `${jsonFile}: not valid JSON (${(err as Error).message})`, { file: jsonFile });
  }
  if (!report?.image?.sha256 || !report?.match || !report?.generator?.fingerprint) throw new PlumblineError('card-invalid', `${jsonFile}: not a locate report (image.sha256, match and generator.fingerprint are required)`, { file: jsonFile });
  return { name, latent: a.data, shape: a.shape.slice(1), report };
}

export function listReferences(projectDir: string): string[] {
  const dir = folder(projectDir);
  if (!existsSync(dir)) return [];
  return readdirSync(dir).filter((f) => f.endsWith('.json')).map((f) => f.slice(0, -5)).filter((n) => REFERENCE_NAME.test(n) && existsSync(join(dir, `${n}.npy`))).sort();
}

/** A latent used where a seed can be (audit probes, variant recipes): its stored values and provenance. */
export interface LatentReference {
  name: string;
  /** As stored: [size] (W) or [layers · size] (W+). */
  latent: Float32Array;
  /** SHA-256 of the latent's float32 values (little-endian, as a .npy holds them). */
  latentSha256: string;
  /** SHA-256 of the image it was found from, when known. */
  imageSha256: string | null;
}

export function latentSha256(latent: Float32Array): string {
  return createHash('sha256').update(new Uint8Array(latent.buffer, latent.byteOffset, latent.byteLength)).digest('hex');
}

/**
 * One latent from a .npy file ([size], [1, size], [layers, size] or [1, layers, size], as
 * `plumbline locate --out` and a project's references/<name>.npy hold it), named by its file name.
 * When a locate report sits beside it under the same name (.json, as in a references folder), the
 * image SHA-256 it was found from is taken from there; otherwise it is null.
 */
export function latentFileReference(file: string, layout: { layers: number; size: number }, what: string): LatentReference {
  const a = decodeNpy(readRegularFile(file, 'latent', READ_LIMITS.npyBytes), file);
  const values = a.data.length;
  if (a.shape.length > 1 && a.shape[0] !== 1 && a.shape[0] !== layout.layers) throw new PlumblineError('npy-shape', `${file}: ${what} takes one latent per file; this one has shape [${a.shape.join(', ')}]`, { file });
  if (values !== layout.size && values !== layout.layers * layout.size) throw new PlumblineError('npy-shape', `${file}: a latent of shape [${a.shape.join(', ')}]; this generator needs ${layout.size} (W) or ${layout.layers} × ${layout.size} (W+) values`, { file });
  if (!a.data.every(Number.isFinite)) throw new PlumblineError('npy-invalid', `${file}: the latent contains NaN or infinite values`, { file });
  const sidecar = file.replace(/\.npy$/i, '.json');
  let imageSha256: string | null = null;
  if (sidecar !== file && existsSync(sidecar)) {
    try {
      const r = JSON.parse(readFileSync(sidecar, 'utf8'));
      if (r?.format === 'plumbline.locate-report' && /^[0-9a-f]{64}$/.test(r?.image?.sha256)) imageSha256 = r.image.sha256;
    } catch {
      // Not a locate report: the latent is used without an image hash.
    }
  }
  return { name: basename(file).replace(/\.npy$/i, ''), latent: Float32Array.from(a.data), latentSha256: latentSha256(a.data), imageSha256 };
}

/** A named reference of a project as a LatentReference (its stored latent and the image it came from). */
export function projectLatentReference(projectDir: string, name: string, generator?: { name: string; fingerprint: string }): LatentReference {
  const r = loadReference(projectDir, name);
  if (generator && r.report.generator.fingerprint !== generator.fingerprint) {
    throw new PlumblineError('latent-size-mismatch', `reference '${name}' was found in generator ${r.report.generator.name} (${r.report.generator.fingerprint.slice(0, 12)}…), not ${generator.name} (${generator.fingerprint.slice(0, 12)}…)`);
  }
  return { name, latent: r.latent, latentSha256: latentSha256(r.latent), imageSha256: r.report.image.sha256 };
}
