// Model cards: the JSON that sits beside a generator's .onnx and says how to drive it.
// Format "plumbline.model-card" version 1, documented in docs/model-card.md.
import { z } from 'zod';
import { parseJsonFile } from './json-file.ts';

export const MODEL_CARD_FORMAT = 'plumbline.model-card';

const fileName = z.string().min(1).refine((s) => !s.includes('\0'), 'must not contain NUL');

export const modelCardSchema = z
  .object({
    format: z.literal(MODEL_CARD_FORMAT),
    version: z.literal(1),
    name: z.string().min(1).max(200),
    description: z.string().max(4000).default(''),
    licence: z.string().max(4000).default(''),
    synthesis: z.object({
      file: fileName,
      latentInput: z.string().min(1),
      space: z.enum(['z', 'w', 'w+']),
      layers: z.number().int().min(1).max(64).default(1),
      latentSize: z.number().int().min(1).max(65536),
      output: z.string().min(1),
      layout: z.enum(['NCHW', 'NHWC']).default('NCHW'),
      range: z.tuple([z.number(), z.number()]).refine(([a, b]) => b > a, 'range must be [low, high] with high > low').default([-1, 1]),
      attributesOutput: z.string().min(1).optional(),
      constants: z.record(z.string(), z.array(z.number())).optional(),
    }),
    mapping: z.object({ file: fileName, input: z.string().min(1), output: z.string().min(1), zSize: z.number().int().min(1).max(65536) }).optional(),
    truncation: z.object({ centre: z.array(z.number()).optional(), defaultPsi: z.number().min(0).max(2).default(0.7) }).default({ defaultPsi: 0.7 }),
    attributes: z.array(z.object({ name: z.string().min(1), unit: z.string().optional(), description: z.string().optional() })).default([]),
    layerNotes: z.array(z.object({ layer: z.number().int(), name: z.string(), drives: z.array(z.string()) })).default([]),
    directions: fileName.optional(),
    caution: z.string().max(4000).optional(),
  })
  .superRefine((card, ctx) => {
    if (card.synthesis.space === 'w+' && card.synthesis.layers < 2) ctx.addIssue({ code: 'custom', path: ['synthesis', 'layers'], message: "a 'w+' latent needs layers ≥ 2" });
    if (card.synthesis.space !== 'w+' && card.synthesis.layers !== 1) ctx.addIssue({ code: 'custom', path: ['synthesis', 'layers'], message: `space '${card.synthesis.space}' has exactly 1 layer` });
    const c = card.truncation.centre;
    if (c && c.length !== card.synthesis.latentSize) ctx.addIssue({ code: 'custom', path: ['truncation', 'centre'], message: `has ${c.length} values, latentSize is ${card.synthesis.latentSize}` });
    if (card.synthesis.space === 'z' && card.mapping) ctx.addIssue({ code: 'custom', path: ['mapping'], message: "a 'z'-space generator takes z directly and has no separate mapping network" });
    const names = new Set<string>();
    for (const a of card.attributes) {
      if (names.has(a.name)) ctx.addIssue({ code: 'custom', path: ['attributes'], message: `attribute '${a.name}' is listed twice` });
      names.add(a.name);
    }
    if (card.attributes.length && !card.synthesis.attributesOutput) ctx.addIssue({ code: 'custom', path: ['synthesis', 'attributesOutput'], message: 'attributes are listed but no attributesOutput names the output that holds them' });
  });

export type ModelCard = z.infer<typeof modelCardSchema>;

export function parseModelCard(text: string, file: string): ModelCard {
  return parseJsonFile(modelCardSchema, text, file, 'invalid model card');
}
