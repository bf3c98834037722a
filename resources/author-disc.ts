// Authors the second test generator of the project: "Disc stamps", a five-pointed stamp on a plain
// card, with NO attribute output and NO model card — it gives only images, as a real generator
// does, so audits of it must measure from the images alone. Writes, deterministically from SEED:
//   disc.onnx               z [N,12] → image [N,3,64,64] in [0, 1] (sRGB values; the range is
//                           inferred on loading, as for any generator without a card)
//   disc-directions.npy     [8,12] directions of known truth, and disc-directions.json (sidecar)
// Six factors, each a unit-σ projection of z on its own orthonormal axis u_j, so a direction
// along u_j moves exactly one factor and nothing else in the image:
//   shift_x, shift_y  centre at 0.5 ± 0.04 of the width per σ
//   size              outer radius 0.16·exp(0.09 f) of the width
//   rotation          0.3 rad per σ (the five-fold star's period is 72°)
//   hue               subject h_ab = 40° + 25° per σ at constant L* = 58, C*ab = 40 (CIE LCh(ab),
//                     converted to sRGB inside the graph, so a hue change moves nothing else)
//   backdrop          background L* = 72 + 5 per σ at constant a* = −2, b* = −7
// Usage: tsx resources/author-disc.ts [outDir]   (default: resources/disc)
import { mkdirSync, writeFileSync } from 'node:fs';
import { join, dirname } from 'node:path';
import { fileURLToPath } from 'node:url';
import { Matrix, inverse } from 'ml-matrix';
import { GraphBuilder } from '../app/core/onnx/graph-builder.ts';
import { Random } from '../app/core/random.ts';
import { encodeNpy } from '../app/core/npy.ts';
import { D65_WHITE, SRGB_TO_XYZ } from '../app/core/color.ts';

export const DISC_SEED = 20261202;
const Z = 12;
const SIZE = 64;
export const DISC_FACTORS = ['shift_x', 'shift_y', 'size', 'rotation', 'hue', 'backdrop'] as const;
/** Depth of the five points: r(φ) = R(1 + 0.2·cos 5(φ − θ)). */
const POINT_DEPTH = 0.2;
/** Edge softness in image units (the image spans 2): about 0.35 px. */
const EDGE = 0.011;

/** One row of the documented truth: what an audit from the images alone must find. */
export interface DiscTruth {
  verdict: 'pass' | 'fail' | 'no-measure';
  leaksInto: string[];
  note: string;
}

