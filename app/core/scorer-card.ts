// Scorer cards: JSON beside a user's ONNX attribute model (format "plumbline.scorer-card" v1,
// docs/scorer-card.md). They say what the model takes (size, layout, value range or mean/std
// normalisation) and what each output column means.
import { z } from 'zod';
import { parseJsonFile } from './json-file.ts';

export const scorerCardSchema = z.object({
  format: z.literal('plumbline.scorer-card'),
  version: z.literal(1),
  name: z.string().min(1).max(200),
  file: z.string().min(1),
  input: z.object({
    name: z.string().min(1),
    width: z.number().int().min(1).max(4096),
    height: z.number().int().min(1).max(4096),
    layout: z.enum(['NCHW', 'NHWC']).default('NCHW'),
    /** Pixel values are mapped from [0, 1] to this range, then (v − mean) / std per channel if given. */
    range: z.tuple([z.number(), z.number()]).default([0, 1]),
    mean: z.tuple([z.number(), z.number(), z.number()]).optional(),
    std: z.tuple([z.number().positive(), z.number().positive(), z.number().positive()]).optional(),
  }),
  attributes: z.array(z.object({
    name: z.string().min(1),
    output: z.string().min(1),
    index: z.number().int().min(0).default(0),
    unit: z.string().default(''),
    description: z.string().default(''),
  })).default([]),
  /** Output holding a feature vector, usable as a path-length distance (squared L2, exponent 2). */
  features: z.string().min(1).optional(),
  licence: z.string().default(''),
}).refine((c) => c.attributes.length > 0 || c.features, 'a scorer card must list attributes or name a features output');

export type ScorerCard = z.infer<typeof scorerCardSchema>;

export function parseScorerCard(text: string, file: string): ScorerCard {
  return parseJsonFile(scorerCardSchema, text, file, 'invalid scorer card');
}
