// Handler for discovering candidate directions: the method runs (app/engine/lab.ts `discover`,
// shared with the CLI), each candidate joins the registry unkept, with a small strip of images.
import { downsampleImage, type RgbaImage } from '../../core/image.ts';
import { discover } from '../lab.ts';
import { renderAlong } from '../strip.ts';
import type { AreaHandlers } from './context.ts';

/** Longer side of a candidate strip image, in pixels. */
const STRIP_IMAGE_SIZE = 64;

export const discoveryHandlers: AreaHandlers<'lab.discover'> = {
  'lab.discover': async (p, { workspace, progress, checkpoint }) => {
    const gen = workspace.requireGenerator();
    progress({ done: 0, total: 2, label: `discovering (${p.method})` });
    await checkpoint();
    const found = await discover(gen, p, checkpoint);
    progress({ done: 1, total: 2, label: 'rendering candidate strips' });
    await checkpoint();
    const candidates = [];
    for (const f of found) {
      const d = workspace.register({ name: f.name, target: f.target, layers: f.layers, vector: f.vector, notes: f.notes, method: f.source.method, source: f.source as unknown as Record<string, unknown> }, false);
      const images = await renderAlong(gen, d, { seeds: p.stripSeeds, strengths: p.stripStrengths, psi: gen.info.defaultPsi });
      candidates.push({ direction: workspace.info(d), strip: images.map((img) => shrink(img, STRIP_IMAGE_SIZE)), stripSeeds: p.stripSeeds, stripStrengths: p.stripStrengths });
      await checkpoint();
    }
    return { candidates };
  },
};

/** A copy for the wire whose longer side is at most `max` pixels. */
function shrink(img: RgbaImage, max: number): { width: number; height: number; rgba: Uint8Array } {
  const small = downsampleImage(img, Math.ceil(Math.max(img.width, img.height) / max));
  return { width: small.width, height: small.height, rgba: new Uint8Array(small.data.buffer) };
}
