// Authors the bundled demo generator: "Tidebound sigils", faction emblems for the card game of
// the fictional Brackwater Games. Writes, deterministically from SEED:
//   sigil-mapping.onnx    z [N,32] → w [N,32]   (a small MLP, like a style-based mapping network)
//   sigil-synthesis.onnx  ws [N,3,32] → image [N,3,128,128] in [−1,1], attributes [N,13]
//   sigil.card.json       the model card
//   sigil-directions.npy  [7,32] demo directions and sigil-directions.json (metadata + documented truth)
// Usage: tsx resources/author-demo.ts [outDir]   (default: resources/demo)
import { mkdirSync, writeFileSync } from 'node:fs';
import { join, dirname } from 'node:path';
import { fileURLToPath } from 'node:url';
import { Matrix, pseudoInverse } from 'ml-matrix';
import { GraphBuilder } from '../app/core/onnx/graph-builder.ts';
import { Random } from '../app/core/random.ts';
import { encodeNpy } from '../app/core/npy.ts';

export const SEED = 20261201;
const Z = 32;
const D = 32;
const HIDDEN = 64;
const SIZE = 128;
const SAMPLES = 20000;

/** Ground-truth factors per synthesis stage (W+ row). Early rows drive form, later ones finish and colour. */
export const STAGES = [
  { name: 'form', factors: ['size', 'aspect', 'rotation', 'spikiness', 'shift_x', 'shift_y'] },
  { name: 'finish', factors: ['outline', 'glow', 'gem'] },
  { name: 'palette', factors: ['hue', 'saturation', 'backdrop'] },
] as const;

const ATTRIBUTES: { name: string; unit: string; description: string }[] = [
  { name: 'size', unit: 'fraction of half-width', description: 'outer radius of the sigil' },
  { name: 'aspect', unit: 'ratio', description: 'elongation along the sigil axis' },
  { name: 'rotation', unit: 'radians', description: 'angle of the sigil axis, clockwise on screen' },
  { name: 'spikiness', unit: 'ratio', description: 'depth of the five points (0 = disc)' },
  { name: 'shift_x', unit: 'fraction of half-width', description: 'horizontal offset of the centre' },
  { name: 'shift_y', unit: 'fraction of half-width', description: 'vertical offset of the centre (down is positive)' },
  { name: 'outline', unit: 'fraction of half-width', description: 'ink outline half-width' },
  { name: 'glow', unit: '0..1', description: 'strength of the halo around the sigil' },
  { name: 'gem', unit: 'fraction of radius', description: 'size of the central gem' },
  { name: 'hue', unit: 'turns', description: 'hue of the sigil palette' },
  { name: 'saturation', unit: '0..1', description: 'palette saturation' },
  { name: 'backdrop', unit: '0..1', description: 'lightness of the card background' },
  { name: 'artifact', unit: '0..1', description: 'strength of the overdrive artefact (0 on healthy images)' },
];

/** The glow direction should break at this strength (σ units) from the truncation centre. */
const BREAK_STRENGTH = 2.5;

function gaussianMatrix(rng: Random, rows: number, cols: number, scale: number): number[][] {
  return Array.from({ length: rows }, () => Array.from({ length: cols }, () => rng.normal() * scale));
}

/** The mapping network in float64, mirroring the ONNX graph; used for statistics only. */
function mapLatent(z: Float64Array, A1: number[][], b1: number[], A2: number[][], b2: number[]): Float64Array {
  let ms = 0;
  for (const v of z) ms += v * v;
  const norm = 1 / Math.sqrt(ms / z.length + 1e-8);
  const h = new Float64Array(HIDDEN);
  for (let j = 0; j < HIDDEN; j++) {
    let s = b1[j];
    for (let i = 0; i < Z; i++) s += z[i] * norm * A1[i][j];
    h[j] = s > 0 ? s : 0.2 * s;
  }
  const w = new Float64Array(D);
  for (let j = 0; j < D; j++) {
    let s = b2[j];
    for (let i = 0; i < HIDDEN; i++) s += h[i] * A2[i][j];
    w[j] = s;
  }
  return w;
}

