import { Generator } from '../app/engine/generator.ts';
import { demoCardPath } from '../app/engine/workspace.ts';
import { encodeNpy } from '../app/core/npy.ts';
import { writeFileSync } from 'node:fs';
const gen = await Generator.open(demoCardPath(), { threads: 1 });
writeFileSync('/tmp/refs12/vs/latents/hero_knight.npy', encodeNpy(await gen.codesForSeeds([7], 0.7), [1, 3, 32]));
await gen.dispose();
writeFileSync('/tmp/refs12/vs/recipe.json', JSON.stringify({ format: 'plumbline.variant-recipe', version: 1, name: 'heroes', seeds: [7, 9, 11], references: ['latents/hero_knight.npy'], psi: 0.7, settings: [{ label: 'base', strengths: {} }, { label: 'big', strengths: { crest_size: 2 } }] }));
