// Images along one direction: each seed at each strength (rows: seeds, columns: strengths), in
// generator batches. Discovery candidates show them shrunk; pack previews tile them into a PNG.
import { applyEdits, directionEdit, type ScaledDirection } from '../core/latent.ts';
import type { RgbaImage } from '../core/image.ts';
import type { Generator } from './generator.ts';

export interface StripSpec {
  seeds: number[];
  strengths: number[];
  psi: number;
}

export async function renderAlong(gen: Generator, d: ScaledDirection, spec: StripSpec): Promise<RgbaImage[]> {
  const base = await gen.codesForSeeds(spec.seeds, spec.psi);
  const per = gen.layout.layers * gen.layout.size;
  const codes = new Float32Array(spec.seeds.length * spec.strengths.length * per);
  spec.seeds.forEach((_, i) => spec.strengths.forEach((s, j) => {
    const row = base.slice(i * per, (i + 1) * per);
    applyEdits(row, gen.layout, [directionEdit(d, s)]);
    codes.set(row, (i * spec.strengths.length + j) * per);
  }));
  const images: RgbaImage[] = [];
  const n = spec.seeds.length * spec.strengths.length;
  for (let at = 0; at < n; at += gen.batchSize) {
    const m = Math.min(gen.batchSize, n - at);
    const out = await gen.synthesize(codes.slice(at * per, (at + m) * per), m);
    for (let i = 0; i < m; i++) images.push(gen.toRgba(out.images, i));
  }
  return images;
}
