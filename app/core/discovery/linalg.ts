// Small linear-algebra helpers over ml-matrix for the discovery methods.
import { EigenvalueDecomposition, Matrix } from 'ml-matrix';

/** Eigenpairs of a symmetric matrix, sorted by eigenvalue descending, each vector with its largest-|coefficient| entry positive. */
export function symmetricEigen(m: Matrix): { values: number[]; vectors: Float32Array[] } {
  const e = new EigenvalueDecomposition(m, { assumeSymmetric: true });
  const values = e.realEigenvalues;
  const V = e.eigenvectorMatrix;
  const order = values.map((v, i) => [v, i] as const).sort((a, b) => b[0] - a[0]);
  return {
    values: order.map(([v]) => v),
    vectors: order.map(([, i]) => fixSign(Float32Array.from(V.getColumn(i)))),
  };
}

/** Sign convention: the coefficient of largest magnitude is positive (eigenvector signs are arbitrary). */
export function fixSign(v: Float32Array): Float32Array {
  let k = 0;
  for (let i = 1; i < v.length; i++) if (Math.abs(v[i]) > Math.abs(v[k])) k = i;
  return v[k] < 0 ? v.map((x) => -x) : v;
}

export function unit(v: ArrayLike<number>): Float32Array {
  let n = 0;
  for (let i = 0; i < v.length; i++) n += v[i] * v[i];
  n = Math.sqrt(n);
  if (!(n > 0)) throw new RangeError('zero vector');
  return Float32Array.from(v, (x) => x / n);
}

export function dot(a: ArrayLike<number>, b: ArrayLike<number>): number {
  let s = 0;
  for (let i = 0; i < a.length; i++) s += a[i] * b[i];
  return s;
}

/** Angle between two directions in degrees, ignoring sign (0–90). */
export function angleDegrees(a: ArrayLike<number>, b: ArrayLike<number>): number {
  const c = Math.abs(dot(a, b)) / Math.sqrt(dot(a, a) * dot(b, b));
  return (Math.acos(Math.min(1, c)) * 180) / Math.PI;
}

/** Covariance of rows [m, d] (ddof = 1) and their mean. */
export function covariance(rows: Float32Array, d: number): { mean: Float64Array; cov: Matrix } {
  const m = rows.length / d;
  const mean = new Float64Array(d);
  for (let i = 0; i < m; i++) for (let k = 0; k < d; k++) mean[k] += rows[i * d + k] / m;
  const cov = new Matrix(d, d);
  const c = new Float64Array(d);
  for (let i = 0; i < m; i++) {
    for (let k = 0; k < d; k++) c[k] = rows[i * d + k] - mean[k];
    for (let a = 0; a < d; a++) {
      const ca = c[a];
      for (let b = a; b < d; b++) cov.set(a, b, cov.get(a, b) + ca * c[b]);
    }
  }
  for (let a = 0; a < d; a++)
    for (let b = a; b < d; b++) {
      const v = cov.get(a, b) / (m - 1);
      cov.set(a, b, v);
      cov.set(b, a, v);
    }
  return { mean, cov };
}
