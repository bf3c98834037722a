import { renderScene } from './test/helpers/subject-images.ts';
import { measureImage } from './app/core/scorers/measures.ts';
const img = renderScene({ width: 256, height: 256, cx: 120, cy: 130, radius: 60, fold: 5, depth: 0.2, angle: 10, subject: [55, 50, 40], background: [80, 5, 250] } as any);
for (let i = 0; i < 5; i++) measureImage(img);
const t = performance.now(); for (let i = 0; i < 10; i++) measureImage(img); console.log('ms per 256² image', ((performance.now() - t) / 10).toFixed(1));
