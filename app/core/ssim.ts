// Structural similarity (Wang, Bovik, Sheikh & Simoncelli 2004): K1 = 0.01, K2 = 0.03, an 11×11
// Gaussian window with σ = 1.5 normalised to sum 1 (or an 11×11 box), statistics as weighted
// moments, the map over the 'valid' region, MSSIM = mean of the map. Images are single-channel
// Float64/Float32 arrays; `dynamicRange` is L (255 for 8-bit, 2 for [−1, 1] floats).

export interface SsimOptions {
  window?: 'gaussian' | 'box';
  size?: number;
  sigma?: number;
  k1?: number;
  k2?: number;
  dynamicRange?: number;
}

function kernel(size: number, sigma: number, kind: 'gaussian' | 'box'): Float64Array {
  const k = new Float64Array(size);
  const c = (size - 1) / 2;
  for (let i = 0; i < size; i++) k[i] = kind === 'box' ? 1 : Math.exp(-((i - c) ** 2) / (2 * sigma * sigma));
  const s = k.reduce((a, b) => a + b, 0);
  return k.map((v) => v / s);
}

/** Separable 'valid' filtering of an image with a 1-D kernel along both axes. */
function filterValid(img: ArrayLike<number>, w: number, h: number, k: Float64Array): { data: Float64Array; w: number; h: number } {
  const n = k.length;
  const ow = w - n + 1;
  const oh = h - n + 1;
  const tmp = new Float64Array(ow * h);
  for (let y = 0; y < h; y++)
    for (let x = 0; x < ow; x++) {
      let s = 0;
      for (let i = 0; i < n; i++) s += k[i] * img[y * w + x + i];
      tmp[y * ow + x] = s;
    }
  const out = new Float64Array(ow * oh);
  for (let y = 0; y < oh; y++)
    for (let x = 0; x < ow; x++) {
      let s = 0;
      for (let i = 0; i < n; i++) s += k[i] * tmp[(y + i) * ow + x];
      out[y * ow + x] = s;
    }
  return { data: out, w: ow, h: oh };
}

export function ssim(a: ArrayLike<number>, b: ArrayLike<number>, width: number, height: number, options: SsimOptions = {}): number {
  const size = options.size ?? 11;
  if (width < size || height < size) throw new RangeError(`SSIM needs images of at least ${size}×${size}, got ${width}×${height}`);
  const L = options.dynamicRange ?? 255;
  const C1 = ((options.k1 ?? 0.01) * L) ** 2;
  const C2 = ((options.k2 ?? 0.03) * L) ** 2;
  const k = kernel(size, options.sigma ?? 1.5, options.window ?? 'gaussian');
  const n = width * height;
  const aa = new Float64Array(n);
  const bb = new Float64Array(n);
  const ab = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    aa[i] = a[i] * a[i];
    bb[i] = b[i] * b[i];
    ab[i] = a[i] * b[i];
  }
  const mx = filterValid(a, width, height, k).data;
  const my = filterValid(b, width, height, k).data;
  const sxx = filterValid(aa, width, height, k).data;
  const syy = filterValid(bb, width, height, k).data;
  const { data: sxy } = filterValid(ab, width, height, k);
  let total = 0;
  for (let i = 0; i < mx.length; i++) {
    const vx = sxx[i] - mx[i] * mx[i];
    const vy = syy[i] - my[i] * my[i];
    const cxy = sxy[i] - mx[i] * my[i];
    total += ((2 * mx[i] * my[i] + C1) * (2 * cxy + C2)) / ((mx[i] * mx[i] + my[i] * my[i] + C1) * (vx + vy + C2));
  }
  return total / mx.length;
}
