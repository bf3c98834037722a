// The plumbline command line: the same core and engine as the app, in-process, no UI.
// Exit codes: 0 success, 1 failure, 2 invalid input, 130 cancelled (SIGINT or SIGTERM).
import { Command, CommanderError, InvalidArgumentError } from 'commander';
import { createHash } from 'node:crypto';
import { join, resolve } from 'node:path';
import cliProgress from 'cli-progress';
import { ERROR_CATALOGUE, PlumblineError } from '../core/errors.ts';
import { PLUMBLINE_VERSION, TOOL_STAMP } from '../protocol/version.ts';
import { writeFileAtomic } from '../core/atomic-write.ts';
import { encodePng } from '../core/image.ts';
import { Generator } from '../engine/generator.ts';
import { demoCardPath } from '../engine/workspace.ts';
import { parseSeeds } from './seeds.ts';
import { addLabCommands } from './lab-commands.ts';
import { addPackCommands } from './pack-commands.ts';
import { addLocateCommand } from './locate-command.ts';
import { addDefineCommand } from './define-commands.ts';
import { addFarmCommands } from './farm-commands.ts';

/** Bad command-line input found after parsing (commander prints its own parse errors). */
class UsageError extends Error {}

export const EXIT = { ok: 0, failure: 1, invalidInput: 2, cancelled: 130 } as const;

/** Ctrl+C aborts this signal; running work stops at its next checkpoint. */
const interrupt = new AbortController();
let interruptWords = 'cancelling after the current batch…';
process.on('SIGINT', () => {
  if (interrupt.signal.aborted) process.exit(EXIT.cancelled);
  interrupt.abort(new Error('interrupted (Ctrl+C)'));
  process.stderr.write(`\n${interruptWords} (Ctrl+C again to stop now)\n`);
});
// SIGTERM (timeout, a job scheduler, CI) is a cancel too: a farm run's units are withdrawn and its
// record closed, as on Ctrl+C, instead of a run left "running" with units queued for nobody.
process.on('SIGTERM', () => {
  if (interrupt.signal.aborted) process.exit(EXIT.cancelled);
  interrupt.abort(new Error('terminated (SIGTERM)'));
  process.stderr.write(`\nterminated: ${interruptWords} (SIGTERM again to stop now)\n`);
});

/** Option parsers carry the range they accept, so --help states exactly what is accepted. */
type RangedParser = ((v: string) => number) & { accepts: string };

function number(name: string, lo: number, hi: number): RangedParser {
  return Object.assign((v: string) => {
    const n = Number(v);
    if (!Number.isFinite(n) || n < lo || n > hi) throw new InvalidArgumentError(`${name} must be a number in [${lo}, ${hi}], got '${v}'`);
    return n;
  }, { accepts: `a number in [${lo}, ${hi}]` });
}

function integer(name: string, lo: number, hi: number): RangedParser {
  return Object.assign((v: string) => {
    const n = Number(v);
    if (!Number.isInteger(n) || n < lo || n > hi) throw new InvalidArgumentError(`${name} must be an integer in [${lo}, ${hi}], got '${v}'`);
    return n;
  }, { accepts: `an integer in [${lo}, ${hi}]` });
}

/** Appends each ranged option's accepted range to its help text (every command, once). */
function stateRanges(command: Command): void {
  for (const option of command.options) {
    const accepts = (option.parseArg as Partial<RangedParser> | undefined)?.accepts;
    if (accepts && !option.description.includes(accepts)) option.description = `${option.description} (${accepts})`;
  }
  for (const sub of command.commands) stateRanges(sub);
}

function progressBar(total: number, label: string) {
  if (!process.stderr.isTTY) return { update: (_n: number, _label?: string) => {}, stop: () => {} };
  const bar = new cliProgress.SingleBar({ format: `${label} [{bar}] {value}/{total} {eta_formatted}`, stream: process.stderr, hideCursor: true }, cliProgress.Presets.shades_classic);
  bar.start(total, 0);
  return { update: (n: number) => bar.update(n), stop: () => bar.stop() };
}

