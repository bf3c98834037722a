// Fitting an attribute the lead defines: feature standardisation, L2-regularised logistic
// regression (tags: has it / lacks it) and ridge regression (ratings), deterministic k-fold
// cross-validation, the AUC and R² it reports, and the accuracy floor below which a defined
// attribute is refused. Pure arithmetic on plain arrays; no runtime dependencies.
import { Random } from '../random.ts';

/** L2 penalty λ on the standardised weights (the intercept is not penalised). See LAMBDA_NOTE. */
export const LOGISTIC_LAMBDA = 0.1;
export const RIDGE_LAMBDA = 1;
/**
 * Why these λ: they are fixed, not tuned per attribute (tuning on the same folds would make the
 * reported accuracy optimistic). With family-balanced standardisation each descriptor family has
 * total variance 1, so λ is on the scale of whole families. They were chosen once, on tags derived
 * from the demo generator's gem, outline and glow outputs (120 seeds, terciles), where the
 * cross-validated AUC is flat within ±0.01 for λ in 0.003–0.3 and R² keeps improving up to λ ≈ 1.
 */
export const LAMBDA_NOTE = 'λ fixed (0.1 logistic, 1 ridge) on family-balanced standardised features; not tuned per attribute';

/** Folds of the cross-validation (common practice: 5 or 10; 5 keeps 4/5 of a small tag set for fitting). */
export const CV_FOLDS = 5;

/**
 * Accuracy floors. AUC 0.75: a random has/lacks pair is ordered correctly three times in four; below
 * about 0.7–0.75 discrimination is conventionally called poor (Hosmer & Lemeshow, Applied Logistic
 * Regression, 2000: 0.7–0.8 "acceptable"; from memory). R² 0.5: the scorer explains at least half
 * the variance of the ratings (correlation ≥ 0.71). Below either, a leak measured through the scorer
 * would be as much the scorer's error as the direction's effect.
 */
export const AUC_FLOOR = 0.75;
export const R2_FLOOR = 0.5;

/** Fewer examples than this per class (tags) or in all (ratings): the cross-validated estimate itself is noisy (METHODS §9.4). */
export const FEW_EXAMPLES = 20;

export interface Standardisation {
  mean: number[];
  /** Population standard deviation; 0 for a constant feature (it then contributes nothing). */
  std: number[];
}

/**
 * Column means and standard deviations of rows (NaN entries are skipped). With `families` (a
 * family name per column), each column's scale is further multiplied by √(size of its family), so
 * every family has total variance 1 after standardising and the L2 penalty treats the families
 * alike rather than favouring the one with most columns (a group-balanced ridge prior; derived,
 * common practice when blocks of very different size are concatenated).
 */
export function fitStandardisation(rows: ArrayLike<number>[], families?: string[]): Standardisation {
  const d = rows[0]?.length ?? 0;
  const mean = new Array<number>(d).fill(0);
  const std = new Array<number>(d).fill(0);
  for (let j = 0; j < d; j++) {
    let s = 0;
    let n = 0;
    for (const r of rows) if (Number.isFinite(r[j])) (s += r[j]), n++;
    const m = n ? s / n : 0;
    let v = 0;
    for (const r of rows) if (Number.isFinite(r[j])) v += (r[j] - m) ** 2;
    mean[j] = m;
    const sd = n ? Math.sqrt(v / n) : 0;
    std[j] = sd > 1e-12 * Math.max(1, Math.abs(m)) ? sd : 0;
  }
  if (families) {
    const size = new Map<string, number>();
    for (const f of families) size.set(f, (size.get(f) ?? 0) + 1);
    for (let j = 0; j < d; j++) std[j] *= Math.sqrt(size.get(families[j])!);
  }
  return { mean, std };
}

/** (x − mean)/std; a constant feature or a NaN ("not measurable") becomes 0, the training mean. */
export function standardise(row: ArrayLike<number>, s: Standardisation): Float64Array {
  const out = new Float64Array(s.mean.length);
  for (let j = 0; j < out.length; j++) out[j] = s.std[j] > 0 && Number.isFinite(row[j]) ? (row[j] - s.mean[j]) / s.std[j] : 0;
  return out;
}

