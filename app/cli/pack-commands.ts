// `plumbline pack`, `verify`, `apply` and `import`.
import type { Command } from 'commander';
import { dirname, join, resolve } from 'node:path';
import { createHash, createPrivateKey, createPublicKey, type KeyObject } from 'node:crypto';
import { READ_LIMITS, chosenOutputFile, readRegularFile, readTextFile } from '../core/path-policy.ts';
import { DIRECTION_NAME_RULE, isDirectionName } from '../protocol/names.ts';
import { MAX_STRENGTH } from '../protocol/messages.ts';
import { writeFileAtomic } from '../core/atomic-write.ts';
import { samePixels } from '../core/image.ts';
import { applyEdits, broadcastLayers, directionEdit } from '../core/latent.ts';
import { decodeNpy } from '../core/npy.ts';
import { PackError, keyIdOf, type PackFailure } from '../core/pack.ts';
import { ERROR_CATALOGUE, PlumblineError } from '../core/errors.ts';
import { Generator } from '../engine/generator.ts';
import { demoCardPath } from '../engine/workspace.ts';
import { buildPack, renderStrip, verifyPack, type VerifyResult } from '../engine/pack-ops.ts';
import { Project, directionUses } from '../engine/project.ts';
import { parseSeeds } from './seeds.ts';
import { runCliJob } from './jobs.ts';
import { parseRecipe, renderVariants, replacedText, resolveRecipeReferences, type VariantDirection } from '../engine/variants.ts';
import { driveSteps } from '../engine/handlers/context.ts';
import { checkUse, useViolations } from '../core/signoff-rules.ts';
import { loadDirections, openWorkspace, type CliContext } from './lab-commands.ts';
import { sharedPngWriter } from '../engine/png-writer.ts';
import { Farm, type RunProgress } from '../engine/farm/coordinator.ts';
import { renderVariantsOnFarm } from '../engine/farm/farm-variants.ts';
import { farmPassword, farmSummary } from './farm-commands.ts';

/** One exit code per failure class, so pipelines can tell them apart (docs/preset-pack.md). */
export const PACK_EXIT: Record<PackFailure, number> = { archive: 3, hostile: 4, hash: 5, version: 6, generator: 7, range: 8, missing: 9, signature: 10 };

function readFile(path: string): Uint8Array {
  return readRegularFile(path, 'pack', READ_LIMITS.packBytes);
}

/** Ed25519 keys in PEM (as `openssl genpkey -algorithm ed25519` writes them); errors never quote the key. */
function readKey(path: string, kind: 'private' | 'public'): KeyObject {
  const text = readTextFile(path, `${kind} key`, 64 * 1024);
  let key: KeyObject;
  try {
    key = kind === 'private' ? createPrivateKey(text) : createPublicKey(text);
  } catch {
    throw new PlumblineError('bad-request', `${resolve(path)}: not a PEM ${kind} key`, { file: resolve(path) });
  }
  if (key.asymmetricKeyType !== 'ed25519') throw new PlumblineError('bad-request', `${resolve(path)}: a ${key.asymmetricKeyType} key; packs are signed with Ed25519 keys`, { file: resolve(path) });
  return key;
}

const trusted = (paths: string[] = []) => paths.map((p) => readKey(p, 'public'));
const collect = (v: string, prev: string[]) => [...prev, v];

/** Opens the generator (the demo unless --model), verifies the pack against it (and its signature with --trust), runs `use`, and releases the generator. */
async function withVerifiedPack(o: { pack: string; model?: string; trust?: string[] }, use: (v: VerifyResult, gen: Generator) => Promise<void>): Promise<void> {
  const bytes = readFile(o.pack);
  const trust = trusted(o.trust);
  const gen = await Generator.open(resolve(o.model ?? demoCardPath()));
  try {
    await use(await verifyPack(bytes, resolve(o.pack), gen, { trust }), gen);
  } finally {
    await gen.dispose();
  }
}

async function withPackErrors(run: () => Promise<void>): Promise<void> {
  try {
    await run();
  } catch (err) {
    if (err instanceof PackError) {
      process.stderr.write(`plumbline: ${ERROR_CATALOGUE[err.code].title}: ${err.message}\n`);
      process.exitCode = PACK_EXIT[err.failure];
      return;
    }
    throw err;
  }
}

