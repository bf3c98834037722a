// Finding the latent of a reference image without gradients (METHODS §11): best of N random
// starts by the match distance, then CMA-ES in W (whitened by the generator's own W covariance,
// so the search starts isotropic and ‖x‖ is the Mahalanobis distance from the truncation centre),
// then optionally CMA-ES on one W+ row at a time. Every candidate is rendered through the
// generator in batches; the job yields progress between batches, so a caller can show the best so
// far and cancel (by calling `return()` on the generator) between generations.
//
// The result carries the figures that decide whether the match counts as found (full-resolution
// colour SSIM and mean ΔE00, against FOUND_SSIM and FOUND_DELTA_E) and says plainly when it does not.
import { createHash } from 'node:crypto';
import { CmaEs } from '../core/search/cma-es.ts';
import { LatentPrior } from '../core/search/latent-prior.ts';
import { MatchTarget, outputToPlanes, PRIOR_WEIGHT, FOUND_SSIM, FOUND_DELTA_E, type Planes } from '../core/search/match.ts';
import { Random } from '../core/random.ts';
import { PlumblineError } from '../core/errors.ts';
import { LOCATE_BUDGET } from '../protocol/messages.ts';
import type { FloatImage } from '../core/reference-image.ts';
import type { RgbaImage } from '../core/image.ts';
import type { Generator } from './generator.ts';

/** Default evaluation budget: about 3 s of the demo generator, and in the range pix2latent reports
 * for its CMA stage (~4,000 evaluations per inversion, Huh et al. 2020 — METHODS §11). */
export const DEFAULT_BUDGET = 3000;
/** Random starts: six generator batches, ~3% of the default budget. */
export const DEFAULT_STARTS = 96;
/** A CMA-ES run whose best has not improved by STALL_IMPROVEMENT (relative) in STALL_GENERATIONS
 * generations is stuck in a basin; the W stage restarts from the next-best random start. */
const STALL_GENERATIONS = 40;
const STALL_IMPROVEMENT = 0.01;
/** Distinct starts kept for restarts. */
const RESTART_STARTS = 4;
/** Fraction of the budget left after the starts that goes to the W+ rows when space is 'w+'. */
const ROW_STAGE_SHARE = 0.35;
/** Initial CMA-ES step in whitened W units: a random start is typically ‖x‖ ≈ √n from the answer's
 * neighbourhood, and a step of 0.5 per coordinate covers that within a few dozen generations. */
const SIGMA_W = 0.5;
/** Per-row steps are smaller: the W stage has already placed the rows near each other. */
const SIGMA_ROW = 0.2;
/** A stage whose step size has collapsed below this has converged; the rest of its budget goes to the next stage. */
const SIGMA_CONVERGED = 1e-4;
/** With `until`, the full-resolution figures are recomputed at most once per this many evaluations. */
const UNTIL_CHECK_EVERY = 60;
/** Progress is yielded at most this often with a preview image (ms). */
const PREVIEW_INTERVAL_MS = 250;

export interface LocateOptions {
  budget?: number;
  space?: 'w' | 'w+';
  starts?: number;
  seed?: number;
  /** A start point from an encoder: w [size] or w+ [layers · size], replacing the random starts. */
  start?: Float32Array | null;
  /** Stop early once the best's full-resolution figures reach these (budget used is reported). */
  until?: { ssim: number; deltaE: number } | null;
}

export interface LocateProgress {
  done: number;
  total: number;
  label: string;
  stage: 'starts' | 'w' | 'w+';
  /** Search-distance terms of the best so far (compare size, multi-scale SSIM). */
  best: { distance: number; ssim: number; deltaE: number };
  /** The best so far as RGBA8, at most every PREVIEW_INTERVAL_MS and whenever it improved then. */
  preview?: RgbaImage;
}

export interface LocateResult {
  /** The found latent in the generator's input layout: [layers, size] rows (one row for W generators). */
  latent: Float32Array;
  shape: number[];
  space: 'w' | 'w+';
  found: boolean;
  /** Full-resolution figures of the best candidate. */
  ssim: number;
  deltaE: number;
  searchDistance: number;
  mahalanobis: number;
  evaluations: number;
  budget: number;
  stages: { stage: string; evaluations: number; bestDistance: number }[];
  message: string;
  image: RgbaImage;
}