export function authorDemo(outDir: string): { files: string[] } {
  const rng = new Random(SEED, 1);
  const A1 = gaussianMatrix(rng, Z, HIDDEN, 1 / Math.sqrt(Z));
  const b1 = Array.from({ length: HIDDEN }, () => rng.normal() * 0.1);
  const A2 = gaussianMatrix(rng, HIDDEN, D, 1 / Math.sqrt(HIDDEN));
  const b2 = Array.from({ length: D }, () => rng.normal() * 0.2);

  // Statistics of W from random z: the truncation centre and covariance.
  const sampler = new Random(SEED, 2);
  const mean = new Float64Array(D);
  const ws: Float64Array[] = [];
  for (let n = 0; n < SAMPLES; n++) {
    const z = new Float64Array(Z);
    for (let i = 0; i < Z; i++) z[i] = sampler.normal();
    const w = mapLatent(z, A1, b1, A2, b2);
    ws.push(w);
    for (let i = 0; i < D; i++) mean[i] += w[i] / SAMPLES;
  }
  const cov = new Matrix(D, D);
  for (const w of ws) for (let i = 0; i < D; i++) for (let j = 0; j < D; j++) cov.set(i, j, cov.get(i, j) + ((w[i] - mean[i]) * (w[j] - mean[j])) / (SAMPLES - 1));

  // Factor read-outs: random (hence entangled) columns, scaled so each projection has unit σ over W.
  const columns: number[][] = [];
  const stageColumns: number[][][] = STAGES.map((stage) =>
    stage.factors.map(() => {
      const m = Array.from({ length: D }, () => rng.normal());
      const mv = Matrix.columnVector(m);
      const variance = mv.transpose().mmul(cov).mmul(mv).get(0, 0);
      const col = m.map((v) => v / Math.sqrt(variance));
      columns.push(col);
      return col;
    }),
  );
  const Mall = new Matrix(D, columns.length);
  columns.forEach((c, j) => c.forEach((v, i) => Mall.set(i, j, v)));

  const mapping = buildMapping(A1, b1, A2, b2);

  // Demo directions, unit vectors in W. "clean in W" solves Mallᵀd = e_j (minimum norm).
  const factorIndex = (name: string) => STAGES.flatMap((s) => s.factors as readonly string[]).indexOf(name);
  const PinvT = pseudoInverse(Mall.transpose()); // D × F: column j is the clean W direction for factor j
  const cleanW = (name: string) => PinvT.getColumn(factorIndex(name));
  const stagePinv = (stage: number, name: string) => {
    const M = new Matrix(stageColumns[stage].length, D);
    stageColumns[stage].forEach((c, j) => c.forEach((v, i) => M.set(j, i, v)));
    const k = (STAGES[stage].factors as readonly string[]).indexOf(name);
    return pseudoInverse(M).getColumn(k);
  };
  const unit = (v: number[]) => {
    const n = Math.hypot(...v);
    return v.map((x) => x / n);
  };
  const sigmaOf = (d: number[]) => {
    const v = Matrix.columnVector(d);
    return Math.sqrt(v.transpose().mmul(cov).mmul(v).get(0, 0));
  };
  const response = (d: number[]) => {
    // Change of every factor projection per σ-step of the direction.
    const s = sigmaOf(d);
    return STAGES.flatMap((st) => st.factors as readonly string[]).map((name, j) => ({ name, perSigma: s * columns[j].reduce((a, c, i) => a + c * d[i], 0) }));
  };

  const axis = 7;
  const axisDir = Array.from({ length: D }, (_, i) => (i === axis ? 1 : 0));
  const glowClean = unit(cleanW('glow'));
  const glowRate = response(glowClean).find((r) => r.name === 'glow')!.perSigma;
  // Glow projections beyond `overdrive` (in σ of random samples) push the finish stage into artefacts.
  const overdrive = Math.round(BREAK_STRENGTH * glowRate * 1000) / 1000;
  const synthesis = buildSynthesis(Float32Array.from(mean), stageColumns, overdrive);

  const directions = [
    { name: 'crest_size', target: 'size', layers: null, vector: unit(cleanW('size')), truth: { verdict: 'clean', leaksInto: [], note: 'changes only size, in every W+ row' } },
    { name: 'turn', target: 'rotation', layers: null, vector: unit(cleanW('rotation')), truth: { verdict: 'clean', leaksInto: [], note: 'changes only rotation' } },
    { name: 'hue_shift', target: 'hue', layers: [2, 3], vector: unit(stagePinv(2, 'hue')), truth: { verdict: 'clean', leaksInto: [], note: 'clean when applied to the palette row (W+ layer 2) only, as its layer range says' } },
    { name: 'gem_grow', target: 'gem', layers: [1, 2], vector: unit(stagePinv(1, 'gem')), truth: { verdict: 'clean', leaksInto: [], note: 'clean on the finish row (W+ layer 1)' } },
    { name: 'outline_bold', target: 'outline', layers: null, vector: unit(addScaled(cleanW('outline'), cleanW('backdrop'), 0.7)), truth: { verdict: 'leaky', leaksInto: ['backdrop'], note: 'moves backdrop by 0.7 of its outline change, in projection units' } },
    { name: 'axis_07', target: null as string | null, layers: null, vector: axisDir, truth: { verdict: 'leaky', leaksInto: [] as string[], note: `a naive slider along the natural W axis ${axis}; moves many factors at once` } },
    { name: 'glow_surge', target: 'glow', layers: null, vector: glowClean, truth: { verdict: 'breaks', leaksInto: [], note: '', breaksAbove: 0 } },
  ];
  // Document the naive axis truthfully from its actual responses.
  const axisResp = response(axisDir).sort((a, b) => Math.abs(b.perSigma) - Math.abs(a.perSigma));
  directions[5].target = null;
  directions[5].truth.leaksInto = axisResp.slice(1, 4).map((r) => r.name);
  directions[5].truth.note += `; moves ${axisResp[0].name} most, then ${axisResp.slice(1, 4).map((r) => r.name).join(', ')}`;
  (directions[5].truth as Record<string, unknown>).movesMost = axisResp[0].name;
  // A probe at the truncation centre crosses the overdrive threshold at this strength.
  const breaks = Math.round((overdrive / glowRate) * 100) / 100;
  directions[6].truth = { verdict: 'breaks', leaksInto: [], note: `clean glow until the overdrive artefact appears at about +${breaks} σ from the centre (earlier on probes that already glow)`, breaksAbove: breaks };

  const stacked = new Float32Array(directions.length * D);
  directions.forEach((d, k) => d.vector.forEach((v, i) => (stacked[k * D + i] = v)));

  const card = {
    format: 'plumbline.model-card',
    version: 1,
    name: 'Tidebound sigils (demo)',
    description:
      'Faction sigils for the fictional card game Tidebound by Brackwater Games: a five-pointed emblem with outline, gem, halo and card backdrop. Authored procedurally by resources/author-demo.ts; it is a stand-in for a trained generator, not one.',
    licence: 'Authored by the Plumbline project; free to use for testing and demos. No training data.',
    synthesis: { file: 'sigil-synthesis.onnx', latentInput: 'ws', space: 'w+', layers: STAGES.length, latentSize: D, output: 'image', layout: 'NCHW', range: [-1, 1], attributesOutput: 'attributes' },
    mapping: { file: 'sigil-mapping.onnx', input: 'z', output: 'w', zSize: Z },
    truncation: { centre: Array.from(Float32Array.from(mean)), defaultPsi: 0.7 },
    directions: 'sigil-directions.npy',
    attributes: ATTRIBUTES,
    layerNotes: STAGES.map((s, i) => ({ layer: i, name: s.name, drives: [...s.factors] })),
  };
  const meta = {
    format: 'plumbline.directions',
    version: 1,
    file: 'sigil-directions.npy',
    latentSize: D,
    space: 'w',
    directions: directions.map(({ vector: _v, ...rest }) => ({ ...rest, notes: rest.truth.note, source: { method: 'authored', generator: 'Tidebound sigils (demo)', seed: SEED } })),
  };

  mkdirSync(outDir, { recursive: true });
  const files: [string, Uint8Array | string][] = [
    ['sigil-mapping.onnx', mapping],
    ['sigil-synthesis.onnx', synthesis],
    ['sigil.card.json', JSON.stringify(card, null, 2) + '\n'],
    ['sigil-directions.npy', encodeNpy(stacked, [directions.length, D])],
    ['sigil-directions.json', JSON.stringify(meta, null, 2) + '\n'],
  ];
  for (const [name, content] of files) writeFileSync(join(outDir, name), content);
  return { files: files.map(([n]) => join(outDir, n)) };
}

