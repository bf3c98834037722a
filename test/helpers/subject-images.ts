// Synthetic subject-on-background images rendered analytically: each pixel's subject coverage is
// integrated by 8×8 supersampling of the exact shape, and colours are mixed by coverage in 8-bit
// sRGB (how a typical renderer anti-aliases). Every scene parameter maps to one exact image
// operation: centre = translation, scale = scaling about the centroid, angle = rotation, colours
// given in CIE LCh(ab) and converted by colorjs.io (an outside reference for CIE 15 colorimetry).
import Color from 'colorjs.io';
import type { RgbaImage } from '../../app/core/image.ts';

export interface Scene {
  width: number;
  height: number;
  /** centre in pixels (continuous; pixel (i, j) covers [i, i+1)×[j, j+1)) */
  cx: number;
  cy: number;
  /** mean radius in pixels */
  radius: number;
  /** shape: n-fold radial modulation r(φ) = radius·(1 + depth·cos(n(φ − angle))); n = 0 is a disc */
  fold: number;
  depth: number;
  /** degrees, clockwise on screen (y down) */
  angle: number;
  /** ellipse instead: axis ratio b/a (< 1) along `angle`; overrides fold when set */
  axisRatio?: number;
  subject: [number, number, number]; // L*, C*ab, h (degrees), CIELAB D65
  background: [number, number, number];
  /** an inset of another colour: offset from the centre as a fraction of the radius, its radius fraction, LCh */
  inset?: { dx: number; dy: number; r: number; colour: [number, number, number] };
  /** Gaussian blur σ in pixels applied to the coverage (0 = none) */
  blur?: number;
}

/** LCh(ab) D65 → 8-bit sRGB via colorjs.io ('lab-d65' is CIE 15 L*a*b* with the D65 white). */
export function lchToSrgb8([L, C, h]: [number, number, number]): [number, number, number] {
  const rad = (h * Math.PI) / 180;
  const c = new Color('lab-d65', [L, C * Math.cos(rad), C * Math.sin(rad)]).to('srgb');
  const out = c.coords.map((v) => Math.round(Math.min(1, Math.max(0, v ?? 0)) * 255)) as [number, number, number];
  return out;
}

const SS = 8;

export function renderScene(s: Scene): RgbaImage {
  const { width: w, height: h } = s;
  const cover = new Float64Array(w * h);
  const inset = new Float64Array(w * h);
  const th = (s.angle * Math.PI) / 180;
  const inside = (x: number, y: number) => {
    const dx = x - s.cx;
    const dy = y - s.cy;
    // Rotate into the shape's frame (clockwise on screen with y down = positive angle).
    const u = dx * Math.cos(th) + dy * Math.sin(th);
    const v = -dx * Math.sin(th) + dy * Math.cos(th);
    if (s.axisRatio !== undefined) return (u / s.radius) ** 2 + (v / (s.radius * s.axisRatio)) ** 2 <= 1;
    const r = Math.hypot(u, v);
    const phi = Math.atan2(v, u);
    return r <= s.radius * (1 + (s.fold ? s.depth * Math.cos(s.fold * phi) : 0));
  };
  const inInset = (x: number, y: number) => {
    if (!s.inset) return false;
    const th2 = th;
    const ox = s.cx + s.radius * (s.inset.dx * Math.cos(th2) - s.inset.dy * Math.sin(th2));
    const oy = s.cy + s.radius * (s.inset.dx * Math.sin(th2) + s.inset.dy * Math.cos(th2));
    return Math.hypot(x - ox, y - oy) <= s.inset.r * s.radius;
  };
  for (let j = 0; j < h; j++)
    for (let i = 0; i < w; i++) {
      let c = 0;
      let g = 0;
      for (let a = 0; a < SS; a++)
        for (let b = 0; b < SS; b++) {
          const x = i + (a + 0.5) / SS;
          const y = j + (b + 0.5) / SS;
          if (inside(x, y)) {
            c++;
            if (inInset(x, y)) g++;
          }
        }
      cover[j * w + i] = c / (SS * SS);
      inset[j * w + i] = g / (SS * SS);
    }
  const blurred = s.blur ? gaussianBlur(cover, w, h, s.blur) : cover;
  const insetBlurred = s.blur && s.inset ? gaussianBlur(inset, w, h, s.blur) : inset;
  const fg = lchToSrgb8(s.subject);
  const bg = lchToSrgb8(s.background);
  const gem = s.inset ? lchToSrgb8(s.inset.colour) : fg;
  const data = new Uint8ClampedArray(w * h * 4);
  for (let p = 0; p < w * h; p++) {
    const g = insetBlurred[p];
    const c = blurred[p] - g;
    for (let k = 0; k < 3; k++) data[p * 4 + k] = Math.round(c * fg[k] + g * gem[k] + (1 - c - g) * bg[k]);
    data[p * 4 + 3] = 255;
  }
  return { width: w, height: h, data };
}

/** Separable Gaussian blur with edge clamping (kernel to ±4σ, normalised). */
export function gaussianBlur(src: Float64Array, w: number, h: number, sigma: number): Float64Array {
  const r = Math.ceil(4 * sigma);
  const k = Array.from({ length: 2 * r + 1 }, (_, i) => Math.exp(-((i - r) ** 2) / (2 * sigma * sigma)));
  const sum = k.reduce((a, b) => a + b, 0);
  const tmp = new Float64Array(w * h);
  const out = new Float64Array(w * h);
  for (let y = 0; y < h; y++)
    for (let x = 0; x < w; x++) {
      let v = 0;
      for (let t = -r; t <= r; t++) v += k[t + r] * src[y * w + Math.min(w - 1, Math.max(0, x + t))];
      tmp[y * w + x] = v / sum;
    }
  for (let y = 0; y < h; y++)
    for (let x = 0; x < w; x++) {
      let v = 0;
      for (let t = -r; t <= r; t++) v += k[t + r] * tmp[Math.min(h - 1, Math.max(0, y + t)) * w + x];
      out[y * w + x] = v / sum;
    }
  return out;
}
