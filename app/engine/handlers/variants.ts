// Handler for rendering a variant set (seeds × settings of kept directions) into a folder, as a
// resumable job; answers with the contact sheet.
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { requestPath } from '../request-paths.ts';
import { renderVariants, resolveRecipeReferences } from '../variants.ts';
import { driveSteps, type AreaHandlers } from './context.ts';
import { checkUse, useViolations } from '../../core/signoff-rules.ts';
import { directionUses } from '../project.ts';

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
    const done = await driveSteps(renderVariants(gen, recipe, used, out, { forced, references }), ctx);
    return { out, rendered: done.rendered, reused: done.reused, replaced: done.replaced, contactSheet: new Uint8Array(readFileSync(join(out, 'contact-sheet.png'))) };
  },
};
