// Handlers for preset packs: build one from the open project, and import one after verifying it
// against the open generator. Pack failures keep their own error codes (app/protocol/errors.ts).
import { existsSync, readFileSync } from 'node:fs';
import { resolve } from 'node:path';
import { PlumblineError } from '../../core/errors.ts';
import { writeFileAtomic } from '../../core/atomic-write.ts';
import { buildPack, verifyPack } from '../pack-ops.ts';
import type { AreaHandlers } from './context.ts';

export const packHandlers: AreaHandlers<'pack.build' | 'pack.import'> = {
  'pack.build': async (p, { workspace }) => {
    const project = workspace.requireProject('building a pack');
    const out = resolve(p.out);
    const r = await buildPack(workspace.requireGenerator(), project.dir);
    writeFileAtomic(out, r.bytes);
    return { file: out, directions: r.manifest.directions.map((d) => d.name), skipped: r.skipped, bytes: r.bytes.length };
  },
  'pack.import': async (p, { workspace }) => {
    const gen = workspace.requireGenerator();
    const file = resolve(p.path);
    if (!existsSync(file)) throw new PlumblineError('file-missing', `${file}: pack not found`, { file });
    const verified = await verifyPack(new Uint8Array(readFileSync(file)), file, gen);
    const imported: string[] = [];
    for (const d of verified.directions) {
      const entry = workspace.register({ ...d, source: { ...d.source, importedFrom: verified.pack.manifest.project } }, true);
      workspace.save(entry);
      imported.push(entry.name);
    }
    return { imported, directions: workspace.kept().map((d) => workspace.info(d)) };
  },
};