/** Solves A x = b for a symmetric positive-definite A (row-major n×n) by Cholesky; A is not modified. */
export function choleskySolve(A: Float64Array, b: Float64Array, n: number): Float64Array {
  const L = new Float64Array(n * n);
  for (let i = 0; i < n; i++)
    for (let j = 0; j <= i; j++) {
      let s = A[i * n + j];
      for (let k = 0; k < j; k++) s -= L[i * n + k] * L[j * n + k];
      if (i === j) {
        if (!(s > 0)) throw new Error(`matrix is not positive definite (pivot ${i} is ${s})`);
        L[i * n + i] = Math.sqrt(s);
      } else L[i * n + j] = s / L[j * n + j];
    }
  const y = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    let s = b[i];
    for (let k = 0; k < i; k++) s -= L[i * n + k] * y[k];
    y[i] = s / L[i * n + i];
  }
  const x = new Float64Array(n);
  for (let i = n - 1; i >= 0; i--) {
    let s = y[i];
    for (let k = i + 1; k < n; k++) s -= L[k * n + i] * x[k];
    x[i] = s / L[i * n + i];
  }
  return x;
}

export interface LinearModel {
  weights: Float64Array;
  intercept: number;
}

const dot = (w: ArrayLike<number>, x: ArrayLike<number>) => {
  let s = 0;
  for (let j = 0; j < w.length; j++) s += w[j] * x[j];
  return s;
};

export const predictLinear = (m: LinearModel, x: ArrayLike<number>) => dot(m.weights, x) + m.intercept;

/** log(1 + e^z) without overflow. */
const softplus = (z: number) => (z > 0 ? z + Math.log1p(Math.exp(-z)) : Math.log1p(Math.exp(z)));
const sigmoid = (z: number) => (z >= 0 ? 1 / (1 + Math.exp(-z)) : Math.exp(z) / (1 + Math.exp(z)));

/** The objective logisticRegression minimises: Σ [log(1 + e^{z_i}) − y_i z_i] + (λ/2)‖w‖², z = Xw + b. */
export function logisticObjective(X: ArrayLike<number>[], y: ArrayLike<number>, m: LinearModel, lambda: number): number {
  let f = 0;
  for (let i = 0; i < X.length; i++) {
    const z = predictLinear(m, X[i]);
    f += softplus(z) - y[i] * z;
  }
  return f + (lambda / 2) * dot(m.weights, m.weights);
}

/**
 * L2-regularised logistic regression, y ∈ {0, 1}, by Newton's method with step halving (the
 * objective is strictly convex for λ > 0, so the minimiser is unique). Stops when the largest
 * gradient component is below 1e-9·(n + 1) or after 100 iterations.
 */
export function logisticRegression(X: ArrayLike<number>[], y: ArrayLike<number>, lambda = LOGISTIC_LAMBDA): LinearModel {
  const n = X.length;
  const d = X[0]?.length ?? 0;
  const D = d + 1; // weights, then the intercept
  let m: LinearModel = { weights: new Float64Array(d), intercept: 0 };
  let f = logisticObjective(X, y, m, lambda);
  const H = new Float64Array(D * D);
  const g = new Float64Array(D);
  for (let iter = 0; iter < 100; iter++) {
    H.fill(0);
    g.fill(0);
    for (let i = 0; i < n; i++) {
      const x = X[i];
      const p = sigmoid(predictLinear(m, x));
      const r = p - y[i];
      const s = p * (1 - p);
      for (let a = 0; a < d; a++) {
        g[a] += r * x[a];
        const sa = s * x[a];
        if (sa === 0) continue;
        for (let b = 0; b <= a; b++) H[a * D + b] += sa * x[b];
        H[a * D + d] += sa;
      }
      g[d] += r;
      H[d * D + d] += s;
    }
    for (let a = 0; a < d; a++) {
      g[a] += lambda * m.weights[a];
      H[a * D + a] += lambda;
      for (let b = 0; b < a; b++) H[b * D + a] = H[a * D + b];
      H[d * D + a] = H[a * D + d];
    }
    // The intercept row has no penalty; a whisker of ridge keeps it definite when every p saturates.
    H[d * D + d] += 1e-12;
    if (Math.max(...g.map(Math.abs)) < 1e-9 * (n + 1)) break;
    const step = choleskySolve(H, g, D);
    let t = 1;
    for (;;) {
      const next: LinearModel = { weights: m.weights.map((w, a) => w - t * step[a]), intercept: m.intercept - t * step[d] };
      const fn = logisticObjective(X, y, next, lambda);
      if (fn <= f || t < 1e-10) {
        m = next;
        f = fn;
        break;
      }
      t /= 2;
    }
  }
  return m;
}

