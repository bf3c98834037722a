import { writeFileSync } from 'node:fs';
import { EngineHost, demoCardPath } from './app/engine/host.ts';
import { analyseImage, IMAGE_MEASURES } from './app/core/scorers/measures.ts';
import { encodePng, tileImages } from './app/core/image.ts';
const host = new EngineHost({ threads: 1 });
await host.openModel(demoCardPath());
const gen = host.generator!;
const out = await gen.renderSeeds([0, 1, 2, 3], 0.7, []);
const tiles = [];
for (let i = 0; i < 4; i++) {
  const img = gen.toRgba(out.images, i);
  const a = analyseImage(img);
  console.log(a.subject.found, a.subject.note, IMAGE_MEASURES.map((m, j) => `${m.name}=${a.values[j].toFixed(3)}`).join(' '));
  const mimg = { width: img.width, height: img.height, data: new Uint8ClampedArray(img.data.length) };
  for (let p = 0; p < img.width * img.height; p++) { const v = Math.round(a.subject.mask[p] * 255); mimg.data.set([v, a.subject.region[p] === 2 ? 128 : v, v, 255], p * 4); }
  tiles.push(img, mimg);
}
writeFileSync('/tmp/demo-masks.png', encodePng(tileImages(tiles, 4)));
await host.dispose();
