// The SSIM path-length distance as an ONNX graph, so the engine computes it natively and batched
// instead of in JavaScript. It matches imageDistance('ssim') (tests check): Rec. 601 luma of the
// image mapped to [0, 1], box-downsampled to at most 64 px, an 11×11 Gaussian window (σ = 1.5,
// separable, 'valid'), K1 = 0.01, K2 = 0.03, L = 1. It outputs 1 − SSIM directly in a
// cancellation-free form, because in float32 "1 − (a value within 1e-6 of 1)" loses most digits:
//   1 − S = [(μa − μb)²·B2 + A1·Var(a − b)] / (B1·B2),
//   A1 = 2μaμb + C1, B1 = μa² + μb² + C1, B2 = σa² + σb² + C2, with Var(a − b) from a − b itself.
import { GraphBuilder } from '../onnx/graph-builder.ts';

const WINDOW = 11;
const SIGMA = 1.5;
const COMPARE_SIZE = 64;

export function ssimDistanceGraph(height: number, width: number, range: [number, number]): Uint8Array {
  const g = new GraphBuilder('plumbline_ssim_distance');
  const a = g.input('a', ['N', 3, height, width]);
  const b = g.input('b', ['N', 3, height, width]);
  const span = range[1] - range[0];
  const lw = [0.299, 0.587, 0.114].map((v) => v / span);
  const wl = g.tensor('luma', lw, [1, 3, 1, 1]);
  const bl = g.tensor('luma_bias', [(-range[0] * (0.299 + 0.587 + 0.114)) / span], [1]);
  const f = Math.max(1, Math.floor(Math.max(width, height) / COMPARE_SIZE));
  const luma = (x: string) => {
    const y = g.op('Conv', [x, wl, bl]);
    return f > 1 ? g.op('AveragePool', [y], { kernel_shape: [f, f], strides: [f, f] }) : y;
  };
  const ya = luma(a);
  const yb = luma(b);
  const d = g.sub(ya, yb);
  const stack = g.op('Concat', [ya, yb, g.mul(ya, ya), g.mul(yb, yb), d, g.mul(d, d)], { axis: 1 });
  const c = (WINDOW - 1) / 2;
  const k = Array.from({ length: WINDOW }, (_, i) => Math.exp(-((i - c) ** 2) / (2 * SIGMA * SIGMA)));
  const sum = k.reduce((x, y) => x + y, 0);
  const kn = k.map((v) => v / sum);
  const channels = 6;
  const vertical = g.tensor('gauss_v', Array.from({ length: channels }, () => kn).flat(), [channels, 1, WINDOW, 1]);
  const horizontal = g.tensor('gauss_h', Array.from({ length: channels }, () => kn).flat(), [channels, 1, 1, WINDOW]);
  const filtered = g.op('Conv', [g.op('Conv', [stack, vertical], { group: channels }), horizontal], { group: channels });
  const ch = (i: number) => g.op('Slice', [filtered, g.int64s('s', [i]), g.int64s('e', [i + 1]), g.int64s('ax', [1])]);
  const [ma, mb, saa, sbb, md, sdd] = [0, 1, 2, 3, 4, 5].map(ch);
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
  g.output(g.op('ReduceMean', [map], { axes: [1, 2, 3], keepdims: 0 }), 'distance', ['N']);
  return g.toModel({ plumbline_role: 'ssim-distance' });
}