/**
 * Ridge regression: minimises ‖y − Xw − b‖² + λ‖w‖² (intercept unpenalised). Solved on centred
 * data in whichever form is smaller: w = (XcᵀXc + λI)⁻¹Xcᵀyc, or, with fewer rows than columns,
 * the identical w = Xcᵀ(XcXcᵀ + λI)⁻¹yc; then b = ȳ − x̄ᵀw.
 */
export function ridgeRegression(X: ArrayLike<number>[], y: ArrayLike<number>, lambda = RIDGE_LAMBDA): LinearModel {
  const n = X.length;
  const d = X[0]?.length ?? 0;
  const xm = new Float64Array(d);
  for (const r of X) for (let j = 0; j < d; j++) xm[j] += r[j] / n;
  let ym = 0;
  for (let i = 0; i < n; i++) ym += y[i] / n;
  const Xc = X.map((r) => Float64Array.from({ length: d }, (_, j) => r[j] - xm[j]));
  const yc = Float64Array.from({ length: n }, (_, i) => y[i] - ym);
  const w = new Float64Array(d);
  if (n < d) {
    const K = new Float64Array(n * n);
    for (let i = 0; i < n; i++)
      for (let k = 0; k <= i; k++) {
        const v = dot(Xc[i], Xc[k]);
        K[i * n + k] = v;
        K[k * n + i] = v;
      }
    for (let i = 0; i < n; i++) K[i * n + i] += lambda;
    const alpha = choleskySolve(K, yc, n);
    for (let i = 0; i < n; i++) for (let j = 0; j < d; j++) w[j] += Xc[i][j] * alpha[i];
  } else {
    const A = new Float64Array(d * d);
    const b = new Float64Array(d);
    for (let i = 0; i < n; i++) {
      const r = Xc[i];
      for (let a = 0; a < d; a++) {
        b[a] += r[a] * yc[i];
        for (let c = 0; c <= a; c++) A[a * d + c] += r[a] * r[c];
      }
    }
    for (let a = 0; a < d; a++) {
      A[a * d + a] += lambda;
      for (let c = 0; c < a; c++) A[c * d + a] = A[a * d + c];
    }
    w.set(choleskySolve(A, b, d));
  }
  return { weights: w, intercept: ym - dot(w, xm) };
}

/**
 * Area under the ROC curve of scores for positives versus negatives: the Mann–Whitney U of the
 * positives divided by n₁·n₂ (ties count one half), from mid-ranks: U = R₁ − n₁(n₁ + 1)/2.
 */
export function auc(scores: ArrayLike<number>, positive: ArrayLike<boolean>): number {
  const idx = Array.from({ length: scores.length }, (_, i) => i).sort((a, b) => scores[a] - scores[b]);
  const rank = new Float64Array(scores.length);
  for (let i = 0; i < idx.length; ) {
    let j = i;
    while (j + 1 < idx.length && scores[idx[j + 1]] === scores[idx[i]]) j++;
    for (let k = i; k <= j; k++) rank[idx[k]] = (i + j) / 2 + 1;
    i = j + 1;
  }
  let r1 = 0;
  let n1 = 0;
  for (let i = 0; i < scores.length; i++) if (positive[i]) (r1 += rank[i]), n1++;
  const n2 = scores.length - n1;
  if (n1 === 0 || n2 === 0) return NaN;
  return (r1 - (n1 * (n1 + 1)) / 2) / (n1 * n2);
}

