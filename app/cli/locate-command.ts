// `plumbline locate`: find the latent of a reference image (app/engine/locate.ts) and write it as
// .npy with a JSON report. Exit code 0 when the match counts as found, 1 when the closest match is
// poor (the files are written either way, with the figures), 130 when cancelled.
import type { Command } from 'commander';
import { readFileSync, existsSync, statSync } from 'node:fs';
import { resolve } from 'node:path';
import { writeFileAtomic } from '../core/atomic-write.ts';
import { encodeNpy } from '../core/npy.ts';
import { encodePng } from '../core/image.ts';
import { PlumblineError } from '../core/errors.ts';
import { decodeReference, MAX_FILE_BYTES } from '../core/reference-image.ts';
import { locate, sha256, locateReport, LIKENESS_CAUTION, DEFAULT_BUDGET } from '../engine/locate.ts';
import { encodeStart } from '../engine/locate-encoder.ts';
import { runCliJob } from './jobs.ts';
import { driveSteps } from '../engine/handlers/context.ts';
import { openWorkspace, type CliContext } from './lab-commands.ts';

export function addLocateCommand(program: Command, ctx: CliContext, integer: (name: string, lo: number, hi: number) => (v: string) => number): void {
  program
    .command('locate')
    .description('find the latent code whose image is closest to a reference image (PNG or JPEG), without gradients')
    .requiredOption('--image <file>', 'reference image (PNG or JPEG; treated as sRGB)')
    .option('-m, --model <file>', 'the generator; default: the bundled demo')
    .option('--budget <n>', `generator evaluations to spend (default ${DEFAULT_BUDGET})`, integer('--budget', 50, 10_000_000))
    .option('--space <space>', "'w' (one code for every row) or 'w+' (then each row refined)", 'w')
    .option('--start <encoder.onnx>', 'an encoder network (image → w or w+) for the start point')
    .option('--seed <n>', 'seed of the search', integer('--seed', 0, 0xffffffff), 1)
    .option('--threads <n>', 'inference threads', integer('--threads', 1, 256))
    .requiredOption('-o, --out <file.npy>', 'where to write the found latent')
    .option('--json <file>', 'where to write the report (default: beside --out)')
    .option('--preview <file.png>', 'also write the matched image')
    .action(async (o) => {
      if (o.space !== 'w' && o.space !== 'w+') throw ctx.usage(`--space must be 'w' or 'w+', got '${o.space}'`);
      const imageFile = resolve(o.image);
      if (!existsSync(imageFile)) throw new PlumblineError('file-missing', `${imageFile}: image not found`, { file: imageFile });
      if (statSync(imageFile).size > MAX_FILE_BYTES) throw new PlumblineError('image-too-large', `${imageFile}: the file is ${statSync(imageFile).size.toLocaleString('en')} bytes, over the cap of ${MAX_FILE_BYTES.toLocaleString('en')}`, { file: imageFile });
      const bytes = new Uint8Array(readFileSync(imageFile));
      const workspace = await openWorkspace(o.model, o.threads);
      try {
        const gen = workspace.requireGenerator();
        const { width, height } = gen.imageSize();
        const ref = decodeReference(bytes, imageFile, width, height);
        const start = o.start ? await encodeStart(resolve(o.start), gen, ref.image) : null;
        process.stderr.write(`${LIKENESS_CAUTION}\n`);
        const job = locate(gen, ref.image, { budget: o.budget, space: o.space, seed: o.seed, start });
        const r = await runCliJob(ctx, workspace, 'locate', 'stopped; nothing written', (jobCtx) => driveSteps(job, jobCtx));
        if (!r) return;
        const npy = resolve(o.out);
        writeFileAtomic(npy, encodeNpy(r.latent, [1, ...r.shape]));
        const json = resolve(o.json ?? npy.replace(/\.npy$/i, '') + '.json');
        const report = locateReport(r, { image: imageFile, imageSha256: sha256(bytes), generator: { name: gen.info.name, fingerprint: gen.info.fingerprint }, notes: ref.notes, npy, start: o.start ? resolve(o.start) : 'best of random W samples' });
        writeFileAtomic(json, JSON.stringify(report, null, 2) + '\n');
        if (o.preview) writeFileAtomic(resolve(o.preview), encodePng(r.image));
        process.stdout.write(`${r.message}\n${r.evaluations} of ${r.budget} evaluations; latent ${npy}; report ${json}\n`);
        if (!r.found) process.exitCode = 1;
      } finally {
        await workspace.dispose();
      }
    });
}
