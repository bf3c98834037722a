// Full-size images of chosen probes before and after a direction's edit: the enlarged worst
// probes of an audit, and a repair's before/after on the very same probes (same seeds, same ψ,
// same strength) so the two can be compared image for image.
import { encodePng } from '../core/image.ts';
import { applyEdits } from '../core/latent.ts';
import type { Generator } from './generator.ts';

export interface ProbePair {
  seed: number;
  /** PNG of the unedited probe. */
  before: Uint8Array;
  /** PNG of the probe moved `strength` σ along the direction. */
  after: Uint8Array;
}

export async function renderProbePairs(gen: Generator, d: { vector: Float32Array; layers: [number, number] | null; sigma: number }, seeds: number[], strength: number, psi: number): Promise<ProbePair[]> {
  const per = gen.layout.layers * gen.layout.size;
  const base = await gen.codesForSeeds(seeds, psi);
  const edited = base.slice();
  for (let i = 0; i < seeds.length; i++) applyEdits(edited.subarray(i * per, (i + 1) * per), gen.layout, [{ vector: d.vector, layers: d.layers, step: strength * d.sigma }]);
  const render = async (codes: Float32Array): Promise<Uint8Array[]> => {
    const out: Uint8Array[] = [];
    for (let at = 0; at < seeds.length; at += gen.batchSize) {
      const m = Math.min(gen.batchSize, seeds.length - at);
      const r = await gen.synthesize(codes.slice(at * per, (at + m) * per), m);
      for (let i = 0; i < m; i++) out.push(encodePng(gen.toRgba(r.images, i)));
    }
    return out;
  };
  const before = await render(base);
  const after = await render(edited);
  return seeds.map((seed, i) => ({ seed, before: before[i], after: after[i] }));
}
