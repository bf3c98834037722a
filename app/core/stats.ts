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

/** ln Γ(x) for x > 0 (Lanczos, g = 7, 9 terms; relative error ~1e-15). */
export function logGamma(x: number): number {
  const g = [0.99999999999980993, 676.5203681218851, -1259.1392167224028, 771.32342877765313, -176.61502916214059, 12.507343278686905, -0.13857109526572012, 9.9843695780195716e-6, 1.5056327351493116e-7];
  if (x < 0.5) return Math.log(Math.PI / Math.abs(Math.sin(Math.PI * x))) - logGamma(1 - x);
  x -= 1;
  let a = g[0];
  const t = x + 7.5;
  for (let i = 1; i < 9; i++) a += g[i] / (x + i);
  return 0.5 * Math.log(2 * Math.PI) + (x + 0.5) * Math.log(t) - t + Math.log(a);
}

/** Continued fraction of the incomplete beta function (modified Lentz; Numerical Recipes betacf). */
function betaContinuedFraction(a: number, b: number, x: number): number {
  const tiny = 1e-300;
  const qab = a + b;
  const qap = a + 1;
  const qam = a - 1;
  let c = 1;
  let d = 1 - (qab * x) / qap;
  if (Math.abs(d) < tiny) d = tiny;
  d = 1 / d;
  let h = d;
  for (let m = 1; m <= 10_000; m++) {
    const m2 = 2 * m;
    let aa = (m * (b - m) * x) / ((qam + m2) * (a + m2));
    d = 1 + aa * d;
    if (Math.abs(d) < tiny) d = tiny;
    c = 1 + aa / c;
    if (Math.abs(c) < tiny) c = tiny;
    d = 1 / d;
    h *= d * c;
    aa = (-(a + m) * (qab + m) * x) / ((a + m2) * (qap + m2));
    d = 1 + aa * d;
    if (Math.abs(d) < tiny) d = tiny;
    c = 1 + aa / c;
    if (Math.abs(c) < tiny) c = tiny;
    d = 1 / d;
    const del = d * c;
    h *= del;
    if (Math.abs(del - 1) < 1e-15) break;
  }
  return h;
}

/** Regularised incomplete beta I_x(a, b) = CDF at x of the Beta(a, b) distribution. */
export function betaCdf(x: number, a: number, b: number): number {
  if (!(a > 0 && b > 0)) return NaN;
  if (x <= 0) return 0;
  if (x >= 1) return 1;
  const front = Math.exp(logGamma(a + b) - logGamma(a) - logGamma(b) + a * Math.log(x) + b * Math.log1p(-x));
  // The continued fraction converges fast for x < (a+1)/(a+b+2); use the symmetry I_x(a,b) = 1 − I_{1−x}(b,a) otherwise.
  if (x < (a + 1) / (a + b + 2)) return (front * betaContinuedFraction(a, b, x)) / a;
  return 1 - (front * betaContinuedFraction(b, a, 1 - x)) / b;
}

/**
 * Beta(a, b) quantile: the x with I_x(a, b) = p, by bisection on the monotone CDF (200 halvings
 * at most; stops when the bracket is below 1e-15 wide, which is beyond what any verdict reads).
 */
export function betaQuantile(p: number, a: number, b: number): number {
  if (!(p >= 0 && p <= 1) || !(a > 0 && b > 0)) return NaN;
  if (p === 0) return 0;
  if (p === 1) return 1;
  let lo = 0;
  let hi = 1;
  for (let i = 0; i < 200 && hi - lo > 1e-15; i++) {
    const mid = (lo + hi) / 2;
    if (betaCdf(mid, a, b) < p) lo = mid;
    else hi = mid;
  }
  return (lo + hi) / 2;
}

/**
 * Clopper–Pearson exact interval for a binomial share x/n (Clopper & Pearson 1934):
 * [B(α/2; x, n − x + 1), B(1 − α/2; x + 1, n − x)], with 0 when x = 0 and 1 when x = n.
 * The same interval as scipy.stats.binomtest(x, n).proportion_ci(method='exact').
 */
export function clopperPearson(x: number, n: number, confidence = 0.95): { share: number; low: number; high: number } {
  if (!Number.isInteger(x) || !Number.isInteger(n) || n < 1 || x < 0 || x > n) throw new RangeError(`Clopper–Pearson needs integers 0 ≤ x ≤ n, n ≥ 1; got x = ${x}, n = ${n}`);
  const alpha = 1 - confidence;
  const low = x === 0 ? 0 : betaQuantile(alpha / 2, x, n - x + 1);
  const high = x === n ? 1 : betaQuantile(1 - alpha / 2, x + 1, n - x);
  return { share: x / n, low, high };
}

/** Percentile of sorted data with NumPy's method='lower' (floor index) or 'higher' (ceil index). */
export function percentileSorted(sorted: ArrayLike<number>, percent: number, method: 'lower' | 'higher'): number {
  const n = sorted.length;
  if (n === 0) return NaN;
  // NumPy: q = percent / 100, virtual index (n − 1)·q, floor for 'lower', ceil for 'higher'
  // (numpy/lib/_function_base_impl.py, _QuantileMethods); same floating-point order here.
  const h = (n - 1) * (Math.min(100, Math.max(0, percent)) / 100);
  const i = method === 'lower' ? Math.floor(h) : Math.ceil(h);
  return sorted[Math.min(n - 1, Math.max(0, i))];
}

/**
 * Percentile rank of `value` among `sample`, in percent: the share strictly below plus half the
 * share equal (mid-rank, the convention of SciPy's percentileofscore(kind='mean')).
 */
export function percentileRank(sample: ArrayLike<number>, value: number): number {
  if (sample.length === 0 || !Number.isFinite(value)) return NaN;
  let below = 0;
  let equal = 0;
  for (let i = 0; i < sample.length; i++) {
    if (sample[i] < value) below++;
    else if (sample[i] === value) equal++;
  }
  return (100 * (below + equal / 2)) / sample.length;
}

/** Median of the non-NaN values (quickselect on a copy; the mean of the two middle values for even counts). */
export function median(xs: ArrayLike<number>): number {
  const a = new Float64Array(xs.length);
  let n = 0;
  for (let i = 0; i < xs.length; i++) if (!Number.isNaN(xs[i])) a[n++] = xs[i];
  if (n === 0) return NaN;
  const hi = select(a, n, n >> 1);
  if (n % 2) return hi;
  let lo = -Infinity;
  for (let i = 0; i < n >> 1; i++) if (a[i] > lo) lo = a[i];
  return (lo + hi) / 2;
}

/** k-th smallest of a[0..n) (Hoare quickselect); leaves a[0..k) ≤ a[k]. */
function select(a: Float64Array, n: number, k: number): number {
  let l = 0;
  let r = n - 1;
  while (l < r) {
    const pivot = a[(l + r) >> 1];
    let i = l;
    let j = r;
    while (i <= j) {
      while (a[i] < pivot) i++;
      while (a[j] > pivot) j--;
      if (i <= j) {
        const t = a[i];
        a[i] = a[j];
        a[j] = t;
        i++;
        j--;
      }
    }
    if (k <= j) r = j;
    else if (k >= i) l = i;
    else break;
  }
  return a[k];
}
