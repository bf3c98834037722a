// The generator's own W distribution as a Gaussian around the truncation centre: the covariance
// of its W samples (the ones the generator keeps for σ units), an eigendecomposition of it, and
// the whitening that maps search coordinates x to w = c + V Λ^{1/2} x. In those coordinates the
// Mahalanobis distance from the centre, √((w − c)ᵀ Σ⁻¹ (w − c)), is simply ‖x‖, and CMA-ES starts
// from an isotropic problem instead of having to learn W's scales first.
import { EigenvalueDecomposition, Matrix } from 'ml-matrix';

/** Eigenvalues below this fraction of the largest are raised to it (a sample covariance of a
 * low-rank mapping can be singular; the floor keeps Σ⁻¹ finite without changing the rest). */
const EIGEN_FLOOR = 1e-6;

export class LatentPrior {
  readonly size: number;
  readonly centre: Float32Array;
  /** Columns: eigenvectors of Σ scaled by √eigenvalue, row-major size × size. */
  readonly #root: Float64Array;
  /** Rows: eigenvectors divided by √eigenvalue (Σ^{−1/2} up to rotation), row-major. */
  readonly #inverseRoot: Float64Array;

  private constructor(centre: Float32Array, root: Float64Array, inverseRoot: Float64Array) {
    this.size = centre.length;
    this.centre = centre;
    this.#root = root;
    this.#inverseRoot = inverseRoot;
  }

  /**
   * From samples already centred on the truncation centre, [m, size]. The second moment about the
   * centre (not about the sample mean) is used, because the centre is where distance is measured.
   */
  static fromCentredSamples(centre: Float32Array, centred: Float32Array): LatentPrior {
    const n = centre.length;
    const m = centred.length / n;
    if (!Number.isInteger(m) || m < 2) throw new RangeError(`need at least 2 samples of ${n} values, got ${centred.length} values`);
    const cov = new Matrix(n, n);
    for (let a = 0; a < n; a++)
      for (let b = 0; b <= a; b++) {
        let s = 0;
        for (let i = 0; i < m; i++) s += centred[i * n + a] * centred[i * n + b];
        cov.set(a, b, s / m);
        cov.set(b, a, s / m);
      }
    const e = new EigenvalueDecomposition(cov, { assumeSymmetric: true });
    const values = e.realEigenvalues;
    const V = e.eigenvectorMatrix;
    const top = Math.max(...values);
    const root = new Float64Array(n * n);
    const inverseRoot = new Float64Array(n * n);
    for (let j = 0; j < n; j++) {
      const s = Math.sqrt(Math.max(values[j], top * EIGEN_FLOOR));
      for (let i = 0; i < n; i++) {
        root[i * n + j] = V.get(i, j) * s;
        inverseRoot[j * n + i] = V.get(i, j) / s;
      }
    }
    return new LatentPrior(Float32Array.from(centre), root, inverseRoot);
  }

  /** Identity prior (standard normal around `centre`), for generators sampled as N(0, I). */
  static standard(centre: Float32Array): LatentPrior {
    const n = centre.length;
    const eye = new Float64Array(n * n);
    for (let i = 0; i < n; i++) eye[i * n + i] = 1;
    return new LatentPrior(Float32Array.from(centre), eye, Float64Array.from(eye));
  }

  /** w = c + Σ^{1/2} x, written into `out` at `offset`. */
  toLatent(x: ArrayLike<number>, out: Float32Array, offset = 0, withCentre = true): void {
    const n = this.size;
    for (let i = 0; i < n; i++) {
      let s = withCentre ? this.centre[i] : 0;
      for (let j = 0; j < n; j++) s += this.#root[i * n + j] * x[j];
      out[offset + i] = s;
    }
  }

  /** x = Σ^{−1/2} (w − c). */
  toSearch(w: ArrayLike<number>): Float64Array {
    const n = this.size;
    const x = new Float64Array(n);
    for (let i = 0; i < n; i++) {
      let s = 0;
      for (let j = 0; j < n; j++) s += this.#inverseRoot[i * n + j] * (w[j] - this.centre[j]);
      x[i] = s;
    }
    return x;
  }

  /** Mahalanobis distance of w from the centre. */
  mahalanobis(w: ArrayLike<number>): number {
    const x = this.toSearch(w);
    let s = 0;
    for (const v of x) s += v * v;
    return Math.sqrt(s);
  }
}