export function authorDisc(outDir: string): { files: string[] } {
  const rng = new Random(DISC_SEED, 1);
  // Orthonormal factor axes (Gram–Schmidt of Gaussian vectors), plus one axis no factor reads.
  const axes: number[][] = [];
  while (axes.length < DISC_FACTORS.length + 1) {
    let v = Array.from({ length: Z }, () => rng.normal());
    for (const a of axes) {
      const d = a.reduce((s, x, i) => s + x * v[i], 0);
      v = v.map((x, i) => x - d * a[i]);
    }
    const n = Math.hypot(...v);
    axes.push(v.map((x) => x / n));
  }
  const u = (name: (typeof DISC_FACTORS)[number]) => axes[DISC_FACTORS.indexOf(name)];
  const inert = axes[DISC_FACTORS.length];
  const mix = (a: number[], b: number[], k: number) => {
    const v = a.map((x, i) => x + k * b[i]);
    const n = Math.hypot(...v);
    return v.map((x) => x / n);
  };

  const directions: { name: string; target: string; vector: number[]; truth: DiscTruth }[] = [
    { name: 'slide', target: 'subject_x', vector: u('shift_x'), truth: { verdict: 'pass', leaksInto: [], note: 'clean: moves the stamp sideways and nothing else' } },
    { name: 'grow', target: 'subject_radius', vector: u('size'), truth: { verdict: 'pass', leaksInto: [], note: 'clean: scales the stamp about its centre' } },
    { name: 'spin', target: 'orientation', vector: u('rotation'), truth: { verdict: 'pass', leaksInto: [], note: 'clean: turns the five-pointed stamp about its centre' } },
    { name: 'tint', target: 'subject_hue', vector: u('hue'), truth: { verdict: 'pass', leaksInto: [], note: 'clean: turns the stamp’s hue in LCh(ab) at constant L* and C*ab' } },
    { name: 'swell', target: 'subject_radius', vector: mix(u('size'), u('backdrop'), 0.8), truth: { verdict: 'fail', leaksInto: ['background_lightness'], note: 'leaky: grows the stamp and lightens the card by 0.8 of the size change (in σ units)' } },
    { name: 'drift', target: 'subject_y', vector: mix(u('shift_y'), u('hue'), 0.05), truth: { verdict: 'pass', leaksInto: [], note: 'nearly clean: moves the stamp down and turns its hue by 0.05 of that (in latent σ units): about 0.1 σ of subject hue at ±2, half the pass threshold of 0.2 σ' } },
    { name: 'still', target: 'subject_x', vector: inert, truth: { verdict: 'fail', leaksInto: [], note: 'inert: no factor reads this axis; it barely moves its target (or anything)' } },
    { name: 'sheen', target: 'sheen', vector: mix(u('hue'), u('backdrop'), 1), truth: { verdict: 'no-measure', leaksInto: [], note: 'its target, sheen, has no measure: the audit must say so rather than judge it on whatever moved most' } },
  ];

  const model = buildSynthesis(axes.slice(0, DISC_FACTORS.length));
  const stacked = new Float32Array(directions.length * Z);
  directions.forEach((d, k) => d.vector.forEach((v, i) => (stacked[k * Z + i] = v)));
  const meta = {
    format: 'plumbline.directions',
    version: 1,
    file: 'disc-directions.npy',
    latentSize: Z,
    space: 'z',
    directions: directions.map(({ vector: _v, ...rest }) => ({ ...rest, layers: null, notes: rest.truth.note, source: { method: 'authored', generator: 'Disc stamps (test generator)', seed: DISC_SEED } })),
  };
  mkdirSync(outDir, { recursive: true });
  const files: [string, Uint8Array | string][] = [
    ['disc.onnx', model],
    ['disc-directions.npy', encodeNpy(stacked, [directions.length, Z])],
    ['disc-directions.json', JSON.stringify(meta, null, 2) + '\n'],
  ];
  for (const [name, content] of files) writeFileSync(join(outDir, name), content);
  return { files: files.map(([n]) => join(outDir, n)) };
}

