// Exact transforms as the outside reference for the built-in image measures (METHODS §9.2).
// Each scene is rendered analytically (8×8 supersampled coverage, test/helpers/subject-images.ts),
// so translating, scaling about the centroid, rotating, turning the subject's hue in CIE LCh(ab),
// shifting the background's lightness and blurring are exact image operations with a known effect
// on every measure. Each measure must answer its own operation as derived and stay within the
// stated tolerance under all the others. Sources of the definitions are named beside each check:
// CIE 15:2004 for CIELAB and LCh(ab) (conversions by colorjs.io, an outside library); Hu (1962)
// and textbook central moments for size, elongation and roundness; the angular-harmonic
// definition of METHODS §9.1 for orientation.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import Color from 'colorjs.io';
import { IMAGE_MEASURES, analyseImage, imageMoments, measureDelta, measureImage, measureIndex } from '../../app/core/scorers/measures.ts';
import { renderScene, lchToSrgb8, type Scene } from '../helpers/subject-images.ts';

/**
 * How far each measure may move under an operation that is not its own. The slack comes from
 * resampling: anti-aliased coverage is quantised to 1/64 by the supersampling and colours to
 * 8 bits, and a re-rendered edge lands on different pixels. Values are the measured maxima over the
 * scenes below with about 2× headroom (our own figures at 96 px, not published ones).
 */
const TOLERANCE: Record<string, number> = {
  subject_x: 0.0005, // fraction of the width: 0.05 px at 96 px
  subject_y: 0.0005,
  subject_radius: 0.0005, // fraction of √(w·h): 0.05 px
  orientation: 0.25, // degrees
  shape_fold: 0,
  shape_harmonic: 0.006,
  shape_elongation: 0.012, // a blur of an ellipse moves it 0.006
  shape_roundness: 0.001,
  subject_lightness: 0.5, // L*: the 8-bit rounding of the turned colour moves L* up to 0.2
  subject_chroma: 0.75, // C*ab: likewise up to 0.37
  subject_hue: 0.1, // degrees, against colorjs' hue of the very 8-bit colours drawn
  background_lightness: 0.05, // against colorjs' L* of the 8-bit colours drawn
  background_chroma: 0.5,
  background_hue: 0.5,
  subject_detail: 0.45, // Σ|∇L*|/√area; the inset scene reads about 21
  edge_width: 0.12, // pixels
  symmetry: 0.006,
};
const W = 96;
const star: Scene = { width: W, height: W, cx: 45.3, cy: 49.1, radius: 20, fold: 5, depth: 0.2, angle: 12, subject: [52, 45, 35], background: [78, 6, 250] };
const ellipse: Scene = { ...star, fold: 0, axisRatio: 0.6, angle: -28, radius: 24, subject: [60, 30, 300], background: [35, 6, 80] };
const gem: Scene = { ...star, fold: 3, depth: 0.25, radius: 22, inset: { dx: 0.25, dy: 0.05, r: 0.18, colour: [85, 60, 95] } };

interface Operation {
  name: string;
  apply: (s: Scene) => Scene;
  /** the measures this operation is allowed to move, with the derived expected change (null: moves, not derived) */
  own: Record<string, ((before: Scene) => number) | null>;
}

const DX = 6.3;
const DY = -4.7;
const SCALE = 1.25;
const TURN = 23;
const HUE = 70;
const BACK_L = -15;
const BLUR = 1.2;

