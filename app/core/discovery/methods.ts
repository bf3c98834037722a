// Direction discovery from published methods, implemented from their definitions:
//  - PCA of sampled W codes (Härkönen et al. 2020, "GANSpace"): unit principal axes, slider unit
//    = the component's standard deviation;
//  - closed-form factorization (Shen & Zhou 2021, "SeFa"): eigenvectors of AᵀA, A the latent's
//    first affine weights with each output channel's weight vector scaled to unit norm;
//  - linear attribute boundaries (Shen et al. 2020, "InterFaceGAN"): a linear SVM separating the
//    top and bottom fraction of samples by an attribute score, in the latent's own coordinates;
//    the unit normal is the direction (whitening with shrinkage is an option);
//  - difference of means between codes tagged as having and lacking an attribute.
// Each returns unit vectors plus the numbers a provenance record needs.
import { Matrix, solve } from 'ml-matrix';
import { Random } from '../random.ts';
import { covariance, fixSign, symmetricEigen, unit } from './linalg.ts';

export interface FoundDirection {
  vector: Float32Array;
  /** For PCA: the component's standard deviation; for SeFa: the eigenvalue; for boundaries: held-out accuracy. */
  score: number;
  label: string;
}

export function pcaDirections(samples: Float32Array, d: number, k: number): { directions: FoundDirection[]; explained: number[] } {
  const { cov } = covariance(samples, d);
  const { values, vectors } = symmetricEigen(cov);
  const total = values.reduce((a, b) => a + Math.max(0, b), 0);
  const n = Math.min(k, d);
  return {
    directions: vectors.slice(0, n).map((v, i) => ({ vector: v, score: Math.sqrt(Math.max(0, values[i])), label: `pc${i}` })),
    explained: values.slice(0, n).map((v) => Math.max(0, v) / total),
  };
}

/**
 * SeFa from weights [D, C_j] (row-major, the latent multiplies from the left: y = w·W_j).
 * Concatenates along C, scales every output channel's column to unit norm, eigen-decomposes W·Wᵀ.
 */
export function sefaDirections(weights: { data: Float32Array; rows: number; cols: number }[], d: number, k: number): FoundDirection[] {
  const S = new Matrix(d, d);
  for (const w of weights) {
    if (w.rows !== d) throw new RangeError(`SeFa weight has ${w.rows} rows; the latent size is ${d}`);
    for (let c = 0; c < w.cols; c++) {
      let norm = 0;
      for (let r = 0; r < d; r++) norm += w.data[r * w.cols + c] ** 2;
      norm = Math.sqrt(norm) || 1;
      for (let a = 0; a < d; a++) {
        const va = w.data[a * w.cols + c] / norm;
        if (va === 0) continue;
        for (let b = a; b < d; b++) S.set(a, b, S.get(a, b) + va * (w.data[b * w.cols + c] / norm));
      }
    }
  }
  for (let a = 0; a < d; a++) for (let b = 0; b < a; b++) S.set(a, b, S.get(b, a));
  const { values, vectors } = symmetricEigen(S);
  return vectors.slice(0, Math.min(k, d)).map((v, i) => ({ vector: v, score: values[i], label: `sefa${i}` }));
}

export interface BoundaryResult {
  vector: Float32Array;
  accuracy: number;
  trainSize: number;
  testSize: number;
  perSide: number;
}

/**
 * Ledoit–Wolf shrinkage intensity for the covariance of `codes` (Ledoit & Wolf 2004, "A
 * well-conditioned estimator for large-dimensional covariance matrices"; the form of
 * scikit-learn's ledoit_wolf_shrinkage, from memory): with centred X (n × p), S = XᵀX/n,
 * μ = tr S/p, δ = ‖S − μI‖²_F/p, β = (Σ_i ‖x_i‖⁴/n − ‖S‖²_F)/(n p), shrinkage = min(β, δ)/δ.
 * The shrunk estimate is (1 − λ)S + λμI.
 */
