// `plumbline worker` and `plumbline farm status`: the command-line side of rendering on several
// machines through Redis (BullMQ). `--farm` on `audit` and `variants` lives with those commands.
import type { Command } from 'commander';
import { resolve } from 'node:path';
import { startFarmWorker } from '../engine/farm/worker.ts';
import { Farm, type RunProgress } from '../engine/farm/coordinator.ts';
import { redact } from '../engine/farm/connection.ts';
import type { CliContext } from './lab-commands.ts';

/** The password may come from the environment instead of the URL, so it stays out of `ps` listings. */
export const FARM_PASSWORD_ENV = 'PLUMBLINE_FARM_PASSWORD';

export function farmPassword(): string | undefined {
  return process.env[FARM_PASSWORD_ENV] || undefined;
}

/** One line per worker that delivered units: units, images, images/s while rendering. */
export function farmSummary(p: RunProgress): string {
  // Workers that delivered units; one that held a unit and died delivered nothing from it.
  return p.workers.filter((w) => w.units > 0).map((w) => `farm run ${p.runId}: worker ${w.worker}: ${w.units} unit(s), ${w.images} image(s), ${w.imagesPerSecond.toFixed(1)} img/s\n`).join('');
}

function parsePathMap(v: string, prev: [string, string][], usage: CliContext['usage']): [string, string][] {
  const at = v.indexOf('=');
  if (at <= 0 || at === v.length - 1) throw usage(`--path-map '${v}' must look like /coordinator/path=/this/machine/path`);
  return [...prev, [v.slice(0, at), resolve(v.slice(at + 1))]];
}

export function addFarmCommands(program: Command, ctx: CliContext, integer: (name: string, lo: number, hi: number) => (v: string) => number): void {
  program
    .command('worker')
    .description('render work units from a farm (Redis) until stopped with Ctrl+C')
    .requiredOption('--farm <url>', `the farm's Redis: redis://[user:password@]host:port[/db] (a password is better in ${FARM_PASSWORD_ENV}: it stays out of shell history and process lists)`)
    .option('--threads <n>', 'inference threads for this worker', integer('--threads', 1, 256), 1)
    .option('--name <name>', 'worker name shown in farm status (default: host-pid)')
    .option('--path-map <from=to>', "map the coordinator's generator path prefix to this machine's; repeatable", (v: string, prev: [string, string][]) => parsePathMap(v, prev, ctx.usage), [] as [string, string][])
    .option('--scratch <dir>', 'the only folder this worker writes (fetched generator files); default: a folder in the temp dir')
    .action(async (o) => {
      ctx.onInterruptSay('stopping: the unit in hand finishes, nothing new is taken…');
      const worker = await startFarmWorker({
        url: o.farm, password: farmPassword(), name: o.name, threads: o.threads, pathMaps: o.pathMap, scratch: o.scratch ? resolve(o.scratch) : undefined,
        lockMs: Number(process.env.PLUMBLINE_FARM_LOCK_MS) || undefined,
        stalledCheckMs: Number(process.env.PLUMBLINE_FARM_STALLED_CHECK_MS) || undefined,
        log: (line) => process.stderr.write(`${line}\n`),
      });
      process.stdout.write(`worker ${worker.name} ready\n`);
      // Stop on Ctrl+C or SIGTERM: the unit in hand finishes, nothing new is taken.
      await new Promise<void>((done) => {
        const poll = setInterval(() => {
          if (ctx.interrupt.aborted) {
            clearInterval(poll);
            done();
          }
        }, 200);
        process.once('SIGTERM', () => {
          clearInterval(poll);
          done();
        });
      });
      await worker.close();
      process.stdout.write(`worker ${worker.name} stopped\n`);
    });

  const farm = program.command('farm').description('look at a render farm');
  farm
    .command('status')
    .description('list the workers (name, threads, generator, images/s) and the runs of a farm')
    .requiredOption('--farm <url>', `the farm's Redis: redis://[user:password@]host:port[/db] (password: ${FARM_PASSWORD_ENV})`)
    .option('--json', 'print JSON')
    .action(async (o) => {
      const f = await Farm.connect(o.farm, farmPassword());
      try {
        const workers = await f.workers();
        const runs = await f.runs();
        if (o.json) {
          process.stdout.write(JSON.stringify({ farm: redact(o.farm), workers, runs }, null, 2) + '\n');
          return;
        }
        process.stdout.write(`farm ${redact(o.farm)}: ${workers.length} worker(s)\n`);
        for (const w of workers) process.stdout.write(`  ${w.name.padEnd(20)} ${String(w.threads).padStart(2)} thread(s)  generator ${w.fingerprint ? w.fingerprint.slice(0, 16) : '(none yet)      '}  ${w.imagesPerSecond === null ? '   – img/s' : `${w.imagesPerSecond.toFixed(2).padStart(6)} img/s`}  ${w.units} unit(s)${w.busy ? `  busy: ${w.busy}` : ''}\n`);
        process.stdout.write(`${runs.length} run(s)\n`);
        for (const r of runs) process.stdout.write(`  ${r.runId}  ${r.state.padEnd(9)} ${r.kind.padEnd(8)} ${r.units} unit(s)  ${r.startedAt}  ${r.label}${r.message ? `  — ${r.message}` : ''}\n`);
      } finally {
        await f.close();
      }
    });
}
