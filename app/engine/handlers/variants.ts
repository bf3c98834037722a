// Handler for rendering a variant set (seeds × settings of kept directions) into a folder, as a
// resumable job; answers with the contact sheet.
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { requestPath } from '../request-paths.ts';
import { PlumblineError } from '../../core/errors.ts';
import { renderVariants, resolveRecipeReferences } from '../variants.ts';
import { driveSteps, withWorkers, type AreaHandlers } from './context.ts';
import { checkUse, useViolations } from '../../core/signoff-rules.ts';
import { directionUses } from '../project.ts';
import { renderVariantsOnFarm } from '../farm/farm-variants.ts';
import { modelLocation } from '../farm/session.ts';
import type { WorkerProgress } from '../farm/coordinator.ts';

export const variantHandlers: AreaHandlers<'variants.render'> = {
  'variants.render': async (p, ctx) => {
    const { workspace } = ctx;
    const gen = workspace.requireGenerator();
    const used = [...new Set(p.settings.flatMap((s) => Object.keys(s.strengths)))].map((id) => workspace.direction(id));
    const recipe = { format: 'plumbline.variant-recipe' as const, version: 1 as const, name: p.name, seeds: p.seeds, references: p.references ?? [], psi: p.psi, settings: p.settings.map((s) => ({ label: s.label, strengths: Object.fromEntries(Object.entries(s.strengths).map(([id, v]) => [workspace.direction(id).name, v])) })) };
    const out = requestPath(p.out, 'the variant-set folder');
    // The same rules as the CLI: unapproved, rejected or out-of-range settings need a written reason.
    const forced = checkUse(useViolations(recipe.settings, directionUses(workspace.project, used)), p.forceReason?.trim() ? { reason: p.forceReason } : null, 'render anyway only with a written reason (Force with a reason)');
    // Named references of the open project beside the seeds (no files from the app: names only).
    const references = resolveRecipeReferences(recipe, null, workspace.project?.dir ?? null, gen);
    // On a farm: units go to its workers; per-worker figures ride on the progress events.
    const farm = workspace.farm.farm;
    if (references.length && farm) throw new PlumblineError('bad-request', 'a variant set with references renders on this machine only: disconnect the farm or leave the references out');
    let workers: WorkerProgress[] | undefined;
    const job = farm
      ? renderVariantsOnFarm(farm, gen, recipe, used, out, { ...modelLocation(gen), forced, isCancelled: () => ctx.signal.aborted, onProgress: (r) => (workers = r.workers) })
      : renderVariants(gen, recipe, used, out, { forced, references });
    const done = await driveSteps(withWorkers(job, () => workers), ctx);
    return { out, rendered: done.rendered, reused: done.reused, replaced: done.replaced, sheet: done.sheet, contactSheet: new Uint8Array(readFileSync(join(out, 'contact-sheet.png'))) };
  },
};
