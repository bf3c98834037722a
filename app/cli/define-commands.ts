// `plumbline define`: fit attributes from a tags file and save them into a project, and the
// shared step `audit --define` uses to fit them right before an audit. An attribute whose
// cross-validated accuracy is below the floor is refused with the reason, never saved or used.
import type { Command } from 'commander';
import { readFileSync, existsSync } from 'node:fs';
import { resolve } from 'node:path';
import { PlumblineError } from '../core/errors.ts';
import { accuracyText, parseTagsFile } from '../core/attributes/scorer-file.ts';
import { DefinedAttribute, defineAttribute, saveDefinedAttribute } from '../engine/defined-attributes.ts';
import { Generator } from '../engine/generator.ts';
import { demoCardPath } from '../engine/workspace.ts';
import type { CliContext } from './lab-commands.ts';

export interface DefinedOutcome {
  accepted: DefinedAttribute[];
  refused: { name: string; reason: string }[];
}

/** Fits every attribute of a tags file on `gen`, printing one line each (accuracy or refusal) to stderr. */
export async function defineFromTagsFile(gen: Generator, tagsPath: string, options: { psi?: number; seed?: number; project?: string }): Promise<DefinedOutcome> {
  const file = resolve(tagsPath);
  if (!existsSync(file)) throw new PlumblineError('file-missing', `${file}: tags file not found`, { file });
  const sets = parseTagsFile(readFileSync(file, 'utf8'), file);
  const out: DefinedOutcome = { accepted: [], refused: [] };
  for (const set of sets) {
    const { doc, refused } = await defineAttribute(gen, set, { psi: options.psi, seed: options.seed });
    if (refused) {
      out.refused.push({ name: set.name, reason: refused });
      process.stderr.write(`refused ${set.name}: ${refused}\n`);
      continue;
    }
    const saved = options.project ? saveDefinedAttribute(options.project, doc) : null;
    out.accepted.push(new DefinedAttribute(doc, saved));
    process.stderr.write(`defined ${set.name}: ${accuracyText(doc.accuracy)}${doc.accuracy.note ? `\n  note: ${doc.accuracy.note}` : ''}${saved ? `\n  saved ${saved}` : ''}\n`);
  }
  return out;
}

export function addDefineCommand(program: Command, ctx: CliContext, integer: (n: string, lo: number, hi: number) => (v: string) => number, number: (n: string, lo: number, hi: number) => (v: string) => number): void {
  program
    .command('define')
    .description('define attributes from tagged (has/lacks) or rated seeds; save each scorer into a project')
    .option('-m, --model <file>', 'model card or .onnx; default: the bundled demo')
    .requiredOption('--tags <file>', 'tags file: { "name": { "has": [seeds], "lacks": [seeds] } } or { "name": { "ratings": { "seed": value } } }')
    .requiredOption('-p, --project <dir>', 'project folder; scorers are written to <dir>/attributes/<name>.json')
    .option('--psi <number>', 'truncation ψ the seeds were tagged at (default: the generator’s)', number('--psi', 0, 2))
    .option('--seed <n>', 'seed of the cross-validation folds', integer('--seed', 0, 0xffffffff), 1)
    .option('--threads <n>', 'inference threads', integer('--threads', 1, 256))
    .action(async (o) => {
      const gen = await Generator.open(resolve(o.model ?? demoCardPath()), { threads: o.threads });
      try {
        const r = await defineFromTagsFile(gen, o.tags, { psi: o.psi, seed: o.seed, project: o.project });
        for (const a of r.accepted) process.stdout.write(`${a.name}\t${a.doc.accuracy.metric}\t${a.doc.accuracy.value.toFixed(4)}\t${a.file}\n`);
        if (r.refused.length) {
          process.stderr.write(`plumbline: ${r.refused.length} attribute(s) refused below the accuracy floor; nothing was saved for them\n`);
          process.exitCode = 1;
        }
      } finally {
        await gen.dispose();
      }
      if (ctx.interrupt.aborted) process.exitCode = 130;
    });
}
