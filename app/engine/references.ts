// Named references in a project: latents found by `locate`, pinned so they can be used wherever a
// seed can. Stored beside the project's other folders without touching project.json:
//   references/<name>.npy    the latent, [1, layers, size] (or [1, size])
//   references/<name>.json   the locate report (plumbline.locate-report): image SHA-256, match
//                            quality, budget used, generator fingerprint
// Names are restricted like direction names, so files stay inside references/.
import { existsSync, mkdirSync, readdirSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
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