function addScaled(a: number[], b: number[], k: number): number[] {
  return a.map((v, i) => v + k * b[i]);
}

function buildMapping(A1: number[][], b1: number[], A2: number[][], b2: number[]): Uint8Array {
  const g = new GraphBuilder('sigil_mapping');
  const z = g.input('z', ['N', Z]);
  const ms = g.op('ReduceMean', [g.mul(z, z)], { axes: [1], keepdims: 1 });
  const n = g.div(z, g.sqrt(g.add(ms, g.scalar(1e-8))));
  const h = g.op('LeakyRelu', [g.add(g.matmul(n, g.tensor('A1', A1.flat(), [Z, HIDDEN])), g.tensor('b1', b1, [HIDDEN]))], { alpha: 0.2 });
  const w = g.add(g.matmul(h, g.tensor('A2', A2.flat(), [HIDDEN, D])), g.tensor('b2', b2, [D]));
  g.output(w, 'w', ['N', D]);
  return g.toModel({ plumbline_role: 'mapping', z_dim: String(Z), w_dim: String(D) }, 'Tidebound sigils mapping network');
}

function buildSynthesis(mean: Float32Array, stageColumns: number[][][], overdrive: number): Uint8Array {
  const g = new GraphBuilder('sigil_synthesis');
  const ws = g.input('ws', ['N', STAGES.length, D]);
  const wbar = g.tensor('w_avg', mean, [D]);
  const flat = g.int64s('shape_nd', [-1, D]);
  const col4 = g.int64s('shape_n111', [-1, 1, 1, 1]);
  const proj = stageColumns.map((cols, s) => {
    const w = g.op('Reshape', [g.op('Gather', [ws, g.int64s('stage', [s])], { axis: 1 }), flat]);
    const M = new Float32Array(D * cols.length);
    cols.forEach((c, j) => c.forEach((v, i) => (M[i * cols.length + j] = v)));
    return g.matmul(g.sub(w, wbar), g.tensor(`M${s}`, M, [D, cols.length]));
  });
  // Column j of stage s as [N,1].
  const factor = (s: number, j: number) => g.op('Slice', [proj[s], g.int64s('st', [j]), g.int64s('en', [j + 1]), g.int64s('ax', [1])]);
  const clip = (x: string, lo: number, hi: number) => g.op('Clip', [x, g.scalar(lo), g.scalar(hi)]);

  const size = g.affine(factor(0, 0), 0.06, 0.37);
  const aspect = g.exp(g.affine(factor(0, 1), 0.12));
  const rotation = g.affine(factor(0, 2), 0.45);
  const spikiness = g.relu(g.affine(factor(0, 3), 0.12, 0.32));
  const shiftX = g.affine(factor(0, 4), 0.08);
  const shiftY = g.affine(factor(0, 5), 0.08);
  const outline = g.mul(g.exp(g.affine(factor(1, 0), 0.4)), g.scalar(0.02));
  const glowP = factor(1, 1);
  const glow = g.sigmoid(g.affine(glowP, 1.2, 0.3));
  const gem = clip(g.affine(factor(1, 2), 0.1, 0.45), 0.1, 0.85);
  const artifact = clip(g.affine(glowP, 1, -overdrive), 0, 1.5);
  const hue = g.affine(factor(2, 0), 0.2, 0.5);
  const saturation = g.sigmoid(g.affine(factor(2, 1), 0.8, 0.8));
  const backdrop = clip(g.affine(factor(2, 2), 0.13, 0.42), 0.05, 0.95);
  const attrs = [size, aspect, rotation, spikiness, shiftX, shiftY, outline, glow, gem, hue, saturation, backdrop, artifact];
  g.output(g.op('Concat', attrs, { axis: 1 }), 'attributes', ['N', attrs.length]);

  const s4 = (x: string) => g.op('Reshape', [x, col4]);
  const [R, A, TH, K, SX, SY, OW, GL, GM, HU, SA, BD, AR] = attrs.map(s4);

  // Pixel-centre grid in [−1,1], y down.
  const xs = new Float32Array(SIZE * SIZE);
  const ys = new Float32Array(SIZE * SIZE);
  const pattern = new Float32Array(SIZE * SIZE);
  for (let r = 0; r < SIZE; r++)
    for (let c = 0; c < SIZE; c++) {
      const x = ((c + 0.5) / SIZE) * 2 - 1;
      const y = ((r + 0.5) / SIZE) * 2 - 1;
      xs[r * SIZE + c] = x;
      ys[r * SIZE + c] = y;
      pattern[r * SIZE + c] = Math.sin(47 * x + 3) * Math.sin(53 * y + 1);
    }
  const X = g.tensor('grid_x', xs, [1, 1, SIZE, SIZE]);
  const Y = g.tensor('grid_y', ys, [1, 1, SIZE, SIZE]);
  const AA = 0.0085; // edge softness, about half a pixel

  const dx = g.sub(X, SX);
  const dy = g.sub(Y, SY);
  const ct = g.cos(TH);
  const st = g.sin(TH);
  const u = g.div(g.add(g.mul(dx, ct), g.mul(dy, st)), A);
  const v = g.mul(g.sub(g.mul(dy, ct), g.mul(dx, st)), A);
  const rho = g.sqrt(g.add(g.add(g.mul(u, u), g.mul(v, v)), g.scalar(1e-6)));
  const c = g.div(u, rho);
  const c2 = g.mul(c, c);
  const t5 = g.mul(c, g.add(g.sub(g.mul(g.mul(c2, c2), g.scalar(16)), g.mul(c2, g.scalar(20))), g.scalar(5))); // cos 5φ
  const radius = g.div(g.mul(R, g.add(g.scalar(1), g.mul(K, t5))), g.add(g.scalar(1), K));
  const sd = g.sub(rho, radius);
  const edge = (x: string) => g.sigmoid(g.mul(x, g.scalar(1 / AA)));
  const fill = edge(g.neg(sd));
  const ink = edge(g.sub(OW, g.abs(sd)));
  const gemR = g.mul(g.mul(GM, R), g.scalar(0.55));
  const gemMask = g.mul(edge(g.sub(gemR, rho)), fill);
  const gemEdge = g.mul(edge(g.sub(g.mul(OW, g.scalar(0.6)), g.abs(g.sub(rho, gemR)))), fill);
  const halo = g.mul(GL, g.exp(g.mul(g.relu(sd), g.scalar(-1 / 0.11))));

  // Colours [N,3,1,1] from a cosine palette.
  const offsets = g.tensor('palette_offsets', [0, 0.33, 0.67], [1, 3, 1, 1]);
  const twoPi = 2 * Math.PI;
  const palette = (shift: number) => g.affine(g.cos(g.mul(g.add(g.add(HU, offsets), g.scalar(shift)), g.scalar(twoPi))), 0.5, 0.5);
  const P = palette(0);
  const desat = (x: string) => g.add(g.scalar(0.5), g.mul(SA, g.sub(x, g.scalar(0.5))));
  const fillColour = desat(P);
  const gemColour = g.affine(desat(palette(0.5)), 0.65, 0.35);
  const inkColour = g.affine(P, 0.12, 0.07);
  const haloColour = g.affine(P, 0.45, 0.55);

  const shade = g.sub(g.sub(g.scalar(1.06), g.mul(g.div(rho, R), g.scalar(0.34))), g.mul(g.div(dy, R), g.scalar(0.1)));
  const r2 = g.add(g.mul(X, X), g.mul(Y, Y));
  const bgTone = g.sub(g.mul(BD, g.sub(g.scalar(1), g.mul(r2, g.scalar(0.35)))), g.mul(Y, g.scalar(0.06)));
  const tint = g.tensor('backdrop_tint', [0.86, 0.95, 1.1], [1, 3, 1, 1]);
  const frame = g.mul(edge(g.sub(g.scalar(0.011), g.abs(g.sub(g.sqrt(r2), g.scalar(0.9))))), g.scalar(0.35));
  let img = g.mul(bgTone, tint);
  img = g.lerp(img, haloColour, frame);
  img = g.lerp(img, haloColour, g.mul(halo, g.scalar(0.85)));
  img = g.lerp(img, g.mul(fillColour, shade), fill);
  img = g.lerp(img, gemColour, gemMask);
  img = g.lerp(img, inkColour, gemEdge);
  img = g.lerp(img, inkColour, ink);
  const artColour = g.tensor('artifact_colour', [1, -0.6, 0.8], [1, 3, 1, 1]);
  // Overdrive: the image dissolves into a high-frequency interference pattern, as GANs pushed
  // out of their training distribution do; the blend keeps values inside a plausible range.
  const interference = g.affine(g.mul(g.tensor('artifact_pattern', pattern, [1, 1, SIZE, SIZE]), artColour), 0.5, 0.5);
  img = g.lerp(img, interference, g.mul(clip(AR, 0, 1), g.scalar(0.85)));
  g.output(g.affine(img, 2, -1), 'image', ['N', 3, SIZE, SIZE]);
  return g.toModel({ plumbline_role: 'synthesis', latent: 'ws', num_ws: String(STAGES.length), w_dim: String(D), resolution: String(SIZE) }, 'Tidebound sigils synthesis network');
}

if (process.argv[1] && fileURLToPath(import.meta.url) === process.argv[1]) {
  const out = process.argv[2] ?? join(dirname(fileURLToPath(import.meta.url)), 'demo');
  const { files } = authorDemo(out);
  for (const f of files) console.log(`wrote ${f}`);
}
