// The SSIM path-length distances as ONNX graphs, so the engine computes them natively and batched
// instead of in JavaScript. They match imageDistance('ssim') and imageDistance('ssim-lab') (tests
// check): the float image mapped to [0, 1], box-downsampled to COMPARE_SIZE px at most, then
//  - 'ssim': Rec. 601 luma (brightness only);
//  - 'ssim-lab': sRGB decode (IEC 61966-2-1) → XYZ (D65) → CIELAB (CIE 15), each of L*, a*, b*
//    divided by its dynamic range (LAB_RANGE), SSIM per channel, averaged over the three;
// an 11×11 Gaussian window (σ = 1.5, separable, 'valid'), K1 = 0.01, K2 = 0.03, L = 1 (Wang et
// al. 2004). The output is 1 − SSIM in a cancellation-free form, because in float32 "1 − (a value
// within 1e-6 of 1)" loses most digits:
//   1 − S = [(μa − μb)²·B2 + A1·Var(a − b)] / (B1·B2),
//   A1 = 2μaμb + C1, B1 = μa² + μb² + C1, B2 = σa² + σb² + C2, with Var(a − b) from a − b itself.
import { GraphBuilder } from '../onnx/graph-builder.ts';
import { D65_WHITE, SRGB_TO_XYZ } from '../color.ts';
import { COMPARE_SIZE, LAB_RANGE } from './path-length.ts';

const WINDOW = 11;
const SIGMA = 1.5;
/** CIE 15: ε = (6/29)³ and κ = (29/3)³ of the CIELAB f(t). */
const LAB_EPSILON = 216 / 24389;
const LAB_KAPPA = 24389 / 27;

export function ssimDistanceGraph(height: number, width: number, range: [number, number], space: 'luma' | 'lab' = 'luma'): Uint8Array {
  const g = new GraphBuilder(space === 'lab' ? 'plumbline_ssim_lab_distance' : 'plumbline_ssim_distance');
  const a = g.input('a', ['N', 3, height, width]);
  const b = g.input('b', ['N', 3, height, width]);
  const span = range[1] - range[0];
  const f = Math.max(1, Math.floor(Math.max(width, height) / COMPARE_SIZE));
  const pool = (y: string) => (f > 1 ? g.op('AveragePool', [y], { kernel_shape: [f, f], strides: [f, f] }) : y);
  let channels: number;
  let prepare: (x: string) => string;
  if (space === 'luma') {
    channels = 1;
    const wl = g.tensor('luma', [0.299, 0.587, 0.114].map((v) => v / span), [1, 3, 1, 1]);
    const bl = g.tensor('luma_bias', [(-range[0] * (0.299 + 0.587 + 0.114)) / span], [1]);
    prepare = (x) => pool(g.op('Conv', [x, wl, bl]));
  } else {
    channels = 3;
    // Encoded RGB in [0, 1], box-averaged, clamped (as the JS reference does before decoding).
    const toUnit = g.tensor('unit', [1 / span, 0, 0, 0, 1 / span, 0, 0, 0, 1 / span], [3, 3, 1, 1]);
    const unitBias = g.tensor('unit_bias', [0, 1, 2].map(() => -range[0] / span), [3]);
    const xyz = g.tensor('rgb_to_xyz_over_white', SRGB_TO_XYZ.flatMap((row, r) => row.map((v) => v / D65_WHITE[r])), [3, 3, 1, 1]);
    const lab = g.tensor('f_to_lab', [0, 116, 0, 500, -500, 0, 0, 200, -200], [3, 3, 1, 1]);
    const labBias = g.tensor('f_to_lab_bias', [-16, 0, 0], [3]);
    const scale = g.tensor('lab_scale', LAB_RANGE.map((r) => 1 / r), [1, 3, 1, 1]);
    prepare = (x) => {
      const v = g.op('Clip', [pool(g.op('Conv', [x, toUnit, unitBias])), g.scalar(0), g.scalar(1)]);
      const linear = g.op('Where', [g.op('LessOrEqual', [v, g.scalar(0.04045)]), g.div(v, g.scalar(12.92)), g.op('Pow', [g.div(g.add(v, g.scalar(0.055)), g.scalar(1.055)), g.scalar(2.4)])]);
      const t = g.op('Conv', [linear, xyz]);
      const ft = g.op('Where', [g.op('Greater', [t, g.scalar(LAB_EPSILON)]), g.op('Pow', [g.relu(t), g.scalar(1 / 3)]), g.div(g.add(g.mul(t, g.scalar(LAB_KAPPA)), g.scalar(16)), g.scalar(116))]);
      return g.mul(g.op('Conv', [ft, lab, labBias]), scale);
    };
  }
  const ya = prepare(a);
  const yb = prepare(b);
  const d = g.sub(ya, yb);
  const stack = g.op('Concat', [ya, yb, g.mul(ya, ya), g.mul(yb, yb), d, g.mul(d, d)], { axis: 1 });
  const c = (WINDOW - 1) / 2;
  const k = Array.from({ length: WINDOW }, (_, i) => Math.exp(-((i - c) ** 2) / (2 * SIGMA * SIGMA)));
  const sum = k.reduce((x, y) => x + y, 0);
  const kn = k.map((v) => v / sum);
  const all = 6 * channels;
  const vertical = g.tensor('gauss_v', Array.from({ length: all }, () => kn).flat(), [all, 1, WINDOW, 1]);
  const horizontal = g.tensor('gauss_h', Array.from({ length: all }, () => kn).flat(), [all, 1, 1, WINDOW]);
  const filtered = g.op('Conv', [g.op('Conv', [stack, vertical], { group: all }), horizontal], { group: all });
  const part = (i: number) => g.op('Slice', [filtered, g.int64s('s', [i * channels]), g.int64s('e', [(i + 1) * channels]), g.int64s('ax', [1])]);
  const [ma, mb, saa, sbb, md, sdd] = [0, 1, 2, 3, 4, 5].map(part);
  const C1 = g.scalar(0.01 ** 2);
  const C2 = g.scalar(0.03 ** 2);
  const A1 = g.add(g.mul(g.mul(ma, mb), g.scalar(2)), C1);
  const B1 = g.add(g.add(g.mul(ma, ma), g.mul(mb, mb)), C1);
  const va = g.sub(saa, g.mul(ma, ma));
  const vb = g.sub(sbb, g.mul(mb, mb));
  const B2 = g.add(g.add(va, vb), C2);
  const md2 = g.mul(md, md);
  const vd = g.sub(sdd, md2);
  const numerator = g.add(g.mul(md2, B2), g.mul(A1, vd));
  const map = g.div(numerator, g.mul(B1, B2));
  // Mean over channels and pixels = mean of the per-channel mean SSIM maps (equal pixel counts).
  g.output(g.op('ReduceMean', [map], { axes: [1, 2, 3], keepdims: 0 }), 'distance', ['N']);
  return g.toModel({ plumbline_role: space === 'lab' ? 'ssim-lab-distance' : 'ssim-distance' });
}
