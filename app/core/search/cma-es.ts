// The (μ/μ_w, λ)-CMA-ES, implemented from the definitions in N. Hansen, "The CMA Evolution
// Strategy: A Tutorial", arXiv:1604.00772 (2016/2023): sampling (eqs. 38–40), selection and
// recombination (41–42), step-size control by cumulative step-size adaptation (43–44), the
// covariance update with rank-one and rank-μ terms (45–47), h_σ and δ(h_σ), and the default
// strategy parameters of the tutorial's Table 1. Only the non-negative ("positive") recombination
// weights are used (the tutorial's weights for i ≤ μ; the active variant's negative weights are left
// out), i.e. the classic (μ/μ_w, λ)-CMA-ES.
//
// The interface is ask/tell so a caller can evaluate a whole population as one batch (for example
// through an image generator) and check for cancellation between generations. Nothing here is
// asynchronous and nothing draws random numbers except through the seeded `Random` passed in.
import { EigenvalueDecomposition, Matrix } from 'ml-matrix';
import { Random } from '../random.ts';

export interface CmaEsOptions {
  /** Population size λ; default 4 + ⌊3 ln n⌋ (Table 1). */
  populationSize?: number;
  /** Seed for the sampler; the same seed, start and objective give the same run. */
  seed?: number;
}

/** Strategy parameters of Table 1 (with non-negative weights only). */
export interface CmaEsParameters {
  n: number;
  lambda: number;
  mu: number;
  weights: Float64Array;
  muEff: number;
  cSigma: number;
  dSigma: number;
  cC: number;
  c1: number;
  cMu: number;
  /** E‖N(0, I)‖ ≈ √n (1 − 1/(4n) + 1/(21n²)). */
  chiN: number;
}

/** Default strategy parameters for dimension n, Hansen's tutorial Table 1. */
export function defaultParameters(n: number, populationSize?: number): CmaEsParameters {
  if (!Number.isInteger(n) || n < 1) throw new RangeError(`CMA-ES needs a dimension of at least 1, got ${n}`);
  const lambda = populationSize ?? 4 + Math.floor(3 * Math.log(n));
  if (!Number.isInteger(lambda) || lambda < 2) throw new RangeError(`population size must be an integer ≥ 2, got ${lambda}`);
  const mu = Math.floor(lambda / 2);
  // w'_i = ln((λ + 1)/2) − ln i, positive for i ≤ μ; normalised to sum 1 over i ≤ μ.
  const raw = Float64Array.from({ length: mu }, (_, i) => Math.log((lambda + 1) / 2) - Math.log(i + 1));
  const sum = raw.reduce((a, b) => a + b, 0);
  const weights = raw.map((w) => w / sum);
  const muEff = 1 / weights.reduce((a, w) => a + w * w, 0);
  const alphaCov = 2;
  const cSigma = (muEff + 2) / (n + muEff + 5);
  const dSigma = 1 + 2 * Math.max(0, Math.sqrt((muEff - 1) / (n + 1)) - 1) + cSigma;
  const cC = (4 + muEff / n) / (n + 4 + (2 * muEff) / n);
  const c1 = alphaCov / ((n + 1.3) ** 2 + muEff);
  const cMu = Math.min(1 - c1, (alphaCov * (muEff - 2 + 1 / muEff)) / ((n + 2) ** 2 + (alphaCov * muEff) / 2));
  const chiN = Math.sqrt(n) * (1 - 1 / (4 * n) + 1 / (21 * n * n));
  return { n, lambda, mu, weights, muEff, cSigma, dSigma, cC, c1, cMu, chiN };
}

export class CmaEs {
  readonly params: CmaEsParameters;
  readonly mean: Float64Array;
  sigma: number;
  /** Covariance matrix C, row-major n×n. */
  readonly C: Float64Array;
  #B: Float64Array; // eigenvectors of C as columns, row-major
  #D: Float64Array; // square roots of C's eigenvalues
  #pSigma: Float64Array;
  #pC: Float64Array;
  #random: Random;
  #generation = 0;
  #evaluations = 0;
  #eigenAt = 0; // evaluations at the last eigendecomposition
  #pending: { x: Float64Array[]; y: Float64Array[] } | null = null;
  best: { x: Float64Array; f: number } | null = null;

  constructor(start: ArrayLike<number>, sigma: number, options: CmaEsOptions = {}) {
    const n = start.length;
    if (!(sigma > 0)) throw new RangeError(`initial step size must be positive, got ${sigma}`);
    this.params = defaultParameters(n, options.populationSize);
    this.mean = Float64Array.from(start);
    this.sigma = sigma;
    this.C = new Float64Array(n * n);
    this.#B = new Float64Array(n * n);
    for (let i = 0; i < n; i++) this.C[i * n + i] = this.#B[i * n + i] = 1;
    this.#D = new Float64Array(n).fill(1);
    this.#pSigma = new Float64Array(n);
    this.#pC = new Float64Array(n);
    this.#random = new Random(options.seed ?? 1, 0xc3a);
  }

  get generation(): number {
    return this.#generation;
  }
  get evaluations(): number {
    return this.#evaluations;
  }
  /** Condition number of C (ratio of its largest to smallest eigenvalue at the last decomposition). */
  get condition(): number {
    let lo = Infinity;
    let hi = 0;
    for (const d of this.#D) {
      lo = Math.min(lo, d * d);
      hi = Math.max(hi, d * d);
    }
    return hi / lo;
  }

