// Colour science from the standards: sRGB (IEC 61966-2-1) → linear → CIE XYZ (D65) → CIELAB
// (CIE 15), and the CIEDE2000 colour difference (Sharma, Wu & Dalal 2005). The RGB→XYZ matrix is
// derived here from the sRGB primaries and the D65 chromaticity rather than copied as rounded
// numbers, so white maps to a* = b* = 0 exactly.

/** sRGB primaries and white point, IEC 61966-2-1 (chromaticity x, y). */
const PRIMARIES = { r: [0.64, 0.33], g: [0.3, 0.6], b: [0.15, 0.06] } as const;
const D65_XY = [0.3127, 0.329] as const;

function xyToXyz([x, y]: readonly [number, number]): [number, number, number] {
  return [x / y, 1, (1 - x - y) / y];
}

function invert3(m: number[][]): number[][] {
  const [a, b, c] = m[0];
  const [d, e, f] = m[1];
  const [g, h, i] = m[2];
  const A = e * i - f * h;
  const B = -(d * i - f * g);
  const C = d * h - e * g;
  const det = a * A + b * B + c * C;
  return [
    [A / det, -(b * i - c * h) / det, (b * f - c * e) / det],
    [B / det, (a * i - c * g) / det, -(a * f - c * d) / det],
    [C / det, -(a * h - b * g) / det, (a * e - b * d) / det],
  ];
}

/** D65 reference white in XYZ with Y = 1. */
export const D65_WHITE = xyToXyz(D65_XY);

/** Linear sRGB → XYZ matrix: columns are the primaries scaled so that RGB (1,1,1) maps to white. */
export const SRGB_TO_XYZ: number[][] = (() => {
  const cols = [xyToXyz(PRIMARIES.r), xyToXyz(PRIMARIES.g), xyToXyz(PRIMARIES.b)];
  const P = [0, 1, 2].map((row) => cols.map((c) => c[row]));
  const Pinv = invert3(P);
  const S = Pinv.map((row) => row[0] * D65_WHITE[0] + row[1] * D65_WHITE[1] + row[2] * D65_WHITE[2]);
  return P.map((row) => row.map((v, k) => v * S[k]));
})();

/** sRGB transfer function decode, IEC 61966-2-1: v in [0, 1]. */
export function srgbDecode(v: number): number {
  return v <= 0.04045 ? v / 12.92 : ((v + 0.055) / 1.055) ** 2.4;
}

/** Decoded values for all 8-bit codes. */
export const SRGB8_TO_LINEAR = Float64Array.from({ length: 256 }, (_, i) => srgbDecode(i / 255));

const EPSILON = 216 / 24389; // CIE 15: (6/29)³
const KAPPA = 24389 / 27; // CIE 15: (29/3)³

function labF(t: number): number {
  return t > EPSILON ? Math.cbrt(t) : (KAPPA * t + 16) / 116;
}

export type Lab = [number, number, number];

export function linearRgbToLab(r: number, g: number, b: number): Lab {
  const m = SRGB_TO_XYZ;
  const X = m[0][0] * r + m[0][1] * g + m[0][2] * b;
  const Y = m[1][0] * r + m[1][1] * g + m[1][2] * b;
  const Z = m[2][0] * r + m[2][1] * g + m[2][2] * b;
  const fx = labF(X / D65_WHITE[0]);
  const fy = labF(Y / D65_WHITE[1]);
  const fz = labF(Z / D65_WHITE[2]);
  return [116 * fy - 16, 500 * (fx - fy), 200 * (fy - fz)];
}

const XYZ_TO_SRGB = invert3(SRGB_TO_XYZ);

