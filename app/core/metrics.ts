// Disentanglement metrics for generators that declare their ground-truth factors.
//  - MIG (Chen, Li, Grosse & Duvenaud 2018): MIG = (1/K) Σ_k [I(c_j1; v_k) − I(c_j2; v_k)] / H(v_k),
//    j1, j2 the codes with the largest and second-largest mutual information with factor k;
//    codes and factors discretised into 20 equal-width bins, MI in nats from joint histograms
//    (the disentanglement_lib estimator).
//  - DCI (Eastwood & Williams 2018): importance matrix R (codes × factors), disentanglement
//    D = Σ_j ρ_j (1 − H_K(P_j·)), completeness C = Σ_k ρ'_k (1 − H_J(P̃_·k)), informativeness =
//    held-out R². Importances here are absolute standardised coefficients of a linear
//    regression per factor (the paper uses Lasso or random forests; a linear regressor keeps
//    it dependency-free and deterministic).
// A score that its definition leaves undefined is reported as 'undefined', never as a number:
// MIG needs a second code for its gap (one code: undefined); DCI disentanglement takes entropy
// in base K (one factor: undefined) and completeness in base J (one code: undefined).
import { Matrix, solve } from 'ml-matrix';

export const MIG_BINS = 20;

/** Equal-width bin index (0..bins−1) of every value, like np.digitize on np.histogram edges. */
export function discretise(values: ArrayLike<number>, bins = MIG_BINS): Int32Array {
  let lo = Infinity;
  let hi = -Infinity;
  for (let i = 0; i < values.length; i++) {
    lo = Math.min(lo, values[i]);
    hi = Math.max(hi, values[i]);
  }
  const out = new Int32Array(values.length);
  const width = (hi - lo) / bins;
  for (let i = 0; i < values.length; i++) out[i] = width > 0 ? Math.min(bins - 1, Math.floor((values[i] - lo) / width)) : 0;
  return out;
}

/** Mutual information (nats) of two discrete label arrays, as sklearn's mutual_info_score. */
export function mutualInformation(a: Int32Array, b: Int32Array): number {
  const n = a.length;
  const joint = new Map<number, number>();
  const pa = new Map<number, number>();
  const pb = new Map<number, number>();
  for (let i = 0; i < n; i++) {
    const key = a[i] * 100_003 + b[i];
    joint.set(key, (joint.get(key) ?? 0) + 1);
    pa.set(a[i], (pa.get(a[i]) ?? 0) + 1);
    pb.set(b[i], (pb.get(b[i]) ?? 0) + 1);
  }
  let mi = 0;
  for (const [key, c] of joint) {
    const ai = Math.floor(key / 100_003);
    const bi = key - ai * 100_003;
    mi += (c / n) * Math.log((c * n) / (pa.get(ai)! * pb.get(bi)!));
  }
  return Math.max(0, mi);
}

export type Score = number | 'undefined';

/** codes [n × J], factors [n × K], row-major. perFactor is NaN for a factor with no entropy. */
export function mig(codes: Float64Array, J: number, factors: Float64Array, K: number): { mig: Score; perFactor: number[] } {
  if (J < 2) return { mig: 'undefined', perFactor: Array.from({ length: K }, () => NaN) };
  const n = codes.length / J;
  const col = (m: Float64Array, w: number, j: number) => Float64Array.from({ length: n }, (_, i) => m[i * w + j]);
  const dc = Array.from({ length: J }, (_, j) => discretise(col(codes, J, j)));
  const perFactor: number[] = [];
  for (let k = 0; k < K; k++) {
    const v = discretise(col(factors, K, k));
    const h = mutualInformation(v, v);
    if (!(h > 0)) {
      perFactor.push(NaN);
      continue;
    }
    const mis = dc.map((c) => mutualInformation(c, v)).sort((a, b) => b - a);
    perFactor.push((mis[0] - mis[1]) / h);
  }
  const valid = perFactor.filter(Number.isFinite);
  return { mig: valid.length ? valid.reduce((a, b) => a + b, 0) / valid.length : 'undefined', perFactor };
}