export function ledoitWolfShrinkage(codes: Float32Array, d: number): number {
  const n = codes.length / d;
  const mean = new Float64Array(d);
  for (let i = 0; i < n; i++) for (let k = 0; k < d; k++) mean[k] += codes[i * d + k] / n;
  const S = new Float64Array(d * d);
  let fourth = 0;
  const x = new Float64Array(d);
  for (let i = 0; i < n; i++) {
    let sq = 0;
    for (let k = 0; k < d; k++) {
      x[k] = codes[i * d + k] - mean[k];
      sq += x[k] * x[k];
    }
    fourth += sq * sq;
    for (let a = 0; a < d; a++) for (let b = 0; b < d; b++) S[a * d + b] += (x[a] * x[b]) / n;
  }
  let trace = 0;
  let frob = 0;
  for (let a = 0; a < d; a++) trace += S[a * d + a];
  for (let k = 0; k < d * d; k++) frob += S[k] * S[k];
  const mu = trace / d;
  const delta = (frob - 2 * mu * trace + d * mu * mu) / d;
  const beta = Math.min((fourth / n - frob) / (n * d), delta);
  return delta > 0 ? Math.max(0, beta / delta) : 0;
}

export interface BoundaryOptions {
  fraction?: number;
  seed?: number;
  C?: number;
  epochs?: number;
  /**
   * Fit in whitened coordinates and map the normal back with Σ^{-1/2} (an option; the published
   * method fits in the latent's own coordinates). Σ is shrunk towards μI by `shrinkage` (a number
   * in [0, 1]) or by the Ledoit–Wolf intensity ('ledoit-wolf', the default when whitening).
   */
  whiten?: boolean;
  shrinkage?: number | 'ledoit-wolf';
}

/**
 * InterFaceGAN boundary (Shen et al. 2020): keep the top and bottom `fraction` of samples by
 * score, split 70/30 (shuffled with `seed`), fit a linear SVM (C = 1, hinge loss) by dual
 * coordinate descent (Hsieh et al. 2008), report held-out accuracy. Fitted in the latent's own
 * coordinates, as published; the intercept is dropped; the unit normal points towards higher scores.
 */
export function linearBoundary(codes: Float32Array, d: number, scores: ArrayLike<number>, options: BoundaryOptions = {}): BoundaryResult & { shrinkage: number | null } {
  const n = scores.length;
  if (codes.length !== n * d) throw new RangeError(`${n} scores for ${codes.length / d} codes`);
  if (options.whiten) {
    // Whitening maps the normal back with Σ^{-1/2}, which multiplies the estimation noise along
    // low-variance axes by up to √(condition number); shrinking Σ towards μI bounds that.
    const lambda = options.shrinkage === undefined || options.shrinkage === 'ledoit-wolf' ? ledoitWolfShrinkage(codes, d) : options.shrinkage;
    if (!(lambda >= 0 && lambda <= 1)) throw new RangeError(`shrinkage must be in [0, 1]; got ${lambda}`);
    const { mean, cov } = covariance(codes, d);
    let mu = 0;
    for (let k = 0; k < d; k++) mu += cov.get(k, k) / d;
    for (let a = 0; a < d; a++) for (let b = 0; b < d; b++) cov.set(a, b, (1 - lambda) * cov.get(a, b) + (a === b ? lambda * mu : 0));
    const { values, vectors } = symmetricEigen(cov);
    const inv = values.map((v) => 1 / Math.sqrt(Math.max(v, 1e-12 * values[0])));
    const white = new Float32Array(codes.length);
    for (let i = 0; i < n; i++)
      for (let k = 0; k < d; k++) {
        let s = 0;
        for (let j = 0; j < d; j++) s += vectors[k][j] * (codes[i * d + j] - mean[j]);
        white[i * d + k] = s * inv[k];
      }
    const r = linearBoundary(white, d, scores, { ...options, whiten: false });
    const back = new Float64Array(d);
    for (let k = 0; k < d; k++) for (let j = 0; j < d; j++) back[j] += vectors[k][j] * inv[k] * r.vector[k];
    return { ...r, vector: unit(back), shrinkage: lambda };
  }
  const fraction = options.fraction ?? 0.1;
  const perSide = Math.min(Math.floor(n / 2), fraction <= 1 ? Math.max(2, Math.round(n * fraction)) : Math.round(fraction));
  const order = Array.from({ length: n }, (_, i) => i).sort((a, b) => scores[b] - scores[a]);
  const chosen = [...order.slice(0, perSide).map((i) => [i, 1] as const), ...order.slice(n - perSide).map((i) => [i, -1] as const)];
  const rng = new Random(options.seed ?? 0, 0xb0);
  for (let i = chosen.length - 1; i > 0; i--) {
    const j = rng.int(i + 1);
    [chosen[i], chosen[j]] = [chosen[j], chosen[i]];
  }
  const nTrain = Math.round(chosen.length * 0.7);
  const train = chosen.slice(0, nTrain);
  const test = chosen.slice(nTrain);
  // Centre on the training mean so the dropped intercept matters less (codes are not zero-mean in W).
  const mean = new Float64Array(d);
  for (const [i] of train) for (let k = 0; k < d; k++) mean[k] += codes[i * d + k] / train.length;
  const x = (i: number, k: number) => codes[i * d + k] - mean[k];
  const C = options.C ?? 1;
  const w = new Float64Array(d + 1); // last entry: bias on a constant feature 1
  const alpha = new Float64Array(train.length);
  const qii = train.map(([i]) => {
    let s = 1;
    for (let k = 0; k < d; k++) s += x(i, k) ** 2;
    return s;
  });
  const epochs = options.epochs ?? 200;
  for (let epoch = 0; epoch < epochs; epoch++) {
    let maxChange = 0;
    for (let t = 0; t < train.length; t++) {
      const [i, y] = train[t];
      let g = w[d];
      for (let k = 0; k < d; k++) g += w[k] * x(i, k);
      g = y * g - 1;
      const old = alpha[t];
      const next = Math.min(C, Math.max(0, old - g / qii[t]));
      const delta = (next - old) * y;
      if (delta !== 0) {
        for (let k = 0; k < d; k++) w[k] += delta * x(i, k);
        w[d] += delta;
        alpha[t] = next;
        maxChange = Math.max(maxChange, Math.abs(next - old));
      }
    }
    if (maxChange < 1e-6) break;
  }
  let correct = 0;
  for (const [i, y] of test) {
    let f = w[d];
    for (let k = 0; k < d; k++) f += w[k] * x(i, k);
    if ((f >= 0 ? 1 : -1) === y) correct++;
  }
  return { vector: unit(w.subarray(0, d)), accuracy: test.length ? correct / test.length : NaN, trainSize: train.length, testSize: test.length, perSide, shrinkage: null };
}

