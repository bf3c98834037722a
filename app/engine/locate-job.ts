// The engine-host side of "Start from an image…": the locate job as the host runs jobs (an async
// generator of progress that awaits the host's checkpoint between generations), the preview
// events it sends, pinning the last result as a named reference, and the codes of a reference for
// previews. Kept apart from the host so wiring it into a handler is a few lines.
import type { EventData, Outcome, Params, ReferenceInfo } from '../protocol/messages.ts';
import { PlumblineError } from '../core/errors.ts';
import { decodeReference, type FloatImage } from '../core/reference-image.ts';
import { differenceImage } from '../core/search/match.ts';
import type { RgbaImage } from '../core/image.ts';
import type { Generator } from './generator.ts';
import { locate, sha256, locateReport, LIKENESS_CAUTION } from './locate.ts';
import { listReferences, loadReference, saveReference, type StoredReference } from './references.ts';

type Progress = { done: number; total: number; label: string };

/** What pinning needs from the last finished locate run. */
export interface LastLocate {
  latent: Float32Array;
  shape: number[];
  report: StoredReference['report'];
}

function toWire(img: RgbaImage) {
  return { width: img.width, height: img.height, rgba: new Uint8Array(img.data.buffer, img.data.byteOffset, img.data.byteLength) };
}

function floatFromRgba(img: RgbaImage): FloatImage {
  const n = img.width * img.height;
  const data = new Float32Array(n * 3);
  for (let p = 0; p < n; p++) for (let c = 0; c < 3; c++) data[p * 3 + c] = img.data[p * 4 + c] / 255;
  return { width: img.width, height: img.height, data };
}

function floatToRgba(img: FloatImage): RgbaImage {
  const n = img.width * img.height;
  const data = new Uint8ClampedArray(n * 4);
  for (let p = 0; p < n; p++) {
    for (let c = 0; c < 3; c++) data[p * 4 + c] = Math.round(img.data[p * 3 + c] * 255);
    data[p * 4 + 3] = 255;
  }
  return { width: img.width, height: img.height, data };
}

export async function* locateJob(
  gen: Generator,
  p: Params<'locate.run'>,
  hooks: { preview: (d: Omit<EventData<'locate.preview'>, 'requestId'>) => void; finished: (last: LastLocate) => void },
): AsyncGenerator<Progress, Outcome<'locate.run'>, void> {
  const { width, height } = gen.imageSize();
  const ref = decodeReference(p.image, p.fileName, width, height);
  const job = locate(gen, ref.image, { budget: p.budget, space: p.space, seed: p.seed });
  // The caller awaits its checkpoint (cancellation, waiting previews) at every yield.
  let step = await job.next();
  while (!step.done) {
    const s = step.value;
    if (s.preview) hooks.preview({ image: toWire(s.preview), ssim: s.best.ssim, deltaE: s.best.deltaE, done: s.done, total: s.total });
    yield { done: s.done, total: s.total, label: `locate (${s.stage})` };
    step = await job.next();
  }
  const r = step.value;
  const imageSha256 = sha256(p.image);
  const report = locateReport(r, { image: p.fileName, imageSha256, generator: { name: gen.info.name, fingerprint: gen.info.fingerprint }, notes: ref.notes, npy: '', start: 'best of random W samples' });
  hooks.finished({ latent: r.latent, shape: r.shape, report });
  return {
    found: r.found,
    ssim: r.ssim,
    deltaE: r.deltaE,
    message: r.message,
    evaluations: r.evaluations,
    budget: r.budget,
    imageSha256,
    notes: ref.notes,
    reference: toWire(floatToRgba(ref.image)),
    match: toWire(r.image),
    difference: toWire(differenceImage(ref.image, floatFromRgba(r.image))),
    caution: LIKENESS_CAUTION,
  };
}

function info(name: string, report: StoredReference['report']): ReferenceInfo {
  return { name, ssim: report.match.ssim, deltaE: report.match.meanDeltaE00, found: report.match.found, imageSha256: report.image.sha256, evaluations: report.budget.evaluations, budget: report.budget.budget };
}

export function pinReference(projectDir: string | null, name: string, last: LastLocate | null): ReferenceInfo {
  if (!projectDir) throw new PlumblineError('bad-request', 'pinning a reference needs an open project');
  if (!last) throw new PlumblineError('bad-request', 'nothing to pin: run "Start from an image…" to the end first');
  saveReference(projectDir, name, last.latent, last.shape, last.report);
  return info(name, last.report);
}

export function referenceInfos(projectDir: string | null): ReferenceInfo[] {
  if (!projectDir) return [];
  return listReferences(projectDir).map((n) => info(n, loadReference(projectDir, n).report));
}

/** The stored latent of a reference as codes [layers · size] for this generator (W repeated on every row). */
export function referenceCodes(projectDir: string | null, name: string, gen: Generator): Float32Array {
  if (!projectDir) throw new PlumblineError('bad-request', `reference '${name}' needs an open project`);
  const r = loadReference(projectDir, name);
  if (r.report.generator.fingerprint !== gen.info.fingerprint) {
    throw new PlumblineError('latent-size-mismatch', `reference '${name}' was found in generator ${r.report.generator.name} (${r.report.generator.fingerprint.slice(0, 12)}…), not the one open (${gen.info.fingerprint.slice(0, 12)}…)`);
  }
  const { layers, size } = gen.layout;
  if (r.latent.length === layers * size) return Float32Array.from(r.latent);
  if (r.latent.length === size) {
    const out = new Float32Array(layers * size);
    for (let l = 0; l < layers; l++) out.set(r.latent, l * size);
    return out;
  }
  throw new PlumblineError('npy-shape', `reference '${name}' holds ${r.latent.length} values; this generator needs ${size} or ${layers * size}`);
}