/** The sentence a report gives for the figures (found or not, with the numbers). */
export function verdictMessage(ssim: number, deltaE: number): { found: boolean; message: string } {
  const found = ssim >= FOUND_SSIM && deltaE <= FOUND_DELTA_E;
  const figures = `SSIM ${ssim.toFixed(3)}, mean ΔE00 ${deltaE.toFixed(2)}`;
  return found
    ? { found, message: `found: ${figures} (thresholds SSIM ≥ ${FOUND_SSIM}, mean ΔE00 ≤ ${FOUND_DELTA_E})` }
    : { found, message: `closest found: ${figures} — this generator may not be able to make this image (a match needs SSIM ≥ ${FOUND_SSIM} and mean ΔE00 ≤ ${FOUND_DELTA_E}; a larger budget may get closer)` };
}

export function sha256(bytes: Uint8Array): string {
  return createHash('sha256').update(bytes).digest('hex');
}

function planesToRgba(p: Planes): RgbaImage {
  const n = p.w * p.h;
  const data = new Uint8ClampedArray(n * 4);
  for (let i = 0; i < n; i++) {
    for (let c = 0; c < 3; c++) data[i * 4 + c] = Math.floor(p.data[c * n + i] * 255 + 0.5);
    data[i * 4 + 3] = 255;
  }
  return { width: p.w, height: p.h, data };
}

/** Priors already built, per open generator (read-only once built). */
const priors = new WeakMap<Generator, LatentPrior>();

/**
 * The W prior of a generator: its own samples' covariance when it has a mapping network, N(0, I)
 * otherwise. Built once per open generator: for a 512-dimensional W the covariance and its
 * eigendecomposition take seconds, which every search after the first would otherwise repeat.
 */
export function priorFor(gen: Generator): LatentPrior {
  let prior = priors.get(gen);
  if (!prior) {
    prior = gen.info.hasMapping && gen.centredSamples.length > 0 ? LatentPrior.fromCentredSamples(gen.centre, gen.centredSamples) : LatentPrior.standard(gen.centre);
    priors.set(gen, prior);
  }
  return prior;
}