function entropy(p: number[], base: number): number {
  let h = 0;
  for (const x of p) if (x > 0) h -= x * Math.log(x);
  return base > 1 ? h / Math.log(base) : 0;
}

/** D and C from an importance matrix R [J codes × K factors]. */
export function dciFromImportance(R: number[][]): { disentanglement: Score; completeness: Score; perCode: number[]; perFactor: number[] } {
  const J = R.length;
  const K = R[0].length;
  const total = R.flat().reduce((a, b) => a + b, 0);
  const perCode = R.map((row) => {
    const s = row.reduce((a, b) => a + b, 0);
    return s > 0 ? 1 - entropy(row.map((v) => v / s), K) : 0;
  });
  const perFactor = Array.from({ length: K }, (_, k) => {
    const colv = R.map((row) => row[k]);
    const s = colv.reduce((a, b) => a + b, 0);
    return s > 0 ? 1 - entropy(colv.map((v) => v / s), J) : 0;
  });
  const disentanglement = K < 2 || !(total > 0) ? 'undefined' : R.reduce((acc, row, j) => acc + (row.reduce((a, b) => a + b, 0) / total) * perCode[j], 0);
  const completeness = J < 2 || !(total > 0) ? 'undefined' : perFactor.reduce((acc, c, k) => acc + (R.reduce((a, row) => a + row[k], 0) / total) * c, 0);
  return { disentanglement, completeness, perCode, perFactor };
}

export function dci(codes: Float64Array, J: number, factors: Float64Array, K: number, trainFraction = 0.7) {
  const n = codes.length / J;
  const nTrain = Math.max(J + 2, Math.floor(n * trainFraction));
  const standardise = (m: Float64Array, w: number) => {
    const out = new Float64Array(m.length);
    for (let j = 0; j < w; j++) {
      let s = 0;
      let s2 = 0;
      for (let i = 0; i < nTrain; i++) {
        s += m[i * w + j];
        s2 += m[i * w + j] ** 2;
      }
      const mean = s / nTrain;
      const sd = Math.sqrt(Math.max(1e-24, s2 / nTrain - mean * mean));
      for (let i = 0; i < n; i++) out[i * w + j] = (m[i * w + j] - mean) / sd;
    }
    return out;
  };
  const X = standardise(codes, J);
  const Y = standardise(factors, K);
  const Xt = new Matrix(nTrain, J);
  for (let i = 0; i < nTrain; i++) for (let j = 0; j < J; j++) Xt.set(i, j, X[i * J + j]);
  const XtX = Xt.transpose().mmul(Xt);
  for (let j = 0; j < J; j++) XtX.set(j, j, XtX.get(j, j) + 1e-6 * nTrain);
  const R: number[][] = Array.from({ length: J }, () => new Array(K).fill(0));
  const informativeness: number[] = [];
  for (let k = 0; k < K; k++) {
    const y = Matrix.columnVector(Array.from({ length: nTrain }, (_, i) => Y[i * K + k]));
    const beta = solve(XtX, Xt.transpose().mmul(y)).getColumn(0);
    beta.forEach((b, j) => (R[j][k] = Math.abs(b)));
    let ss = 0;
    let st = 0;
    let mean = 0;
    for (let i = nTrain; i < n; i++) mean += Y[i * K + k] / (n - nTrain);
    for (let i = nTrain; i < n; i++) {
      let pred = 0;
      for (let j = 0; j < J; j++) pred += beta[j] * X[i * J + j];
      ss += (Y[i * K + k] - pred) ** 2;
      st += (Y[i * K + k] - mean) ** 2;
    }
    informativeness.push(st > 0 ? 1 - ss / st : NaN);
  }
  const finite = informativeness.filter(Number.isFinite);
  const informative: Score = finite.length ? finite.reduce((a, b) => a + b, 0) / finite.length : 'undefined';
  return { ...dciFromImportance(R), informativeness: informative, importance: R };
}