/** Coefficient of determination 1 − Σ(y − ŷ)²/Σ(y − ȳ)². */
export function rSquared(y: ArrayLike<number>, predicted: ArrayLike<number>): number {
  let mean = 0;
  for (let i = 0; i < y.length; i++) mean += y[i] / y.length;
  let res = 0;
  let tot = 0;
  for (let i = 0; i < y.length; i++) {
    res += (y[i] - predicted[i]) ** 2;
    tot += (y[i] - mean) ** 2;
  }
  return tot > 0 ? 1 - res / tot : NaN;
}

/**
 * Fold of each example, deterministic from the seed: each stratum (class for tags; everything for
 * ratings) is shuffled by Fisher–Yates with Random(seed, stream 0xf01d) and dealt round-robin, so
 * every fold gets its share of each class.
 */
export function assignFolds(strata: ArrayLike<number>, k: number, seed: number): Int32Array {
  const fold = new Int32Array(strata.length);
  const rng = new Random(seed, 0xf01d);
  const groups = new Map<number, number[]>();
  for (let i = 0; i < strata.length; i++) {
    const g = groups.get(strata[i]) ?? [];
    g.push(i);
    groups.set(strata[i], g);
  }
  let next = 0;
  for (const key of [...groups.keys()].sort((a, b) => a - b)) {
    const g = groups.get(key)!;
    for (let i = g.length - 1; i > 0; i--) {
      const j = rng.int(i + 1);
      [g[i], g[j]] = [g[j], g[i]];
    }
    for (const i of g) fold[i] = next++ % k;
  }
  return fold;
}

export type DefinedKind = 'tags' | 'ratings';

export interface CrossValidation {
  metric: 'auc' | 'r2';
  /** Pooled out-of-fold AUC or R² (each example scored by the model fitted without its fold). */
  value: number;
  /** The same statistic within each fold, for the spread. */
  perFold: number[];
  folds: number;
  seed: number;
  outOfFold: number[];
}

/**
 * k-fold cross-validation: standardisation and model are refitted on each training part, so the
 * held-out fold never informs either. Labels: 1/0 for tags, the ratings for ratings.
 */
export function crossValidate(rows: ArrayLike<number>[], labels: ArrayLike<number>, kind: DefinedKind, k: number, seed: number, families?: string[]): CrossValidation {
  const n = rows.length;
  const strata = kind === 'tags' ? labels : new Float64Array(n);
  const fold = assignFolds(strata, k, seed);
  const outOfFold = new Array<number>(n).fill(NaN);
  const perFold: number[] = [];
  for (let f = 0; f < k; f++) {
    const train = [...Array(n).keys()].filter((i) => fold[i] !== f);
    const test = [...Array(n).keys()].filter((i) => fold[i] === f);
    const s = fitStandardisation(train.map((i) => rows[i]), families);
    const Xtr = train.map((i) => standardise(rows[i], s));
    const ytr = train.map((i) => labels[i]);
    const model = kind === 'tags' ? logisticRegression(Xtr, ytr) : ridgeRegression(Xtr, ytr);
    for (const i of test) outOfFold[i] = predictLinear(model, standardise(rows[i], s));
    perFold.push(kind === 'tags' ? auc(test.map((i) => outOfFold[i]), test.map((i) => labels[i] === 1)) : rSquared(test.map((i) => labels[i]), test.map((i) => outOfFold[i])));
  }
  const value = kind === 'tags' ? auc(outOfFold, Array.from(labels, (v) => v === 1)) : rSquared(labels, outOfFold);
  return { metric: kind === 'tags' ? 'auc' : 'r2', value, perFold, folds: k, seed, outOfFold };
}