/** CIELAB (D65) → 8-bit sRGB, the inverse of the CIE 15 and IEC 61966-2-1 steps; out-of-gamut values are clipped. */
export function labToSrgb8(L: number, a: number, b: number): [number, number, number] {
  const fy = (L + 16) / 116;
  const fx = fy + a / 500;
  const fz = fy - b / 200;
  const inv = (f: number) => (f > 6 / 29 ? f * f * f : (116 * f - 16) / KAPPA);
  const X = inv(fx) * D65_WHITE[0];
  const Y = inv(fy) * D65_WHITE[1];
  const Z = inv(fz) * D65_WHITE[2];
  const m = XYZ_TO_SRGB;
  const enc = (v: number) => {
    const c = Math.min(1, Math.max(0, v));
    return Math.round(255 * (c <= 0.0031308 ? 12.92 * c : 1.055 * c ** (1 / 2.4) - 0.055));
  };
  return [enc(m[0][0] * X + m[0][1] * Y + m[0][2] * Z), enc(m[1][0] * X + m[1][1] * Y + m[1][2] * Z), enc(m[2][0] * X + m[2][1] * Y + m[2][2] * Z)];
}

/** 8-bit sRGB → CIELAB (D65). */
export function srgb8ToLab(r: number, g: number, b: number): Lab {
  return linearRgbToLab(SRGB8_TO_LINEAR[r], SRGB8_TO_LINEAR[g], SRGB8_TO_LINEAR[b]);
}

export function chroma(lab: Lab): number {
  return Math.hypot(lab[1], lab[2]);
}

const deg = Math.PI / 180;

/** Hue angle h' in degrees for CIEDE2000 (0 for a neutral colour). Module-level: it runs per pixel. */
function primeHue(a: number, b: number): number {
  if (a === 0 && b === 0) return 0;
  const h = Math.atan2(b, a) / deg;
  return h < 0 ? h + 360 : h;
}

/** CIEDE2000 with k_L = k_C = k_H = 1, following Sharma, Wu & Dalal (2005) step by step. */
export function ciede2000(lab1: Lab, lab2: Lab): number {
  const [L1, a1, b1] = lab1;
  const [L2, a2, b2] = lab2;
  const C1 = Math.hypot(a1, b1);
  const C2 = Math.hypot(a2, b2);
  const Cbar = (C1 + C2) / 2;
  const Cbar7 = Cbar ** 7;
  const G = 0.5 * (1 - Math.sqrt(Cbar7 / (Cbar7 + 25 ** 7)));
  const a1p = (1 + G) * a1;
  const a2p = (1 + G) * a2;
  const C1p = Math.hypot(a1p, b1);
  const C2p = Math.hypot(a2p, b2);
  const h1p = primeHue(a1p, b1);
  const h2p = primeHue(a2p, b2);
  const dLp = L2 - L1;
  const dCp = C2p - C1p;
  let dhp = 0;
  if (C1p * C2p !== 0) {
    dhp = h2p - h1p;
    if (dhp > 180) dhp -= 360;
    else if (dhp < -180) dhp += 360;
  }
  const dHp = 2 * Math.sqrt(C1p * C2p) * Math.sin((dhp / 2) * deg);
  const Lbarp = (L1 + L2) / 2;
  const Cbarp = (C1p + C2p) / 2;
  let hbarp: number;
  if (C1p * C2p === 0) hbarp = h1p + h2p;
  else if (Math.abs(h1p - h2p) <= 180) hbarp = (h1p + h2p) / 2;
  else if (h1p + h2p < 360) hbarp = (h1p + h2p + 360) / 2;
  else hbarp = (h1p + h2p - 360) / 2;
  const T = 1 - 0.17 * Math.cos((hbarp - 30) * deg) + 0.24 * Math.cos(2 * hbarp * deg) + 0.32 * Math.cos((3 * hbarp + 6) * deg) - 0.2 * Math.cos((4 * hbarp - 63) * deg);
  const dTheta = 30 * Math.exp(-(((hbarp - 275) / 25) ** 2));
  const Cbarp7 = Cbarp ** 7;
  const RC = 2 * Math.sqrt(Cbarp7 / (Cbarp7 + 25 ** 7));
  const SL = 1 + (0.015 * (Lbarp - 50) ** 2) / Math.sqrt(20 + (Lbarp - 50) ** 2);
  const SC = 1 + 0.045 * Cbarp;
  const SH = 1 + 0.015 * Cbarp * T;
  const RT = -Math.sin(2 * dTheta * deg) * RC;
  const l = dLp / SL;
  const c = dCp / SC;
  const h = dHp / SH;
  return Math.sqrt(l * l + c * c + h * h + RT * c * h);
}