const operations: Operation[] = [
  // Translation by (dx, dy) px: the centroid moves by exactly (dx, dy)/size (definition of m10/m00).
  { name: `translate (${DX}, ${DY}) px`, apply: (s) => ({ ...s, cx: s.cx + DX, cy: s.cy + DY }), own: { subject_x: () => DX / W, subject_y: () => DY / W } },
  // Scaling by s about the centroid: equivalent radius √(m00/π) × s (area scales by s²).
  { name: `scale ×${SCALE} about the centroid`, apply: (s) => ({ ...s, radius: s.radius * SCALE }), own: { subject_radius: (s) => (SCALE - 1) * expectedRadius(s) } },
  // Rotation by θ: the k-th harmonic's phase turns by kθ, so orientation + θ (mod 360°/k).
  { name: `rotate +${TURN}°`, apply: (s) => ({ ...s, angle: s.angle + TURN }), own: { orientation: () => TURN } },
  // Hue rotation in LCh(ab) at constant L*, C*ab (CIE 15:2004): subject h_ab + Δ.
  {
    name: `subject hue +${HUE}° in LCh(ab)`,
    apply: (s) => ({ ...s, subject: [s.subject[0], s.subject[1], s.subject[2] + HUE], inset: s.inset && { ...s.inset, colour: [s.inset.colour[0], s.inset.colour[1], s.inset.colour[2] + HUE] } }),
    own: { subject_hue: (s) => wrap(colorjsHue([s.subject[0], s.subject[1], s.subject[2] + HUE]) - colorjsHue(s.subject), 360) },
  },
  // Background lightness shift ΔL* outside the subject: background L* + ΔL*.
  {
    name: `background ΔL* ${BACK_L}`,
    apply: (s) => ({ ...s, background: [s.background[0] + BACK_L, s.background[1], s.background[2]] }),
    own: { background_lightness: (s) => colorjsLab([s.background[0] + BACK_L, s.background[1], s.background[2]])[0] - colorjsLab(s.background)[0], background_hue: null, background_chroma: null },
  },
  // Gaussian blur σ: a step edge becomes Φ(x/σ); (3/2)·∫4Φ(1−Φ)dx / ∫|Φ'| = (3/2)·4σ/√π ≈ 3.385σ.
  // Blur also rounds the points of a star and smooths an inset, so shape and detail may move.
  { name: `blur σ = ${BLUR} px`, apply: (s) => ({ ...s, blur: BLUR }), own: { edge_width: null, shape_harmonic: null, shape_roundness: null, subject_detail: null, symmetry: null } },
];

/** Equivalent radius of the exact shape as a fraction of √(w·h) (area of r(φ) = R(1 + ε cos nφ) is πR²(1 + ε²/2); ellipse πab). */
function expectedRadius(s: Scene): number {
  const area = s.axisRatio !== undefined ? Math.PI * s.radius * s.radius * s.axisRatio : Math.PI * s.radius ** 2 * (1 + (s.fold ? s.depth ** 2 / 2 : 0));
  return Math.sqrt(area / Math.PI) / Math.sqrt(s.width * s.height);
}

/** The Lab of the 8-bit colour the renderer actually wrote, via colorjs.io ('lab-d65', CIE 15). */
function colorjsLab(lch: [number, number, number]): number[] {
  const [r, g, b] = lchToSrgb8(lch);
  return new Color('srgb', [r / 255, g / 255, b / 255]).to('lab-d65').coords.map((v) => v ?? 0);
}
function colorjsHue(lch: [number, number, number]): number {
  const [, a, b] = colorjsLab(lch);
  return ((Math.atan2(b, a) * 180) / Math.PI + 360) % 360;
}
function inGamut([L, C, h]: [number, number, number]): boolean {
  const rad = (h * Math.PI) / 180;
  return new Color('lab-d65', [L, C * Math.cos(rad), C * Math.sin(rad)]).inGamut('srgb');
}
const wrap = (d: number, period: number) => {
  const x = ((d % period) + period) % period;
  return x > period / 2 ? x - period : x;
};

for (const [label, scene] of [['five-pointed star', star], ['ellipse', ellipse], ['three-lobed shape with an inset', gem]] as const) {
  test(`exact transforms on a ${label}: each measure answers its own operation and no other`, () => {
    // The hue rotation is exact only within the sRGB gamut (METHODS §9.2): check before trusting it.
    for (const h of [scene.subject[2], scene.subject[2] + HUE]) assert.ok(inGamut([scene.subject[0], scene.subject[1], h]), `subject colour at h ${h} is outside sRGB`);
    const base = measureImage(renderScene(scene));
    const failures: string[] = [];
    for (const op of operations) {
      const edited = measureImage(renderScene(op.apply(scene)));
      for (const info of IMAGE_MEASURES) {
        if (!info.verdicts && info.name !== 'shape_fold') continue;
        const j = measureIndex(info.name);
        const d = info.name === 'shape_fold' ? edited[j] - base[j] : measureDelta(j, base, edited);
        if (Number.isNaN(base[j]) && Number.isNaN(edited[j])) continue; // not measurable on either: nothing to compare
        if (info.name in op.own) {
          const derive = op.own[info.name];
          if (!derive) continue;
          const expected = derive(scene);
          if (!(Math.abs(d - expected) <= TOLERANCE[info.name])) failures.push(`${op.name}: ${info.name} moved ${d.toFixed(4)}, derived ${expected.toFixed(4)}`);
        } else if (!(Math.abs(d) <= TOLERANCE[info.name])) failures.push(`${op.name}: ${info.name} moved ${d.toFixed(4)} (tolerance ${TOLERANCE[info.name]})`);
      }
    }
    assert.deepEqual(failures, []);
  });
}