export async function* locate(gen: Generator, reference: FloatImage, options: LocateOptions = {}): AsyncGenerator<LocateProgress, LocateResult, void> {
  const { layers, size } = gen.layout;
  const { width, height } = gen.imageSize();
  if (reference.width !== width || reference.height !== height) {
    throw new PlumblineError('bad-request', `the reference is ${reference.width} × ${reference.height} but the generator makes ${width} × ${height}; fit it first`);
  }
  const budget = options.budget ?? DEFAULT_BUDGET;
  if (!Number.isInteger(budget) || budget < LOCATE_BUDGET.min) throw new PlumblineError('bad-request', `budget must be an integer of at least ${LOCATE_BUDGET.min} evaluations, got ${options.budget}`);
  const space = options.space ?? 'w';
  if (space === 'w+' && layers < 2) throw new PlumblineError('bad-request', `--space w+ needs a generator with W+ rows; this one takes a single ${gen.layout.space.toUpperCase()} code`);
  const seed = options.seed ?? 1;
  const prior = priorFor(gen);
  const target = new MatchTarget(reference);
  const range = gen.range;
  const per = layers * size;

  let evaluations = 0;
  type Best = { x: Float64Array[]; distance: number; ssim: number; deltaE: number; planes: Planes };
  // Declared through a cast so the checker does not narrow it to null: it is set inside `evaluate`.
  let best = null as Best | null;
  let lastPreview = 0;
  let improvedSincePreview = false;
  const stages: LocateResult['stages'] = [];
  /** The best few starting points, for restarts. */
  const startPoints: { x: Float64Array; distance: number }[] = [];
  let lastCheck = -Infinity;
  let reached = false;
  /** With `until`: have the best's full-resolution figures reached the goal? (checked sparingly) */
  const goalReached = (): boolean => {
    const u = options.until;
    if (!u || reached) return reached;
    const b = best!;
    if (b.ssim < u.ssim || b.deltaE > u.deltaE || evaluations - lastCheck < UNTIL_CHECK_EVERY) return false;
    lastCheck = evaluations;
    const f = target.report(b.planes);
    reached = f.ssim >= u.ssim && f.deltaE <= u.deltaE;
    return reached;
  };

  /** Renders rows-of-x candidates (each an array of `layers` whitened rows) and scores them. */
  const evaluate = async (candidates: Float64Array[][]): Promise<number[]> => {
    const k = candidates.length;
    const codes = new Float32Array(k * per);
    candidates.forEach((rows, i) => rows.forEach((x, l) => prior.toLatent(x, codes, i * per + l * size)));
    // A code far from the distribution can make the generator put out values far outside its
    // range (it refuses those batches); then each candidate is rendered alone and the bad ones
    // rank last instead of ending the search.
    let images: (Float32Array | null)[];
    try {
      const out = await gen.synthesize(codes, k);
      const perImage = out.images.length / k;
      images = Array.from({ length: k }, (_, i) => out.images.subarray(i * perImage, (i + 1) * perImage));
    } catch (err) {
      if (!(err instanceof PlumblineError) || (err.code !== 'output-out-of-range' && err.code !== 'output-not-finite')) throw err;
      images = [];
      for (let i = 0; i < k; i++) {
        try {
          images.push(Float32Array.from((await gen.synthesize(codes.slice(i * per, (i + 1) * per), 1)).images));
        } catch (inner) {
          if (!(inner instanceof PlumblineError) || (inner.code !== 'output-out-of-range' && inner.code !== 'output-not-finite')) throw inner;
          images.push(null);
        }
      }
    }
    const values: number[] = [];
    for (let i = 0; i < k; i++) {
      const image = images[i];
      if (!image) {
        values.push(NaN);
        continue;
      }
      const planes = outputToPlanes(image, 0, width, height, gen.imageLayout, range);
      const t = target.terms(planes);
      let sq = 0;
      for (const x of candidates[i]) for (const v of x) sq += v * v;
      const value = t.distance + (PRIOR_WEIGHT * sq) / (candidates[i].length * size);
      values.push(Number.isFinite(value) ? value : NaN);
      if (Number.isFinite(value) && (!best || value < best.distance)) {
        best = { x: candidates[i].map((x) => Float64Array.from(x)), distance: value, ssim: t.ssim, deltaE: t.deltaE, planes: { w: planes.w, h: planes.h, data: Float32Array.from(planes.data) } };
        improvedSincePreview = true;
      }
    }
    evaluations += k;
    return values;
  };

  const progress = (stage: LocateProgress['stage']): LocateProgress => {
    const b = best;
    const label = `locate (${stage})`;
    if (!b) return { done: evaluations, total: budget, label, stage, best: { distance: Infinity, ssim: 0, deltaE: Infinity } };
    const p: LocateProgress = { done: evaluations, total: budget, label, stage, best: { distance: b.distance, ssim: b.ssim, deltaE: b.deltaE } };
    const now = Date.now();
    if (improvedSincePreview && now - lastPreview >= PREVIEW_INTERVAL_MS) {
      p.preview = planesToRgba(b.planes);
      lastPreview = now;
      improvedSincePreview = false;
    }
    return p;
  };

  // Stage 1: the start. An encoder's code, or the best of N random W samples.
  const broadcast = (x: Float64Array) => Array.from({ length: layers }, () => x);
  if (options.start) {
    const s = options.start;
    if (s.length !== size && s.length !== per) throw new PlumblineError('latent-size-mismatch', `the start code has ${s.length} values; this generator needs ${size} (W) or ${per} (W+)`);
    const rows = s.length === size ? broadcast(prior.toSearch(s)) : Array.from({ length: layers }, (_, l) => prior.toSearch(s.subarray(l * size, (l + 1) * size)));
    await evaluate([rows]);
    // Reported on its own, so a caller sees where the search started (the encoder's match).
    yield progress('starts');
  } else {
    const starts = Math.min(options.starts ?? DEFAULT_STARTS, Math.floor(budget / 4));
    const random = new Random(seed, 0x10ca7e);
    const z = random.normals(starts * gen.layout.zSize);
    const w = await gen.mapZ(z, starts);
    for (let at = 0; at < starts; at += gen.batchSize) {
      const m = Math.min(gen.batchSize, starts - at);
      const xs = Array.from({ length: m }, (_, i) => prior.toSearch(w.subarray((at + i) * size, (at + i + 1) * size)));
      const values = await evaluate(xs.map(broadcast));
      xs.forEach((x, i) => startPoints.push({ x, distance: values[i] }));
      yield progress('starts');
    }
  }
  if (!best) throw new PlumblineError('output-out-of-range', `${gen.synthesisFile}: every starting code gave an image outside the generator's declared range`, { file: gen.synthesisFile });
  stages.push({ stage: 'starts', evaluations, bestDistance: best.distance });

  // Stage 2: CMA-ES in W (all rows share one code). With an encoder's W+ start, the rows' mean.
  const rowBudget = space === 'w+' ? Math.floor((budget - evaluations) * ROW_STAGE_SHARE) : 0;
  const wBudget = budget - evaluations - rowBudget;
  {
    const b = best!;
    const bestStart = new Float64Array(size);
    for (const x of b.x) for (let j = 0; j < size; j++) bestStart[j] += x[j] / b.x.length;
    startPoints.sort((p, q) => p.distance - q.distance);
    const queue = [bestStart, ...startPoints.slice(1, RESTART_STARTS).map((p) => p.x)];
    const stop = evaluations + wBudget;
    for (let run = 0; evaluations + 4 <= stop && !goalReached(); run++) {
      // After the queued starts, restart around the best so far.
      const from = run < queue.length ? queue[run] : (() => {
        const m = new Float64Array(size);
        for (const x of best!.x) for (let j = 0; j < size; j++) m[j] += x[j] / best!.x.length;
        return m;
      })();
      const es = new CmaEs(from, SIGMA_W, { seed: seed + 1 + run });
      if (evaluations + es.params.lambda > stop) break;
      let runBest = Infinity;
      let improvedAt = 0;
      while (evaluations + es.params.lambda <= stop && es.sigma > SIGMA_CONVERGED && !goalReached()) {
        const xs = es.ask();
        const values = await evaluate(xs.map(broadcast));
        es.tell(values);
        const m = Math.min(...values.filter(Number.isFinite));
        if (m < runBest * (1 - STALL_IMPROVEMENT)) {
          runBest = m;
          improvedAt = es.generation;
        }
        yield progress('w');
        if (es.generation - improvedAt >= STALL_GENERATIONS) break;
      }
    }
    stages.push({ stage: 'w', evaluations, bestDistance: best!.distance });
  }

  // Stage 3 (W+): each row in turn, others held at the best so far.
  if (space === 'w+' && !reached) {
    const perRow = Math.floor((budget - evaluations) / layers);
    for (let l = 0; l < layers; l++) {
      const held = best!.x.map((x) => Float64Array.from(x));
      const es = new CmaEs(held[l], SIGMA_ROW, { seed: seed + 2 + l });
      const stop = evaluations + perRow;
      while (evaluations + es.params.lambda <= stop && es.sigma > SIGMA_CONVERGED && !goalReached()) {
        const xs = es.ask();
        es.tell(await evaluate(xs.map((x) => held.map((h, r) => (r === l ? x : h)))));
        yield progress('w+');
      }
    }
    stages.push({ stage: 'w+', evaluations, bestDistance: best!.distance });
  }

  const b = best!;
  const latent = new Float32Array(per);
  b.x.forEach((x, l) => prior.toLatent(x, latent, l * size));
  const figures = target.report(b.planes);
  const { found, message } = verdictMessage(figures.ssim, figures.deltaE);
  const meanRow = new Float32Array(size);
  for (let l = 0; l < layers; l++) for (let j = 0; j < size; j++) meanRow[j] += latent[l * size + j] / layers;
  return {
    latent,
    shape: layers > 1 ? [layers, size] : [size],
    space,
    found,
    ssim: figures.ssim,
    deltaE: figures.deltaE,
    searchDistance: b.distance,
    mahalanobis: prior.mahalanobis(meanRow),
    evaluations,
    budget,
    stages,
    message,
    image: planesToRgba(b.planes),
  };
}

export const LIKENESS_CAUTION = 'Projecting a photograph of a real person reproduces their likeness: have their consent, and follow your studio’s policy and local law.';

/** The report written beside the latent; also what the app stores with a named reference. */
export function locateReport(r: LocateResult, extra: { image: string; imageSha256: string; generator: { name: string; fingerprint: string }; notes: string[]; npy: string; start: string }) {
  return {
    format: 'plumbline.locate-report',
    version: 1,
    createdAt: new Date().toISOString(),
    image: { file: extra.image, sha256: extra.imageSha256, notes: extra.notes },
    generator: extra.generator,
    latent: { file: extra.npy, shape: [1, ...r.shape], space: r.space, mahalanobisFromCentre: r.mahalanobis },
    match: { found: r.found, ssim: r.ssim, meanDeltaE00: r.deltaE, searchDistance: r.searchDistance, message: r.message },
    budget: { evaluations: r.evaluations, budget: r.budget, stages: r.stages, start: extra.start },
    caution: LIKENESS_CAUTION,
  };
}