/** Latent codes from a .npy for `apply --latents`: [N, size] (W, repeated on every row) or [N, layers, size]. */
function readLatents(file: string, gen: Generator): { n: number; codes: Float32Array; sha256: string } {
  const bytes = readRegularFile(file, 'latents', READ_LIMITS.npyBytes);
  const a = decodeNpy(bytes, file);
  const { layers, size } = gen.layout;
  const s = a.shape;
  const n = s[0];
  const isW = s.length === 2 && s[1] === size;
  const isWPlus = s.length === 3 && s[1] === layers && s[2] === size;
  if (!(n >= 1) || (!isW && !isWPlus)) {
    throw new PlumblineError('npy-shape', `${file}: latents have shape [${s.join(', ')}]; this generator needs [N, ${size}]${layers > 1 ? ` or [N, ${layers}, ${size}]` : ''}`, { file });
  }
  if (!a.data.every(Number.isFinite)) throw new PlumblineError('npy-invalid', `${file}: latents contain NaN or infinite values`, { file });
  const codes = isW && layers > 1 ? broadcastLayers(a.data, gen.layout) : Float32Array.from(a.data);
  return { n, codes, sha256: createHash('sha256').update(bytes).digest('hex') };
}

export function addPackCommands(program: Command, ctx: CliContext, number: (n: string, lo: number, hi: number) => (v: string) => number): void {
  program
    .command('pack')
    .description("bundle a project's approved, audited directions into a preset pack (.plpack)")
    .requiredOption('--project <dir>', 'project folder')
    .option('-m, --model <file>', 'the generator the project was audited on (model card or .onnx); default: the bundled demo')
    .requiredOption('-o, --out <file.plpack>', 'pack to write')
    .option('--overwrite', 'replace --out if it exists')
    .option('--sign <key.pem>', 'sign the manifest with this Ed25519 private key (PEM)')
    .action(async (o) => withPackErrors(async () => {
      const out = chosenOutputFile(o.out, 'the pack', { overwrite: !!o.overwrite, relativeTo: process.cwd() });
      const signWith = o.sign ? readKey(o.sign, 'private') : undefined;
      const gen = await Generator.open(resolve(o.model ?? demoCardPath()));
      try {
        const { bytes, manifest, skipped } = await buildPack(gen, o.project, { signWith });
        writeFileAtomic(out, bytes);
        for (const d of manifest.directions) process.stdout.write(`packed ${d.name.padEnd(24)} ${d.audit.verdict.padEnd(7)} safe ${d.safeRange[0]}…${d.safeRange[1]} σ  approved by ${d.signOff.reviewer}\n`);
        for (const s of skipped) process.stdout.write(`skipped ${s}\n`);
        process.stdout.write(`wrote ${out} (${bytes.length} bytes) for generator ${manifest.generator.fingerprint.slice(0, 16)}…${signWith ? `, signed by key ${keyIdOf(createPublicKey(signWith))}` : ''}\n`);
      } finally {
        await gen.dispose();
      }
    }));

  program
    .command('verify')
    .description('check a pack: archive safety, hashes, format version, generator fingerprint and ranges')
    .requiredOption('--pack <file>', 'the pack')
    .option('-m, --model <file>', 'the generator production will use; default: the bundled demo')
    .option('--trust <key.pem>', 'require a signature by this Ed25519 public key (PEM); repeatable', collect, [] as string[])
    .action(async (o) => withPackErrors(() => withVerifiedPack(o, async (r, gen) => {
      const signed = r.signature.status === 'trusted' ? `signed by trusted key ${r.signature.keyId}` : r.signature.status === 'signed' ? `signed by key ${r.signature.keyId} (not checked against a trusted key: pass --trust)` : 'unsigned';
      process.stdout.write(`ok: ${r.directions.length} direction(s), ${r.pack.manifest.entries.length} entries with matching SHA-256, format ${r.pack.manifest.version}, generator ${gen.info.name} (${gen.info.fingerprint.slice(0, 16)}…), σ and safe ranges recomputed, ${signed}\n`);
      for (const d of r.directions) process.stdout.write(`  ${d.name.padEnd(24)} safe ${d.safeRange[0]}…${d.safeRange[1]} σ\n`);
    })));

  program
    .command('apply')
    .description("render with a pack's directions for production; refuses strengths outside the safe range unless --force")
    .requiredOption('--pack <file>', 'the pack')
    .option('-m, --model <file>', 'the generator; default: the bundled demo')
    .option('-s, --seeds <list>', 'seeds to render, e.g. 0-3')
    .option('--latents <file.npy>', 'render from latent codes instead of seeds ([N, size] or [N, layers, size], e.g. from plumbline locate); used as they are, without truncation')
    .option('--set <name=strength>', 'a direction and its strength in σ; repeatable', (v: string, prev: string[]) => [...prev, v], [] as string[])
    .option('--psi <number>', 'truncation ψ (default: the generator card’s)', number('--psi', 0, 2))
    .option('--preview <name>', "re-render a direction's pack preview exactly, for comparison")
    .option('--force', 'allow strengths outside the audited safe range (needs --reason; recorded in the manifest)')
    .option('--reason <text>', 'why --force is needed; recorded in the manifest')
    .option('--trust <key.pem>', 'require a signature by this Ed25519 public key (PEM); repeatable', collect, [] as string[])
    .requiredOption('-o, --out <dir>', 'output folder')
    .action(async (o) => withPackErrors(() => withVerifiedPack(o, async (v, gen) => {
      const out = resolve(o.out);
      if (o.preview) {
        const d = v.directions.find((x) => x.name === o.preview);
        const spec = v.pack.manifest.directions.find((x) => x.name === o.preview)?.previewSpec;
        if (!d || !spec) throw ctx.usage(`--preview: no direction '${o.preview}' with a preview in the pack`);
        const png = await renderStrip(gen, d, spec);
        writeFileAtomic(join(out, `${d.name}-preview.png`), png);
        const previewPath = v.pack.manifest.directions.find((x) => x.name === o.preview)!.preview!;
        const packed = v.pack.files.get(previewPath)!;
        // Pixels are what must match: PNG bytes also depend on the encoder's settings, which a
        // later Plumbline may change without changing a single pixel.
        const verdict = samePixels(png, packed, previewPath);
        process.stdout.write(`${verdict.same ? 'identical to' : 'DIFFERS from'} the pack's preview (${verdict.detail}): ${join(out, `${d.name}-preview.png`)}\n`);
        if (!verdict.same) process.exitCode = 1;
        return;
      }
      if (!o.seeds === !o.latents) throw ctx.usage('apply needs exactly one of --seeds or --latents (or --preview <name>)');
      const latents = o.latents ? readLatents(resolve(o.latents), gen) : null;
      let seeds: number[];
      try {
        seeds = latents ? Array.from({ length: latents.n }, (_, i) => i) : parseSeeds(o.seeds);
      } catch (err) {
        throw ctx.usage(`--seeds: ${(err as Error).message}`);
      }
      const sets = (o.set as string[]).map((s) => {
        const m = /^([A-Za-z0-9_.-]+)=(.*)$/.exec(s);
        if (!m) throw ctx.usage(`--set '${s}' must look like name=strength, e.g. crest_size=1.5`);
        const strength = Number(m[2]);
        // The engine's strength limits (app/protocol/messages.ts): beyond them no audit says anything.
        if (m[2].trim() === '' || !Number.isFinite(strength) || Math.abs(strength) > MAX_STRENGTH) throw ctx.usage(`--set '${s}': the strength must be a number in [-${MAX_STRENGTH}, ${MAX_STRENGTH}] σ, got '${m[2]}'`);
        if (!isDirectionName(m[1])) throw ctx.usage(`--set '${s}': '${m[1]}' is not a direction name (${DIRECTION_NAME_RULE})`);
        const d = v.directions.find((x) => x.name === m[1]);
        if (!d) throw ctx.usage(`--set: the pack has no direction '${m[1]}'; it holds ${v.directions.map((x) => x.name).join(', ')}`);
        return { d, strength };
      });
      // The rules shared with variant sets and the app (app/core/signoff-rules.ts); a pack holds approved directions only.
      let decision;
      try {
        decision = checkUse(
          useViolations([{ label: 'apply', strengths: Object.fromEntries(sets.map(({ d, strength }) => [d.name, strength])) }], v.directions.map((d) => ({ name: d.name, status: 'approved' as const, safeRange: d.safeRange }))),
          o.force ? { reason: o.reason ?? '' } : null,
          'pass --force --reason "…" to render anyway (recorded in the manifest)',
        );
      } catch (err) {
        throw ctx.usage((err as Error).message);
      }
      if (decision.forced.length) process.stderr.write(`warning: forced outside the safe range: ${decision.forced.map((f) => `${f.direction}=${f.strength}`).join(', ')} (reason: ${decision.reason})\n`);
      const psi: number = o.psi ?? gen.info.defaultPsi;
      const images: (({ seed: number } | { latent: number }) & { file: string; sha256: string })[] = [];
      // Conversion to 8 bits, encoding and writing run on worker threads while the next batch renders.
      const pool = sharedPngWriter();
      const writes: Promise<void>[] = [];
      try {
        for (let at = 0; at < seeds.length; at += gen.batchSize) {
          const chunk = seeds.slice(at, at + gen.batchSize);
          const per = gen.layout.layers * gen.layout.size;
          const codes = latents ? latents.codes.slice(at * per, (at + chunk.length) * per) : await gen.codesForSeeds(chunk, psi);
          applyEdits(codes, gen.layout, sets.map(({ d, strength }) => directionEdit(d, strength)));
          const r = await gen.synthesize(codes, chunk.length);
          for (let i = 0; i < chunk.length; i++) {
            const n = chunk[i];
            const slot = at + i;
            const file = `${latents ? 'latent' : 'seed'}-${String(n).padStart(6, '0')}.png`;
            writes.push(pool.writeFloat(gen.floatImage(r.images, i), join(out, file)).then((w) => void (images[slot] = { ...(latents ? { latent: n } : { seed: n }), file, sha256: w.sha256 })));
          }
          // At most about two batches in flight.
          if (writes.length > 2 * gen.batchSize) await Promise.all(writes.splice(0, writes.length - gen.batchSize));
        }
        await Promise.all(writes);
      } finally {
        await Promise.allSettled(writes);
      }
      writeFileAtomic(join(out, 'manifest.json'), JSON.stringify({
        format: 'plumbline.applied', version: 1, createdAt: new Date().toISOString(), pack: v.pack.manifest.project,
        generator: v.pack.manifest.generator, ...(latents ? { latents: { file: resolve(o.latents), sha256: latents.sha256 } } : { psi }), settings: sets.map(({ d, strength }) => ({ direction: d.name, strength, safeRange: d.safeRange, forced: strength < d.safeRange[0] || strength > d.safeRange[1] })), forceReason: decision.reason, images,
      }, null, 2) + '\n');
      process.stdout.write(`wrote ${images.length} image(s) and manifest.json to ${out}\n`);
    })));

  program
    .command('variants')
    .description('render a variant set from a recipe: PNGs, a reproducing manifest and a labelled contact sheet (resumable)')
    .option('-m, --model <file>', 'the generator; default: the bundled demo')
    .requiredOption('--recipe <file>', 'variant recipe (.json, docs/variant-recipe.md)')
    .option('-d, --directions <file>', 'directions (.npy with .json sidecar); with --project, judged by its sign-off')
    .option('--pack <file>', 'a preset pack instead of --directions (its safe ranges are enforced)')
    .option('--force', 'render unapproved or rejected directions, or strengths outside the safe range (needs --reason; recorded in the manifest)')
    .option('--reason <text>', 'why --force is needed; recorded in the manifest')
    .option('--trust <key.pem>', 'with --pack: require a signature by this Ed25519 public key (PEM); repeatable', collect, [] as string[])
    .option('--project <dir>', "the project whose sign-off and audited safe ranges apply (as in the app), whose directions are used when no --directions or --pack is given, and whose named references the recipe may name")
    .requiredOption('-o, --out <dir>', 'output folder; rerun the same command to resume')
    .option('--farm <url>', 'render on a farm: redis://[user:password@]host:port[/db] (password: PLUMBLINE_FARM_PASSWORD; workers: plumbline worker)')
    .option('--no-publish-model', 'on a farm, do not publish the generator files through Redis (workers read them from shared storage)')
    .action(async (o) => withPackErrors(async () => {
      if (o.directions && o.pack) throw ctx.usage('give one of --directions or --pack, not both');
      if (!o.directions && !o.pack && !o.project) throw ctx.usage('give --directions, --pack, or --project (to use its directions)');
      if (o.pack && o.project) throw ctx.usage('--pack carries its own sign-off; leave out --project');
      const recipeFile = resolve(o.recipe);
      const recipe = parseRecipe(readTextFile(recipeFile, 'recipe'), recipeFile);
      const workspace = await openWorkspace(o.model, undefined);
      try {
        const gen = workspace.requireGenerator();
        let dirs: VariantDirection[];
        if (o.pack) dirs = (await verifyPack(readFile(o.pack), resolve(o.pack), gen, { trust: trusted(o.trust) })).directions.map((d) => ({ ...d, status: 'approved' as const }));
        else if (o.project) {
          // The same rules as the app with this project open (app/core/signoff-rules.ts): each
          // direction's sign-off for its vector as given, and the safe range of its passing audit.
          const opened = workspace.openProject({ path: resolve(o.project), create: false });
          if (!opened.generatorMatches) process.stderr.write(`warning: ${opened.path} was made with another generator (fingerprint ${opened.generatorFingerprint?.slice(0, 12)}…); its sign-off may not hold for ${gen.info.name}\n`);
          const loaded = o.directions ? loadDirections(workspace, o.directions) : workspace.kept();
          const uses = directionUses(workspace.project, loaded);
          dirs = loaded.map((d, i) => ({ ...d, status: uses[i].status, safeRange: uses[i].safeRange ?? undefined }));
        } else {
          dirs = loadDirections(workspace, o.directions);
          process.stderr.write(`warning: no sign-off or safe range to check: ${o.directions} is not part of a project or pack; pass --project <dir> to apply its sign-off, or use --pack\n`);
        }
        const farm = o.farm ? await Farm.connect(o.farm, farmPassword()) : null;
        const idle = farm ? await farm.noWorkersWarning() : null;
        if (idle) process.stderr.write(`warning: ${idle}\n`);
        let progress: RunProgress | null = null;
        try {
          const force = o.force ? { reason: o.reason ?? '' } : null;
          const references = resolveRecipeReferences(recipe, dirname(recipeFile), o.project ? resolve(o.project) : null, gen);
          if (farm && references.length) throw ctx.usage('a recipe with references renders on this machine only: run it without --farm');
          const steps = farm
            ? renderVariantsOnFarm(farm, gen, recipe, dirs, resolve(o.out), { force, modelPath: resolve(o.model ?? demoCardPath()), publish: o.publishModel, isCancelled: () => ctx.interrupt.aborted, onProgress: (p) => (progress = p), onNote: (line) => process.stderr.write(`farm: ${line}\n`) })
            : renderVariants(gen, recipe, dirs, resolve(o.out), { force, references });
          const done = await runCliJob(ctx, workspace, 'variants', 'stopped; run the same command again to resume', (job) => driveSteps(steps, job));
          if (progress) process.stderr.write(farmSummary(progress));
          if (done) process.stdout.write(`${recipe.name}: ${done.rendered} rendered${done.replaced ? ` (${done.replaced} replaced: ${replacedText(done.replacedWhy)})` : ''}, ${done.reused} kept from an earlier run; manifest.json and contact-sheet.png${done.sheet.shown < done.sheet.of ? ` (the sheet shows the first ${done.sheet.shown} of ${done.sheet.of} ${done.sheet.what})` : ''} in ${resolve(o.out)}\n`);
        } finally {
          await farm?.close();
        }
      } finally {
        await workspace.dispose();
      }
    }));

  program
    .command('import')
    .description("import a pack's directions into a project (after verifying it against the project's generator)")
    .requiredOption('--pack <file>', 'the pack')
    .requiredOption('--project <dir>', 'project folder (created if missing)')
    .option('-m, --model <file>', 'the generator; default: the bundled demo')
    .option('--trust <key.pem>', 'require a signature by this Ed25519 public key (PEM); repeatable', collect, [] as string[])
    .action(async (o) => withPackErrors(() => withVerifiedPack(o, async (v, gen) => {
      const project = Project.open(o.project, true, { name: gen.info.name, fingerprint: gen.info.fingerprint });
      for (const r of project.refused) process.stderr.write(`warning: ${r}\n`);
      for (const d of v.directions) {
        // Names follow app/protocol/names.ts (one path segment), and saveDirection checks the path again.
        project.saveDirection({ ...d, source: { ...d.source, importedFrom: v.pack.manifest.project } }, gen.layout.space);
        process.stdout.write(`imported ${d.name}\n`);
      }
    })));
}