test('blur widens the edge as derived: (3/2)·4σ/√π for a Gaussian-blurred step (σ up to the soft edge reach of 1.5 px)', () => {
  for (const sigma of [1, 1.5]) {
    const m = measureImage(renderScene({ ...ellipse, blur: sigma }));
    const expected = (1.5 * 4 * sigma) / Math.sqrt(Math.PI);
    const got = m[measureIndex('edge_width')];
    // The edge is not straight and the ΔE*ab-to-coverage reading is not exactly linear: 10%.
    assert.ok(Math.abs(got - expected) / expected < 0.1, `σ ${sigma}: edge width ${got.toFixed(3)}, derived ${expected.toFixed(3)}`);
  }
});

test('orientation of an ellipse: the k = 2 harmonic angle agrees with ½·atan2(2μ11, μ20 − μ02) (textbook moments) and with the drawn angle', () => {
  for (const angle of [-61, -28, 0, 17, 44, 89]) {
    const a = analyseImage(renderScene({ ...ellipse, angle }));
    const mo = imageMoments(a.subject.mask, W, W);
    const momentAngle = (0.5 * Math.atan2(2 * mo.mu11, mo.mu20 - mo.mu02) * 180) / Math.PI;
    assert.equal(a.values[measureIndex('shape_fold')], 2);
    const o = a.values[measureIndex('orientation')];
    assert.ok(Math.abs(wrap(o - momentAngle, 180)) < 0.2, `angle ${angle}: harmonic ${o.toFixed(3)} vs moments ${momentAngle.toFixed(3)}`);
    assert.ok(Math.abs(wrap(o - angle, 180)) < 0.3, `angle ${angle}: harmonic ${o.toFixed(3)}`);
  }
});

test('shape measures equal their closed forms: ellipse (Hu 1962 φ1, principal moments), n-fold harmonic strength (METHODS §9.1)', () => {
  const q = 0.6;
  const e = measureImage(renderScene({ ...ellipse, axisRatio: q, radius: 30 }));
  // Ellipse with axes a, b = qa: principal variances a²/4, b²/4 → elongation 1 − q².
  assert.ok(Math.abs(e[measureIndex('shape_elongation')] - (1 - q * q)) < 0.005);
  // Hu's φ1 = η20 + η02 = (1 + q²)/(4πq) for an ellipse, so m00²/(2π(μ20 + μ02)) = 2q/(1 + q²).
  assert.ok(Math.abs(e[measureIndex('shape_roundness')] - (2 * q) / (1 + q * q)) < 0.005);
  // |H_2|/H_0 = |∫ r(φ)² e^{2iφ} dφ| / ∫ r(φ)² dφ with r² = a²b²/(b²cos²φ + a²sin²φ): by quadrature.
  let num = 0;
  let den = 0;
  for (let i = 0; i < 20000; i++) {
    const phi = ((i + 0.5) / 20000) * 2 * Math.PI;
    const r2 = (q * q) / (q * q * Math.cos(phi) ** 2 + Math.sin(phi) ** 2);
    num += r2 * Math.cos(2 * phi);
    den += r2;
  }
  assert.ok(Math.abs(e[measureIndex('shape_harmonic')] - Math.abs(num / den)) < 0.005, `${e[measureIndex('shape_harmonic')]} vs ${num / den}`);
  // r(φ) = R(1 + ε cos nφ): |H_n|/H_0 = ε / (1 + ε²/2) exactly.
  for (const [n, eps] of [[3, 0.15], [5, 0.2], [6, 0.1]]) {
    const m = measureImage(renderScene({ ...star, fold: n, depth: eps, radius: 26 }));
    assert.equal(m[measureIndex('shape_fold')], n);
    assert.ok(Math.abs(m[measureIndex('shape_harmonic')] - eps / (1 + (eps * eps) / 2)) < 0.005, `n ${n}: ${m[measureIndex('shape_harmonic')]}`);
  }
});

test('orientation is "not measurable" (NaN) on a disc, never noise; shape_fold says 0', () => {
  const m = measureImage(renderScene({ ...star, fold: 0 }));
  assert.ok(Number.isNaN(m[measureIndex('orientation')]));
  assert.equal(m[measureIndex('shape_fold')], 0);
  assert.ok(m[measureIndex('shape_harmonic')] < 0.005);
  assert.ok(Math.abs(m[measureIndex('shape_roundness')] - 1) < 0.002, 'a disc has roundness 1 (Hu φ1 = 1/2π)');
});