/** Unit difference of the means of codes tagged positive and negative. */
export function differenceOfMeans(positive: Float32Array, negative: Float32Array, d: number): Float32Array {
  const np = positive.length / d;
  const nn = negative.length / d;
  if (np < 1 || nn < 1) throw new RangeError('difference of means needs at least one code on each side');
  const diff = new Float64Array(d);
  for (let i = 0; i < np; i++) for (let k = 0; k < d; k++) diff[k] += positive[i * d + k] / np;
  for (let i = 0; i < nn; i++) for (let k = 0; k < d; k++) diff[k] -= negative[i * d + k] / nn;
  return unit(diff);
}

/**
 * Repair: the smallest change to n that zeroes its component along each `remove` boundary —
 * n' = n − C(CᵀC)⁻¹Cᵀn, InterFaceGAN's conditional manipulation for k conditions — optionally
 * while holding its component along each `hold` boundary fixed (so removing one leak does not
 * create another through correlated boundaries): n' = n − A(AᵀA)⁻¹[Rᵀn; 0], A = [R H].
 * The result is renormalised and keeps the parent's orientation.
 */
export function projectOff(direction: ArrayLike<number>, remove: ArrayLike<number>[], hold: ArrayLike<number>[] = []): Float32Array {
  const d = direction.length;
  if (remove.length === 0) return unit(direction);
  const all = [...remove, ...hold];
  for (const b of all) if (b.length !== d) throw new RangeError(`boundary of length ${b.length} for a direction of length ${d}`);
  if (all.length >= d) throw new RangeError(`${all.length} boundaries leave no freedom in ${d} dimensions`);
  const A = new Matrix(d, all.length);
  all.forEach((b, j) => { for (let i = 0; i < d; i++) A.set(i, j, b[i]); });
  const n = Matrix.columnVector(Array.from(direction));
  const rhs = A.transpose().mmul(n);
  for (let j = remove.length; j < all.length; j++) rhs.set(j, 0, 0);
  const coef = solve(A.transpose().mmul(A), rhs);
  const out = n.sub(A.mmul(coef)).getColumn(0);
  const norm = Math.hypot(...out);
  if (norm < 1e-6 * Math.hypot(...Array.from(direction))) throw new RangeError('the direction lies inside the span of the boundaries: nothing is left after the projection');
  return fixSignLike(unit(out), direction);
}

/** Keeps the repaired direction pointing the same way as its parent. */
function fixSignLike(v: Float32Array, parent: ArrayLike<number>): Float32Array {
  let s = 0;
  for (let i = 0; i < v.length; i++) s += v[i] * parent[i];
  return s < 0 ? v.map((x) => -x) : v;
}

export { fixSign };