  /** λ new candidates x_k = m + σ B D z_k, z_k ~ N(0, I) (eqs. 38–40). */
  ask(): Float64Array[] {
    const { n, lambda } = this.params;
    const xs: Float64Array[] = [];
    const ys: Float64Array[] = [];
    const dz = new Float64Array(n);
    for (let k = 0; k < lambda; k++) {
      for (let i = 0; i < n; i++) dz[i] = this.#D[i] * this.#random.normal();
      const y = new Float64Array(n);
      for (let i = 0; i < n; i++) {
        let s = 0;
        for (let j = 0; j < n; j++) s += this.#B[i * n + j] * dz[j];
        y[i] = s;
      }
      const x = new Float64Array(n);
      for (let i = 0; i < n; i++) x[i] = this.mean[i] + this.sigma * y[i];
      xs.push(x);
      ys.push(y);
    }
    this.#pending = { x: xs, y: ys };
    return xs.map((x) => Float64Array.from(x));
  }

  /** Updates m, p_σ, σ, p_c and C from the values (to be minimised) of the last asked population. */
  tell(values: ArrayLike<number>): void {
    const pending = this.#pending;
    if (!pending) throw new Error('tell() without a preceding ask()');
    const p = this.params;
    const { n, mu, weights, muEff, cSigma, dSigma, cC, c1, cMu, chiN } = p;
    if (values.length !== pending.x.length) throw new RangeError(`tell() got ${values.length} values for ${pending.x.length} candidates`);
    this.#pending = null;
    // NaN ranks last: a failed evaluation never becomes a parent.
    const order = Array.from(values, (v, i) => [Number.isNaN(v) ? Infinity : v, i] as const).sort((a, b) => a[0] - b[0]);
    this.#evaluations += values.length;
    this.#generation++;
    const [bestValue, bestIndex] = order[0];
    if (!this.best || bestValue < this.best.f) this.best = { x: Float64Array.from(pending.x[bestIndex]), f: bestValue };

    // ⟨y⟩_w = Σ w_i y_{i:λ} (eq. 41); m ← m + c_m σ ⟨y⟩_w with c_m = 1 (eq. 42).
    const yw = new Float64Array(n);
    for (let i = 0; i < mu; i++) {
      const y = pending.y[order[i][1]];
      for (let j = 0; j < n; j++) yw[j] += weights[i] * y[j];
    }
    for (let j = 0; j < n; j++) this.mean[j] += this.sigma * yw[j];

    // p_σ ← (1 − c_σ) p_σ + √(c_σ(2 − c_σ) μ_eff) C^{−1/2} ⟨y⟩_w, with C^{−1/2} = B D⁻¹ Bᵀ (eq. 43).
    const bty = new Float64Array(n);
    for (let i = 0; i < n; i++) {
      let s = 0;
      for (let j = 0; j < n; j++) s += this.#B[j * n + i] * yw[j];
      bty[i] = s / this.#D[i];
    }
    const cs = Math.sqrt(cSigma * (2 - cSigma) * muEff);
    for (let i = 0; i < n; i++) {
      let s = 0;
      for (let j = 0; j < n; j++) s += this.#B[i * n + j] * bty[j];
      this.#pSigma[i] = (1 - cSigma) * this.#pSigma[i] + cs * s;
    }
    const psNorm = Math.hypot(...this.#pSigma);

    // h_σ: stall the rank-one update when ‖p_σ‖ is large (eq. 45 and the text after it).
    const hSigma = psNorm / Math.sqrt(1 - (1 - cSigma) ** (2 * this.#generation)) < (1.4 + 2 / (n + 1)) * chiN ? 1 : 0;
    const cc = Math.sqrt(cC * (2 - cC) * muEff);
    for (let i = 0; i < n; i++) this.#pC[i] = (1 - cC) * this.#pC[i] + hSigma * cc * yw[i];

    // C ← (1 + c_1 δ(h_σ) − c_1 − c_μ Σw_j) C + c_1 p_c p_cᵀ + c_μ Σ w_i y_i y_iᵀ (eq. 47), Σw_j = 1.
    const deltaH = (1 - hSigma) * cC * (2 - cC);
    const keep = 1 + c1 * deltaH - c1 - cMu;
    const ySel = Array.from({ length: mu }, (_, i) => pending.y[order[i][1]]);
    for (let a = 0; a < n; a++)
      for (let b = 0; b <= a; b++) {
        let rankMu = 0;
        for (let i = 0; i < mu; i++) rankMu += weights[i] * ySel[i][a] * ySel[i][b];
        const v = keep * this.C[a * n + b] + c1 * this.#pC[a] * this.#pC[b] + cMu * rankMu;
        this.C[a * n + b] = v;
        this.C[b * n + a] = v;
      }

    // σ ← σ exp((c_σ/d_σ)(‖p_σ‖/E‖N(0,I)‖ − 1)) (eq. 44).
    this.sigma *= Math.exp((cSigma / dSigma) * (psNorm / chiN - 1));

    // Decompose C lazily, about every λ/((c_1 + c_μ) n 10) evaluations (tutorial, Appendix B.2):
    // O(n²) work per evaluation instead of O(n³) per generation.
    if (this.#evaluations - this.#eigenAt > p.lambda / ((c1 + cMu) * n * 10)) this.#decompose();
  }

  #decompose(): void {
    const n = this.params.n;
    this.#eigenAt = this.#evaluations;
    const m = new Matrix(n, n);
    for (let i = 0; i < n; i++) for (let j = 0; j < n; j++) m.set(i, j, this.C[i * n + j]);
    const e = new EigenvalueDecomposition(m, { assumeSymmetric: true });
    const values = e.realEigenvalues;
    const V = e.eigenvectorMatrix;
    // C stays positive definite in exact arithmetic; clamp round-off at 1e-20 relative.
    const top = Math.max(...values);
    for (let j = 0; j < n; j++) {
      this.#D[j] = Math.sqrt(Math.max(values[j], top * 1e-20));
      for (let i = 0; i < n; i++) this.#B[i * n + j] = V.get(i, j);
    }
  }
}
