// Handler for running an audit over kept directions: the audit pipeline (app/engine/audit/run.ts)
// as a job; the report is saved into the open project and answered with binary thumbnails and
// change-map PNGs.
import { auditReportFile, auditReportWire } from '../../core/audit/report.ts';
import { runAudit } from '../audit/run.ts';
import { driveSteps, withWorkers, type AreaHandlers } from './context.ts';
import { vectorHash } from '../project.ts';
import { referenceCodes } from '../locate-job.ts';
import { loadReference } from '../references.ts';
import { referenceProbe } from '../audit/probes.ts';
import { farmAuditMeasurer } from '../farm/audit-units.ts';
import { modelLocation } from '../farm/session.ts';
import type { WorkerProgress } from '../farm/coordinator.ts';

/** Progress is forwarded every this many batches (the audit runs hundreds), not every batch. */
const AUDIT_PROGRESS_EVERY = 4;

export const auditHandlers: AreaHandlers<'audit.run'> = {
  'audit.run': async (p, ctx) => {
    const { workspace } = ctx;
    const gen = workspace.requireGenerator();
    // A direction's target may be overridden for this audit, e.g. by an attribute the lead defined.
    const directions = p.directions.map((id) => {
      const d = workspace.direction(id);
      return p.targets?.[id] ? { ...d, target: p.targets[id] } : d;
    });
    const defined = workspace.definedAttributes.pick(workspace.project?.dir ?? null, p.defined ?? [], gen.info);
    // Named references of the open project join the probes (refused if found in another generator).
    const projectDir = workspace.project?.dir ?? null;
    const references = (p.references ?? []).map((name) => {
      referenceCodes(projectDir, name, gen); // refuses a reference found in another generator, or of the wrong size
      const stored = loadReference(projectDir!, name);
      return referenceProbe(name, stored.latent, stored.report.image.sha256);
    });
    // On a farm: the render-and-score step goes to its workers; statistics stay here.
    const farm = workspace.farm.farm;
    let workers: WorkerProgress[] | undefined;
    const measure = farm ? farmAuditMeasurer(farm, 'default', { fingerprint: gen.info.fingerprint, files: gen.info.files, ...modelLocation(gen), isCancelled: () => ctx.signal.aborted, onProgress: (r) => (workers = r.workers) }) : undefined;
    const report = await driveSteps(withWorkers(runAudit(gen, directions, {
      probes: p.probes, pinnedSeeds: p.pinnedSeeds, psi: p.psi, seed: p.seed, referenceStrength: p.referenceStrength, leakPass: p.leakPass, leakFail: p.leakFail, nullDirections: p.nullDirections, combinations: p.combinations,
    }, { defined, references, measure }), () => workers), ctx, AUDIT_PROGRESS_EVERY);
    // Kept as history with each direction's vector hash, so sign-off can tell which version passed.
    const project = workspace.project && !workspace.project.readOnlyHere ? workspace.project : null;
    const savedAs = project ? project.saveAudit(auditReportFile(report), Object.fromEntries(directions.map((d) => [d.name, vectorHash(d.vector, d.layers)]))) : null;
    const { report: wire, thumbnails, changeMaps } = auditReportWire(report);
    return { report: wire as never, thumbnails, changeMaps, savedAs };
  },
};
