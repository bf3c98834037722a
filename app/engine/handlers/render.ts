// Handlers that render seeds: the slider preview (preview lane, latest wins) and a grid of seeds
// (a job, batch by batch).
import type { AreaHandlers } from './context.ts';

export const renderHandlers: AreaHandlers<'preview.render' | 'grid.render'> = {
  'preview.render': async (p, { workspace }) => {
    const gen = workspace.requireGenerator();
    const started = performance.now();
    const out = await gen.renderSeeds([p.seed], p.psi, workspace.edits(p.edits));
    const { width, height } = gen.imageSize();
    const rgba = gen.toRgba(out.images, 0);
    return {
      superseded: false,
      seed: p.seed,
      image: { width, height, rgba: new Uint8Array(rgba.data.buffer) },
      attributes: out.attributes ? Array.from(out.attributes) : [],
      millis: performance.now() - started,
    };
  },
  'grid.render': async (p, { workspace, progress, checkpoint }) => {
    const gen = workspace.requireGenerator();
    const images: { seed: number; image: { width: number; height: number; rgba: Uint8Array } }[] = [];
    const batch = gen.batchSize;
    // Codes for the whole job at once (one mapping run), then synthesis batch by batch.
    const codes = await gen.codesForSeeds(p.seeds, p.psi);
    const per = gen.layout.layers * gen.layout.size;
    const { width, height } = gen.imageSize();
    for (let at = 0; at < p.seeds.length; at += batch) {
      const seeds = p.seeds.slice(at, at + batch);
      const out = await gen.synthesize(codes.subarray(at * per, (at + seeds.length) * per), seeds.length);
      seeds.forEach((seed, i) => images.push({ seed, image: { width, height, rgba: new Uint8Array(gen.toRgba(out.images, i).data.buffer) } }));
      if (at + batch < p.seeds.length) {
        progress({ done: at + seeds.length, total: p.seeds.length, label: 'rendering seeds' });
        await checkpoint();
      }
    }
    return { images };
  },
};