function buildSynthesis(axes: number[][]): Uint8Array {
  const g = new GraphBuilder('disc_synthesis');
  const z = g.input('z', ['N', Z]);
  const F = axes.length;
  const M = new Float32Array(Z * F);
  axes.forEach((a, j) => a.forEach((v, i) => (M[i * F + j] = v)));
  const proj = g.matmul(z, g.tensor('factor_axes', M, [Z, F]));
  const factor = (j: number) => g.op('Slice', [proj, g.int64s('st', [j]), g.int64s('en', [j + 1]), g.int64s('ax', [1])]);
  const col4 = g.int64s('shape_n111', [-1, 1, 1, 1]);
  const s4 = (x: string) => g.op('Reshape', [x, col4]);
  // Image coordinates span [−1, 1], so a fraction f of the width is 2f here.
  const CX = s4(g.affine(factor(0), 2 * 0.04));
  const CY = s4(g.affine(factor(1), 2 * 0.04));
  const R = s4(g.mul(g.exp(g.affine(factor(2), 0.09)), g.scalar(2 * 0.16)));
  const TH = s4(g.affine(factor(3), 0.3));
  const hue = g.affine(factor(4), (25 * Math.PI) / 180, (40 * Math.PI) / 180);
  const backL = g.affine(factor(5), 5, 72);

  const xs = new Float32Array(SIZE * SIZE);
  const ys = new Float32Array(SIZE * SIZE);
  for (let r = 0; r < SIZE; r++)
    for (let c = 0; c < SIZE; c++) {
      xs[r * SIZE + c] = ((c + 0.5) / SIZE) * 2 - 1;
      ys[r * SIZE + c] = ((r + 0.5) / SIZE) * 2 - 1;
    }
  const X = g.tensor('grid_x', xs, [1, 1, SIZE, SIZE]);
  const Y = g.tensor('grid_y', ys, [1, 1, SIZE, SIZE]);
  const dx = g.sub(X, CX);
  const dy = g.sub(Y, CY);
  const ct = g.cos(TH);
  const st = g.sin(TH);
  const along = g.add(g.mul(dx, ct), g.mul(dy, st));
  const rho = g.sqrt(g.add(g.add(g.mul(dx, dx), g.mul(dy, dy)), g.scalar(1e-8)));
  const c = g.div(along, rho);
  const c2 = g.mul(c, c);
  const t5 = g.mul(c, g.add(g.sub(g.mul(g.mul(c2, c2), g.scalar(16)), g.mul(c2, g.scalar(20))), g.scalar(5))); // cos 5φ (Chebyshev T5)
  const boundary = g.mul(R, g.add(g.scalar(1), g.mul(t5, g.scalar(POINT_DEPTH))));
  const cover = g.sigmoid(g.mul(g.sub(boundary, rho), g.scalar(1 / EDGE)));

  // CIE LCh(ab) → L*a*b* → XYZ (D65) → linear sRGB → sRGB (IEC 61966-2-1), per image.
  const fg = labToSrgb(g, g.affine(g.mul(hue, g.scalar(0)), 1, 58), g.mul(g.cos(hue), g.scalar(40)), g.mul(g.sin(hue), g.scalar(40)));
  const bg = labToSrgb(g, backL, g.affine(g.mul(backL, g.scalar(0)), 1, -2), g.affine(g.mul(backL, g.scalar(0)), 1, -7));
  const img = g.lerp(bg, fg, cover);
  g.output(img, 'image', ['N', 3, SIZE, SIZE]);
  return g.toModel({ plumbline_role: 'synthesis', resolution: String(SIZE) }, 'Disc stamps: a test generator with known factors and no attribute output');
}

/** [N,1] L*, a*, b* → [N,3,1,1] sRGB in [0, 1] (CIE 15 inverse; f > 6/29 holds for every colour used here). */
function labToSrgb(g: GraphBuilder, L: string, a: string, b: string): string {
  const fy = g.affine(L, 1 / 116, 16 / 116);
  const fx = g.add(fy, g.affine(a, 1 / 500));
  const fz = g.sub(fy, g.affine(b, 1 / 200));
  const cube = (x: string) => g.mul(g.mul(x, x), x);
  const xyz = g.op('Concat', [g.affine(cube(fx), D65_WHITE[0]), g.affine(cube(fy), D65_WHITE[1]), g.affine(cube(fz), D65_WHITE[2])], { axis: 1 }); // [N,3]
  const inv = inverse(new Matrix(SRGB_TO_XYZ)).to2DArray();
  const lin = g.matmul(xyz, g.tensor('xyz_to_linear_srgb', transposeFlat(inv), [3, 3]));
  const clipped = g.op('Clip', [lin, g.scalar(0.0031308), g.scalar(1)]);
  const encoded = g.affine(g.op('Pow', [clipped, g.scalar(1 / 2.4)]), 1.055, -0.055);
  return g.op('Reshape', [encoded, g.int64s('shape_n311', [-1, 3, 1, 1])]);
}

/** Row-major [3,3] of Mᵀ, so that xyz (row vector) · Mᵀ = (M · xyzᵀ)ᵀ. */
function transposeFlat(m: number[][]): number[] {
  return [0, 1, 2].flatMap((i) => [0, 1, 2].map((j) => m[j][i]));
}

if (process.argv[1] && fileURLToPath(import.meta.url) === process.argv[1]) {
  const out = process.argv[2] ?? join(dirname(fileURLToPath(import.meta.url)), 'disc');
  const { files } = authorDisc(out);
  for (const f of files) console.log(`wrote ${f}`);
}