test('subject and background colours equal the drawn colours (colorjs.io lab-d65, CIE 15) and ignore an inset of another colour', () => {
  const m = measureImage(renderScene(gem));
  const s = colorjsLab(gem.subject);
  const b = colorjsLab(gem.background);
  // CIE 15 LCh(ab): C* = √(a*² + b*²), h = atan2(b*, a*). 0.02 covers white-point and matrix rounding (METHODS §5.1).
  assert.ok(Math.abs(m[measureIndex('subject_lightness')] - s[0]) < 0.02);
  assert.ok(Math.abs(m[measureIndex('subject_chroma')] - Math.hypot(s[1], s[2])) < 0.02);
  assert.ok(Math.abs(wrap(m[measureIndex('subject_hue')] - colorjsHue(gem.subject), 360)) < 0.05);
  assert.ok(Math.abs(m[measureIndex('background_lightness')] - b[0]) < 0.02);
  assert.ok(Math.abs(m[measureIndex('background_chroma')] - Math.hypot(b[1], b[2])) < 0.02);
});

test('colourfulness is a composite: it moves under a pure scaling (so it is not a leak attribute by default)', () => {
  const a = measureImage(renderScene(star));
  const b = measureImage(renderScene({ ...star, radius: star.radius * SCALE }));
  const j = measureIndex('colourfulness');
  assert.equal(IMAGE_MEASURES[j].verdicts, false);
  assert.ok(b[j] - a[j] > 3, `colourfulness ${a[j].toFixed(2)} → ${b[j].toFixed(2)}`);
});

test('no subject separates on a plain or noise-free gradient image: subject measures are NaN, background measured', () => {
  const data = new Uint8ClampedArray(64 * 64 * 4);
  for (let p = 0; p < 64 * 64; p++) data.set([120, 130, 140, 255], p * 4);
  const a = analyseImage({ width: 64, height: 64, data });
  assert.equal(a.subject.found, false);
  assert.match(a.subject.note, /no subject separates/);
  assert.ok(Number.isNaN(a.values[measureIndex('subject_radius')]));
  assert.ok(Math.abs(a.values[measureIndex('background_lightness')] - new Color('srgb', [120 / 255, 130 / 255, 140 / 255]).to('lab-d65').coords[0]!) < 0.02);
});

test('erosion and dilation by distance thresholds equal the square-element morphology they replace', async () => {
  // Definition check: eroding by a (2r+1)² square keeps a pixel iff every pixel within chessboard
  // distance r is set (the outside counts as unset); dilating sets it iff any is.
  const { chessboardDistance, morph } = await import('../../app/core/scorers/subject.ts');
  const w = 23;
  const h = 17;
  const mask = Uint8Array.from({ length: w * h }, (_, i) => (Math.sin(i * 0.7) + Math.cos(i * 0.13) > 0.2 ? 1 : 0));
  const inside = chessboardDistance(mask, w, h, 0);
  const outside = chessboardDistance(mask, w, h, 1);
  for (const r of [1, 2, 4]) {
    assert.deepEqual(Array.from(inside, (v) => (v > r ? 1 : 0)), Array.from(morph(mask, w, h, r)), `erode ${r}`);
    assert.deepEqual(Array.from(outside, (v) => (v <= r ? 1 : 0)), Array.from(morph(mask, w, h, -r)), `dilate ${r}`);
  }
});

test('a vignetted background (brighter centre, darker corners) is background, not subject', () => {
  // Multiply the whole image by 1 − 0.35·r² (r = distance from the centre in half-widths): the
  // corners lose 70%, the centre nothing — more than ΔE*ab 12 between border and centre.
  const plain = renderScene(star);
  const data = Uint8ClampedArray.from(plain.data);
  for (let y = 0; y < W; y++)
    for (let x = 0; x < W; x++) {
      const r2 = (((x + 0.5) / W) * 2 - 1) ** 2 + (((y + 0.5) / W) * 2 - 1) ** 2;
      for (let k = 0; k < 3; k++) data[(y * W + x) * 4 + k] = Math.round(plain.data[(y * W + x) * 4 + k] * (1 - 0.35 * r2));
    }
  const a = measureImage(plain);
  const b = measureImage({ width: W, height: W, data });
  assert.equal(b[measureIndex('shape_fold')], 5);
  // The star's own pixels darken a little too (by up to ~10%): its size and place barely move.
  assert.ok(Math.abs(b[measureIndex('subject_radius')] - a[measureIndex('subject_radius')]) < 0.004, `radius ${a[measureIndex('subject_radius')]} → ${b[measureIndex('subject_radius')]}`);
  assert.ok(Math.abs(b[measureIndex('subject_x')] - a[measureIndex('subject_x')]) < 0.002);
});