export interface DefinedFit {
  kind: DefinedKind;
  standardisation: Standardisation;
  model: LinearModel;
  lambda: number;
  accuracy: {
    metric: 'auc' | 'r2';
    value: number;
    perFold: number[];
    folds: number;
    seed: number;
    floor: number;
    /** Examples behind the estimate: per class for tags, in all for ratings. */
    counts: { has: number; lacks: number } | { ratings: number };
    noisy: boolean;
    /** Why the estimate is noisy, when it is. */
    note: string | null;
  };
  /** Why this attribute must not be used, or null when it clears the floor. */
  refused: string | null;
}

const f3 = (v: number) => v.toFixed(3);

/**
 * Fits a defined attribute on descriptor rows and reports its cross-validated accuracy. Tags:
 * labels 1 (has) / 0 (lacks); ratings: the values. Throws (as a plain Error with the reason) only
 * when there is too little to fit at all; an attribute below the floor comes back with `refused`.
 */
export function fitDefinedAttribute(name: string, rows: ArrayLike<number>[], labels: ArrayLike<number>, kind: DefinedKind, seed = 1, families?: string[]): DefinedFit {
  const n = rows.length;
  let k: number;
  let counts: DefinedFit['accuracy']['counts'];
  let few: boolean;
  if (kind === 'tags') {
    const has = Array.from(labels).filter((v) => v === 1).length;
    const lacks = n - has;
    if (Array.from(labels).some((v) => v !== 0 && v !== 1)) throw new Error(`'${name}': tag labels must be 1 (has) or 0 (lacks)`);
    if (has < 2 || lacks < 2) throw new Error(`'${name}': needs at least 2 seeds that have it and 2 that lack it to cross-validate; got ${has} and ${lacks}`);
    k = Math.min(CV_FOLDS, has, lacks);
    counts = { has, lacks };
    few = Math.min(has, lacks) < FEW_EXAMPLES;
  } else {
    if (n < 4) throw new Error(`'${name}': needs at least 4 rated seeds to cross-validate; got ${n}`);
    if (new Set(Array.from(labels)).size < 2) throw new Error(`'${name}': every rating is the same (${labels[0]}); there is nothing to fit`);
    k = Math.min(CV_FOLDS, n);
    counts = { ratings: n };
    few = n < FEW_EXAMPLES;
  }
  const cv = crossValidate(rows, labels, kind, k, seed, families);
  const standardisation = fitStandardisation(Array.from(rows), families);
  const X = Array.from(rows, (r) => standardise(r, standardisation));
  const lambda = kind === 'tags' ? LOGISTIC_LAMBDA : RIDGE_LAMBDA;
  const model = kind === 'tags' ? logisticRegression(X, labels, lambda) : ridgeRegression(X, labels, lambda);
  const floor = kind === 'tags' ? AUC_FLOOR : R2_FLOOR;
  const metricName = kind === 'tags' ? 'AUC' : 'R²';
  const note = few ? `only ${kind === 'tags' ? `${Math.min((counts as { has: number }).has, (counts as { lacks: number }).lacks)} seeds in the smaller class` : `${n} rated seeds`}; with fewer than ${FEW_EXAMPLES} per class the cross-validated ${metricName} is itself noisy (folds range ${f3(Math.min(...cv.perFold.filter(Number.isFinite)))}–${f3(Math.max(...cv.perFold.filter(Number.isFinite)))})` : null;
  const refused = !(cv.value >= floor)
    ? `'${name}' is not defined well enough: cross-validated ${metricName} ${f3(cv.value)} over ${k} folds is below the floor ${floor} (${kind === 'tags' ? 'the descriptor does not separate the seeds that have it from those that lack it' : 'the descriptor does not predict the ratings'}); tag more seeds, or more clearly different ones`
    : null;
  return {
    kind,
    standardisation,
    model,
    lambda,
    accuracy: { metric: cv.metric, value: cv.value, perFold: cv.perFold, folds: k, seed, floor, counts, noisy: few, note },
    refused,
  };
}
