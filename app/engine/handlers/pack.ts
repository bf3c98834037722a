// Handlers for preset packs: build one from the open project, and import one after verifying it
// against the open generator. Pack failures keep their own error codes (app/protocol/errors.ts).
import { writeFileAtomic } from '../../core/atomic-write.ts';
import { packOutput, readPackFile, requestPath } from '../request-paths.ts';
import { buildPack, verifyPack } from '../pack-ops.ts';
import type { AreaHandlers } from './context.ts';

export const packHandlers: AreaHandlers<'pack.build' | 'pack.import'> = {
  'pack.build': async (p, { workspace }) => {
    const project = workspace.requireProject('building a pack');
    // Only where the user chose, and an existing file only when they confirmed replacing it.
    const out = packOutput(p.out, p.overwrite ?? false);
    const r = await buildPack(workspace.requireGenerator(), project.dir);
    writeFileAtomic(out, r.bytes);
    return { file: out, directions: r.manifest.directions.map((d) => d.name), skipped: r.skipped, bytes: r.bytes.length };
  },
  'pack.import': async (p, { workspace }) => {
    const gen = workspace.requireGenerator();
    const file = requestPath(p.path, 'the pack');
    const verified = await verifyPack(readPackFile(file), file, gen);
    const imported: string[] = [];
    for (const d of verified.directions) {
      const entry = workspace.register({ ...d, source: { ...d.source, importedFrom: verified.pack.manifest.project } }, true);
      workspace.save(entry);
      imported.push(entry.name);
    }
    return { imported, directions: workspace.kept().map((d) => workspace.info(d)) };
  },
};