export function buildProgram(): Command {
  const program = new Command('plumbline')
    .description('Audit, repair and ship latent edit directions of ONNX image generators, on CPU.')
    .version(PLUMBLINE_VERSION)
    .showHelpAfterError('(run with --help for usage)')
    .exitOverride();

  program
    .command('sample')
    .description('render a range of seeds to PNG files plus a JSON manifest')
    .option('-m, --model <file>', 'model card (.json) or generator (.onnx); default: the bundled demo')
    .option('--mapping <file>', 'separate mapping network (.onnx) for a generator without a card')
    .requiredOption('-s, --seeds <list>', 'seeds, e.g. 0-7 or 1,5,9')
    .option('--psi <number>', 'truncation ψ (1 = none)', number('--psi', 0, 2))
    .requiredOption('-o, --out <dir>', 'output folder (created if missing)')
    .option('--threads <n>', 'inference threads', integer('--threads', 1, 256))
    .option('--batch <n>', 'images per inference batch', integer('--batch', 1, 1024), 16)
    .action(async (opts) => {
      let seeds: number[];
      try {
        seeds = parseSeeds(opts.seeds);
      } catch (err) {
        throw new UsageError(`--seeds: ${(err as Error).message}`);
      }
      const modelPath = resolve(opts.model ?? demoCardPath());
      const gen = await Generator.open(modelPath, { threads: opts.threads, mappingPath: opts.mapping });
      try {
        gen.batchSize = opts.batch;
        const psi = opts.psi ?? gen.info.defaultPsi;
        const out = resolve(opts.out);
        for (const a of gen.info.assumptions) process.stderr.write(`assumed: ${a}\n`);
        const bar = progressBar(seeds.length, 'sampling');
        const images: { seed: number; file: string; sha256: string }[] = [];
        for (let at = 0; at < seeds.length && !interrupt.signal.aborted; at += gen.batchSize) {
          const chunk = seeds.slice(at, at + gen.batchSize);
          const r = await gen.renderSeeds(chunk, psi, []);
          chunk.forEach((seed, i) => {
            const png = encodePng(gen.toRgba(r.images, i));
            const file = `seed-${String(seed).padStart(6, '0')}.png`;
            writeFileAtomic(join(out, file), png, { durable: false });
            images.push({ seed, file, sha256: createHash('sha256').update(png).digest('hex') });
          });
          bar.update(images.length);
        }
        bar.stop();
        const manifest = {
          format: 'plumbline.samples',
          version: 1,
          createdAt: new Date().toISOString(),
          tool: TOOL_STAMP,
          generator: { name: gen.info.name, fingerprint: gen.info.fingerprint, files: gen.info.files, space: gen.info.space, latentSize: gen.info.latentSize, layers: gen.info.layers },
          truncation: { psi, centre: gen.card?.truncation.centre ? 'model card' : gen.info.hasMapping ? 'estimated from mapping samples' : 'origin (Z space)' },
          seedConvention: 'plumbline latentForSeed: xoshiro128** via splitmix32, stream 0x5eed, polar Box–Muller',
          seeds: images.map((i) => i.seed),
          images,
          modelCard: gen.card,
          assumptions: gen.info.assumptions,
          complete: !interrupt.signal.aborted,
        };
        writeFileAtomic(join(out, 'manifest.json'), JSON.stringify(manifest, null, 2) + '\n');
        process.stdout.write(`wrote ${images.length} image(s) and manifest.json to ${out}\n`);
        if (interrupt.signal.aborted) process.exitCode = EXIT.cancelled;
      } finally {
        await gen.dispose();
      }
    });

  program
    .command('inspect')
    .description('open a generator and print what Plumbline reads from it')
    .option('-m, --model <file>', 'model card (.json) or generator (.onnx); default: the bundled demo')
    .option('--mapping <file>', 'separate mapping network (.onnx)')
    .action(async (opts) => {
      const gen = await Generator.open(resolve(opts.model ?? demoCardPath()), { mappingPath: opts.mapping });
      try {
        process.stdout.write(JSON.stringify(gen.info, null, 2) + '\n');
      } finally {
        await gen.dispose();
      }
    });
  const ctx = { progressBar, interrupt: interrupt.signal, usage: (m: string) => new UsageError(m), onInterruptSay: (words: string) => void (interruptWords = words) };
  addLabCommands(program, ctx, number, integer);
  addPackCommands(program, ctx, number);
  addLocateCommand(program, ctx, integer);
  addDefineCommand(program, ctx, integer, number);
  addFarmCommands(program, ctx, integer);
  stateRanges(program);
  return program;
}

export async function main(argv: string[]): Promise<number> {
  const program = buildProgram();
  try {
    await program.parseAsync(argv, { from: 'user' });
    return typeof process.exitCode === 'number' ? process.exitCode : EXIT.ok;
  } catch (err) {
    if (err instanceof CommanderError) {
      if (err.code === 'commander.helpDisplayed' || err.code === 'commander.version' || err.code === 'commander.help') return EXIT.ok;
      return EXIT.invalidInput; // commander already printed the message
    }
    if (err instanceof UsageError) {
      process.stderr.write(`plumbline: error: ${err.message}\n`);
      return EXIT.invalidInput;
    }
    if (err instanceof PlumblineError) {
      process.stderr.write(`plumbline: error: ${err.message}\n`);
      return ERROR_CATALOGUE[err.code].input ? EXIT.invalidInput : EXIT.failure;
    }
    process.stderr.write(`plumbline: unexpected error: ${(err as Error).stack ?? err}\n`);
    return EXIT.failure;
  }
}

process.exitCode = await main(process.argv.slice(2));
