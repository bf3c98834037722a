// Handler for running an audit over kept directions: the audit pipeline (app/engine/audit/run.ts)
// as a job; the report is saved into the open project and answered with binary thumbnails.
import { auditReportFile, auditReportWire } from '../../core/audit/report.ts';
import { runAudit } from '../audit/run.ts';
import { driveSteps, withWorkers, type AreaHandlers } from './context.ts';
import { vectorHash } from '../project.ts';
import { farmAuditMeasurer } from '../farm/audit-units.ts';
import { modelLocation } from '../farm/session.ts';
import type { WorkerProgress } from '../farm/coordinator.ts';

/** Progress is forwarded every this many batches (the audit runs hundreds), not every batch. */
const AUDIT_PROGRESS_EVERY = 4;

export const auditHandlers: AreaHandlers<'audit.run'> = {
  'audit.run': async (p, ctx) => {
    const { workspace } = ctx;
    const gen = workspace.requireGenerator();
    const directions = p.directions.map((id) => workspace.direction(id));
    // On a farm: the render-and-score step goes to its workers; statistics stay here.
    const farm = workspace.farm.farm;
    let workers: WorkerProgress[] | undefined;
    const measure = farm ? farmAuditMeasurer(farm, 'default', { fingerprint: gen.info.fingerprint, files: gen.info.files, ...modelLocation(gen), isCancelled: () => ctx.signal.aborted, onProgress: (r) => (workers = r.workers) }) : undefined;
    const report = await driveSteps(withWorkers(runAudit(gen, directions, {
      probes: p.probes, pinnedSeeds: p.pinnedSeeds, psi: p.psi, seed: p.seed, referenceStrength: p.referenceStrength, leakPass: p.leakPass, leakFail: p.leakFail, nullDirections: p.nullDirections, combinations: p.combinations,
    }, { measure }), () => workers), ctx, AUDIT_PROGRESS_EVERY);
    // Kept as history with each direction's vector hash, so sign-off can tell which version passed.
    const project = workspace.project && !workspace.project.readOnly ? workspace.project : null;
    const savedAs = project ? project.saveAudit(auditReportFile(report), Object.fromEntries(directions.map((d) => [d.name, vectorHash(d.vector, d.layers)]))) : null;
    const { report: wire, thumbnails } = auditReportWire(report);
    return { report: wire as never, thumbnails, savedAs };
  },
};
