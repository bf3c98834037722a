// One audit from images alone (built-in measures, calibration, change maps) in a fresh process,
// for the benchmark, with where its time goes. Run under --cpu-prof: rendering is the wall time
// inside the synthesis session's run (wrapped below); measuring and statistics are the CPU
// profile's self time in their source files (read by the parent). Prints one JSON line.
// Usage: tsx test/bench/audit-split-child.ts <model card> <probes> <batch> <directions file | random:N>
import * as ort from 'onnxruntime-node';
import { Workspace } from '../../app/engine/workspace.ts';
import { runAudit, type AuditReport } from '../../app/engine/audit/run.ts';
import type { AuditDirection } from '../../app/core/audit/plan.ts';
import { Random } from '../../app/core/random.ts';

const [card, probes, batch, source] = [process.argv[2], Number(process.argv[3]), Number(process.argv[4]), process.argv[5]];
const host = new Workspace({ threads: Number(process.env.PLUMBLINE_THREADS) || 1 });
await host.openModel(card);
const gen = host.generator!;
gen.batchSize = batch;
let dirs: AuditDirection[];
if (source.startsWith('random:')) {
  // A generator without authored directions (the random-weight benchmark one): random unit
  // directions in its latent, no target (its noise images may show no subject); throughput does
  // not depend on what they do.
  const rng = new Random(11, 5);
  dirs = Array.from({ length: Number(source.slice(7)) }, (_, k) => {
    const v = new Float32Array(gen.layout.size).map(() => rng.normal());
    const norm = Math.hypot(...v);
    return { name: `random_${k}`, target: null, layers: null, vector: v.map((x) => x / norm), sigma: 1 };
  });
} else {
  dirs = host.openDirections(source).directions.slice(0, 2).map((d) => {
    const x = host.direction(d.id);
    return { name: x.name, target: x.target, layers: x.layers, vector: x.vector, sigma: x.sigma };
  });
}
// Count and time every synthesis image by wrapping the session's run.
let images = 0;
let inRun = 0;
const proto = (ort.InferenceSession as unknown as { prototype: { run: unknown } }).prototype;
const run = proto.run;
proto.run = async function (this: ort.InferenceSession, feeds: Record<string, ort.Tensor>, ...rest: unknown[]) {
  const input = Object.values(feeds)[0];
  const t = performance.now();
  const r = await (run as (...a: unknown[]) => Promise<unknown>).call(this, feeds, ...rest);
  if (input.dims.length === 3) (images += input.dims[0]), (inRun += performance.now() - t);
  return r;
};
const t0 = performance.now();
const job = runAudit(gen, dirs, { probes, attributes: 'image', strengths: [-2, -1, 0, 1, 2], combinations: 'none', groundTruthSamples: 0, sigmaSamples: 64, pathLength: { distance: 'l2', epsilon: 0.01, spikeRatio: 5 } });
let report: AuditReport;
for (;;) {
  const s = await job.next();
  if (s.done) {
    report = s.value;
    break;
  }
}
const ms = performance.now() - t0;
const changeMaps = report.directions.filter((d) => d.changeMap).length;
process.stdout.write(JSON.stringify({ ms, renderMs: inRun, images, changeMaps, calibrated: !!report.calibration }) + '\n');
await host.dispose();
