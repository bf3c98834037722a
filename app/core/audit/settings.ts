// Audit settings: every number that shapes an audit, with its default and why.
import { z } from 'zod';
import { DEFAULT_PATH_DISTANCE } from './path-length.ts';

export const DEFAULT_STRENGTHS = [-3, -2.5, -2, -1.5, -1, -0.5, 0, 0.5, 1, 1.5, 2, 2.5, 3];

export const auditSettingsSchema = z.object({
  /** Random probe latents (seeded), in addition to pinned seeds. */
  probes: z.number().int().min(0).max(100_000).default(64),
  pinnedSeeds: z.array(z.number().int().min(0).max(0xffffffff)).default([]),
  /** Seed of the probe set, the σ sample and the bootstrap. */
  seed: z.number().int().min(0).max(0xffffffff).default(1),
  psi: z.number().min(0).max(2).default(0.7),
  /** Strength grid in σ units; 0 is added if missing. */
  strengths: z.array(z.number().min(-20).max(20)).min(2).default(DEFAULT_STRENGTHS),
  /** Summary strength: leakage, dependency and target effect are reported at ±this. */
  referenceStrength: z.number().positive().default(2),
  /** User scorer cards whose attributes join the audit (recorded for the report). */
  scorerCards: z.array(z.string()).default([]),
  featureScorer: z.string().nullable().default(null),
  attributes: z.union([z.enum(['default', 'card', 'image', 'all']), z.array(z.string()).min(1)]).default('default'),
  /** Random samples (ψ = 1, separate from the probes) for each attribute's σ. */
  sigmaSamples: z.number().int().min(16).max(100_000).default(512),
  /**
   * The leak (largest mean |Δa|/σa over non-target attributes, attribute dependency of Wu et al.
   * 2021) is in σ of the leaked attribute. Its upper 95% bound under this passes: 0.2 σ is
   * Cohen's "small" standardised effect (Cohen 1988; common practice).
   */
  leakPass: z.number().positive().default(0.2),
  /** A leak whose lower 95% bound is at or above this fails: 0.5 σ is Cohen's "medium" effect. */
  leakFail: z.number().positive().default(0.5),
  pathLength: z.object({
    distance: z.enum(['ssim-lab', 'ssim', 'ciede2000', 'l2', 'features']).default(DEFAULT_PATH_DISTANCE),
    /** Finite-difference step in σ units, on float images; 1e-2 keeps differences well above float32 rounding (METHODS §1.5). */
    epsilon: z.number().positive().max(1).default(0.01),
    /** A path length this many times the median over |t| ≤ 1 counts as a spike. */
    spikeRatio: z.number().min(1).default(5),
  }).default({ distance: DEFAULT_PATH_DISTANCE, epsilon: 0.01, spikeRatio: 5 }),
  /** Random unit directions per layer rule for the null baseline (METHODS §10); 0 skips it. */
  nullDirections: z.number().int().min(0).max(256).default(16),
  /** Samples of the published-form PPL reference row (Karras et al. 2019); 0 skips it. */
  referencePathSamples: z.number().int().min(0).max(100_000).default(128),
  bootstrapResamples: z.number().int().min(200).max(100_000).default(1000),
  /** Pairs of directions to check for additivity: 'all' (up to 12 directions), 'none', or explicit name pairs. */
  combinations: z.union([z.enum(['all', 'none']), z.array(z.tuple([z.string(), z.string()]))]).default('all'),
  worstProbes: z.number().int().min(0).max(16).default(3),
  /** Samples for MIG/DCI against a generator's declared factors (0 skips them). */
  groundTruthSamples: z.number().int().min(0).max(100_000).default(2000),
});

export type AuditSettings = z.infer<typeof auditSettingsSchema>;

/** Below this many probes the intervals are too wide to sign anything off (common practice: ≥ 30). */
export const MIN_USEFUL_PROBES = 30;

export const AUDIT_CAUTION =
  'An audit measures only the attributes it scores, on the probes it was given, at the strengths it tried. A direction that passes can still change something no scorer measures or behave differently far from the probe set. It says nothing about the generator’s training data, its licence, or whether an edit is appropriate; for edits of real people’s likenesses follow your studio’s legal and ethics policy and local law.';
