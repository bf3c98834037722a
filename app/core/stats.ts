// Statistics for audits: normal quantiles, NumPy-style linear quantiles, streaming moments and
// bootstrap confidence intervals (percentile and BCa; Efron 1987, Efron & Tibshirani 1993).
import { Random } from './random.ts';

/** Standard normal CDF Φ via erfc; fractional error below 1.2e-7, ample for interval levels. */
export function normalCdf(x: number): number {
  return 0.5 * erfc(-x / Math.SQRT2);
}

function erfc(x: number): number {
  // Chebyshev-fitted erfc (Press et al., Numerical Recipes, erfcc): fractional error < 1.2e-7.
  const z = Math.abs(x);
  const t = 1 / (1 + 0.5 * z);
  const r =
    t *
    Math.exp(
      -z * z - 1.26551223 + t * (1.00002368 + t * (0.37409196 + t * (0.09678418 + t * (-0.18628806 + t * (0.27886807 + t * (-1.13520398 + t * (1.48851587 + t * (-0.82215223 + t * 0.17087277)))))))),
    );
  return x >= 0 ? r : 2 - r;
}

/** Inverse standard normal CDF Φ⁻¹ (Acklam's algorithm, relative error < 1.2e-9). */
export function normalQuantile(p: number): number {
  if (!(p > 0 && p < 1)) {
    if (p === 0) return -Infinity;
    if (p === 1) return Infinity;
    return NaN;
  }
  const a = [-3.969683028665376e1, 2.209460984245205e2, -2.759285104469687e2, 1.38357751867269e2, -3.066479806614716e1, 2.506628277459239];
  const b = [-5.447609879822406e1, 1.615858368580409e2, -1.556989798598866e2, 6.680131188771972e1, -1.328068155288572e1];
  const c = [-7.784894002430293e-3, -3.223964580411365e-1, -2.400758277161838, -2.549732539343734, 4.374664141464968, 2.938163982698783];
  const d = [7.784695709041462e-3, 3.224671290700398e-1, 2.445134137142996, 3.754408661907416];
  const lo = 0.02425;
  let q: number;
  if (p < lo) {
    q = Math.sqrt(-2 * Math.log(p));
    return (((((c[0] * q + c[1]) * q + c[2]) * q + c[3]) * q + c[4]) * q + c[5]) / ((((d[0] * q + d[1]) * q + d[2]) * q + d[3]) * q + 1);
  }
  if (p > 1 - lo) {
    q = Math.sqrt(-2 * Math.log(1 - p));
    return -(((((c[0] * q + c[1]) * q + c[2]) * q + c[3]) * q + c[4]) * q + c[5]) / ((((d[0] * q + d[1]) * q + d[2]) * q + d[3]) * q + 1);
  }
  q = p - 0.5;
  const r = q * q;
  return ((((((a[0] * r + a[1]) * r + a[2]) * r + a[3]) * r + a[4]) * r + a[5]) * q) / (((((b[0] * r + b[1]) * r + b[2]) * r + b[3]) * r + b[4]) * r + 1);
}

/** Quantile of sorted data with NumPy's default 'linear' interpolation (Hyndman & Fan type 7). */
export function quantileSorted(sorted: ArrayLike<number>, q: number): number {
  const n = sorted.length;
  if (n === 0) return NaN;
  const h = (n - 1) * Math.min(1, Math.max(0, q));
  const lo = Math.floor(h);
  const hi = Math.min(n - 1, lo + 1);
  return sorted[lo] + (h - lo) * (sorted[hi] - sorted[lo]);
}

/** Streaming mean and variance (Welford), for response curves whose size must not grow with probes. */
export class RunningMoments {
  n = 0;
  mean = 0;
  #m2 = 0;
  /** Adds one value; NaN ("not measurable") is left out. */
  push(x: number): void {
    if (Number.isNaN(x)) return;
    this.n++;
    const d = x - this.mean;
    this.mean += d / this.n;
    this.#m2 += d * (x - this.mean);
  }
  /** Sample variance (ddof = 1). */
  get variance(): number {
    return this.n > 1 ? this.#m2 / (this.n - 1) : 0;
  }
  get std(): number {
    return Math.sqrt(this.variance);
  }
  /** Normal-approximation interval of the mean. */
  interval(confidence = 0.95): [number, number] {
    const z = normalQuantile(0.5 + confidence / 2);
    const se = this.n > 1 ? this.std / Math.sqrt(this.n) : 0;
    return [this.mean - z * se, this.mean + z * se];
  }
}

export function percentileInterval(replicates: ArrayLike<number>, confidence = 0.95): [number, number] {
  const s = Float64Array.from(replicates).sort();
  const alpha = 1 - confidence;
  return [quantileSorted(s, alpha / 2), quantileSorted(s, 1 - alpha / 2)];
}

/** Jackknife acceleration a = Σ(θ̄ − θ_(i))³ / (6 [Σ(θ̄ − θ_(i))²]^{3/2}). */
export function jackknifeAcceleration(jackknife: ArrayLike<number>): number {
  const n = jackknife.length;
  let mean = 0;
  for (let i = 0; i < n; i++) mean += jackknife[i] / n;
  let s2 = 0;
  let s3 = 0;
  for (let i = 0; i < n; i++) {
    const d = mean - jackknife[i];
    s2 += d * d;
    s3 += d * d * d;
  }
  return s2 > 0 ? s3 / (6 * s2 ** 1.5) : 0;
}

/**
 * BCa interval from bootstrap replicates, the full-sample estimate and jackknife values.
 * ties 'mid-rank' counts replicates equal to θ̂ as half below (SciPy's convention); 'strict' counts only those below.
 */
export function bcaInterval(replicates: ArrayLike<number>, thetaHat: number, jackknife: ArrayLike<number>, confidence = 0.95, ties: 'mid-rank' | 'strict' = 'mid-rank'): [number, number] {
  const B = replicates.length;
  let below = 0;
  let equal = 0;
  for (let b = 0; b < B; b++) {
    if (replicates[b] < thetaHat) below++;
    else if (replicates[b] === thetaHat) equal++;
  }
  const frac = ties === 'mid-rank' ? (below + equal / 2) / B : below / B;
  if (frac <= 0 || frac >= 1) return percentileInterval(replicates, confidence);
  const z0 = normalQuantile(frac);
  const a = jackknifeAcceleration(jackknife);
  const alpha = 1 - confidence;
  const adjust = (zq: number) => normalCdf(z0 + (z0 + zq) / (1 - a * (z0 + zq)));
  const a1 = adjust(normalQuantile(alpha / 2));
  const a2 = adjust(normalQuantile(1 - alpha / 2));
  const s = Float64Array.from(replicates).sort();
  return [quantileSorted(s, a1), quantileSorted(s, a2)];
}

/**
 * Joint bootstrap over probes: one seeded set of resampled probe indices shared by every
 * statistic of an audit, so intervals of different directions and attributes are paired.
 * A statistic is a function of column means, where each column holds one value per probe;
 * that keeps resampling and the jackknife cheap (leave-one-out means in O(1)).
 */
export class ProbeBootstrap {
  readonly counts: Uint16Array[];
  constructor(readonly probes: number, readonly resamples: number, seed: number) {
    if (probes < 2) throw new RangeError('bootstrap needs at least 2 probes');
    const rng = new Random(seed, 0xb007);
    this.counts = Array.from({ length: resamples }, () => {
      const c = new Uint16Array(probes);
      for (let i = 0; i < probes; i++) c[rng.int(probes)]++;
      return c;
    });
  }

  /**
   * Point estimate and BCa interval of stat(column means). NaN entries are missing values ("not
   * measurable" on that probe): each column's mean is taken over its measurable probes only, in
   * the full sample, every resample and every jackknife leave-one-out alike.
   */
  interval(columns: Float64Array[], stat: (means: Float64Array) => number, confidence = 0.95): { value: number; low: number; high: number } {
    const n = this.probes;
    const k = columns.length;
    const full = new Float64Array(k);
    const sums = new Float64Array(k);
    const valid = new Float64Array(k);
    const gappy = columns.map((col) => col.some(Number.isNaN));
    const clean = columns.map((col, j) => (gappy[j] ? col.map((v) => (Number.isNaN(v) ? 0 : v)) : col));
    const present = columns.map((col, j) => (gappy[j] ? col.map((v) => (Number.isNaN(v) ? 0 : 1)) : null));
    for (let j = 0; j < k; j++) {
      let s = 0;
      let c = 0;
      for (let i = 0; i < n; i++) {
        s += clean[j][i];
        c += present[j] ? present[j]![i] : 1;
      }
      sums[j] = s;
      valid[j] = c;
      full[j] = c > 0 ? s / c : NaN;
    }
    const value = stat(full);
    const reps = new Float64Array(this.resamples);
    const means = new Float64Array(k);
    for (let b = 0; b < this.resamples; b++) {
      const c = this.counts[b];
      for (let j = 0; j < k; j++) {
        const col = clean[j];
        const has = present[j];
        let s = 0;
        let w = 0;
        if (has) {
          for (let i = 0; i < n; i++) {
            s += c[i] * col[i];
            w += c[i] * has[i];
          }
        } else {
          for (let i = 0; i < n; i++) s += c[i] * col[i];
          w = n;
        }
        means[j] = w > 0 ? s / w : NaN;
      }
      reps[b] = stat(means);
    }
    const jack = new Float64Array(n);
    for (let i = 0; i < n; i++) {
      for (let j = 0; j < k; j++) {
        const w = valid[j] - (present[j] ? present[j]![i] : 1);
        means[j] = w > 0 ? (sums[j] - clean[j][i]) / w : NaN;
      }
      jack[i] = stat(means);
    }
    const finite = reps.every(Number.isFinite) && Number.isFinite(value);
    if (!finite) return { value, low: NaN, high: NaN };
    const [low, high] = bcaInterval(reps, value, jack, confidence, 'mid-rank');
    return { value, low, high };
  }
}
