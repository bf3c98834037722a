// Preset packs end to end (build from an audited demo project, verify, apply, import) and
// against hostile input: unsafe paths, symlinks, duplicates, lying sizes, zip bombs, hash
// mismatches, the wrong generator, unknown versions and bad .npy files inside. Property-based
// fuzzing (fast-check) shows the readers never crash and never write anything.
import { test, before } from 'node:test';
import assert from 'node:assert/strict';
import { existsSync, readFileSync, readdirSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { spawnSync } from 'node:child_process';
import fc from 'fast-check';
import { EngineHost } from '../../app/engine/host.ts';
import { callHost } from '../helpers/host.ts';
import { PackError, readPack, sha256 } from '../../app/core/pack.ts';
import { decodeNpy } from '../../app/core/npy.ts';
import { PlumblineError } from '../../app/core/errors.ts';
import { cardGenerator, tempDir } from '../helpers/models.ts';
import { rawZip } from '../helpers/zip.ts';

const root = join(import.meta.dirname, '..', '..');
const cli = (...args: string[]) => spawnSync(process.execPath, [join(root, 'app', 'cli', 'bin.js'), ...args], { encoding: 'utf8' });
let project: string;
let packFile: string;
let packBytes: Uint8Array;

const call = callHost;

before(async () => {
  project = join(tempDir(), 'tidebound');
  const host = new EngineHost({ threads: 1 });
  await call(host, 'model.openDemo', {});
  await call(host, 'directions.open', { path: join(root, 'resources', 'demo', 'sigil-directions.npy') });
  const opened = await call(host, 'project.open', { path: project, create: true });
  const ids = opened.directions.filter((d: any) => ['crest_size', 'turn', 'outline_bold'].includes(d.name)).map((d: any) => d.id);
  await call(host, 'audit.run', { directions: ids, probes: 32, pinnedSeeds: [], psi: 0.7, seed: 1, referenceStrength: 2, leakPass: 0.15, leakFail: 0.35, nullDirections: 8, combinations: 'none' });
  for (const d of opened.directions.filter((x: any) => ['crest_size', 'turn'].includes(x.name))) await call(host, 'project.review', { direction: d.id, status: 'approved', reviewer: 'Ines', note: 'clean' });
  await host.dispose();
  packFile = join(tempDir(), 'tidebound.plpack');
  const r = cli('pack', '--project', project, '--out', packFile);
  assert.equal(r.status, 0, r.stderr);
  packBytes = new Uint8Array(readFileSync(packFile));
});

test('pack holds only approved, audited directions, with hashes, previews and a self-contained report', async () => {
  const p = await readPack(packBytes, 'tidebound.plpack');
  assert.deepEqual(p.manifest.directions.map((d) => d.name).sort(), ['crest_size', 'turn']);
  assert.equal(p.manifest.generator.fingerprint.length, 64);
  for (const e of p.manifest.entries) assert.equal(sha256(p.files.get(e.path)!), e.sha256);
  const html = new TextDecoder().decode(p.files.get('report.html')!);
  assert.doesNotMatch(html, /(src|href)="(https?:|\/\/)/, 'nothing fetched from anywhere');
  assert.doesNotMatch(html, /<script/);
  assert.match(html, /data:image\/png;base64,/);
  const crest = p.manifest.directions.find((d) => d.name === 'crest_size')!;
  assert.equal(crest.audit.verdict, 'pass');
  assert.deepEqual(crest.safeRange, [-3, 3]);
  assert.equal(crest.signOff.reviewer, 'Ines');
});

test('a failed direction approved by override never yields a pack that its own verify refuses', async () => {
  // Found by a new-user tryout: pack signed and shipped a direction whose audit left the safe
  // range empty, and verify then refused the whole pack. Now pack leaves such a direction out and
  // says why; a non-empty range is shipped with the override on record.
  const host = new EngineHost({ threads: 1 });
  await call(host, 'model.openDemo', {});
  const opened = await call(host, 'project.open', { path: project, create: false });
  const outline = opened.directions.find((x: any) => x.name === 'outline_bold');
  await call(host, 'project.review', { direction: outline.id, status: 'approved', reviewer: 'Ines', note: '', override: 'testing what a pack does with it' });
  await host.dispose();
  const file = join(tempDir(), 'override.plpack');
  const r = cli('pack', '--project', project, '--out', file);
  assert.equal(r.status, 0, r.stderr);
  const p = await readPack(new Uint8Array(readFileSync(file)), 'override.plpack');
  const shipped = p.manifest.directions.find((d) => d.name === 'outline_bold');
  if (shipped) {
    assert.ok(shipped.safeRange[1] - shipped.safeRange[0] > 0);
    assert.equal(shipped.signOff.override, 'testing what a pack does with it');
  } else assert.match(r.stdout, /skipped outline_bold \(its latest audit leaves no safe range/);
  const v = cli('verify', '--pack', file);
  assert.equal(v.status, 0, v.stderr);
});

test('verify passes on the demo; another generator fails with its own exit code and message', () => {
  const ok = cli('verify', '--pack', packFile);
  assert.equal(ok.status, 0, ok.stderr);
  assert.match(ok.stdout, /^ok: 2 direction\(s\)/);
  const other = cardGenerator(tempDir()).card;
  const wrong = cli('verify', '--pack', packFile, '--model', other);
  assert.equal(wrong.status, 7);
  assert.match(wrong.stderr, /wrong generator: .*made for generator Tidebound sigils \(demo\).*must not be applied to it/);
});

test('apply reproduces the pack previews bit for bit and guards the safe range', () => {
  const out = tempDir();
  for (const name of ['crest_size', 'turn']) {
    const r = cli('apply', '--pack', packFile, '--preview', name, '--out', out);
    assert.equal(r.status, 0, r.stderr);
    assert.match(r.stdout, /identical to the pack's preview/);
  }
  const inside = cli('apply', '--pack', packFile, '--seeds', '0-2', '--set', 'crest_size=1.5', '--set', 'turn=-1', '--out', join(out, 'prod'));
  assert.equal(inside.status, 0, inside.stderr);
  assert.equal(readdirSync(join(out, 'prod')).filter((f) => f.endsWith('.png')).length, 3);
  const refused = cli('apply', '--pack', packFile, '--seeds', '0', '--set', 'crest_size=4', '--out', join(out, 'no'));
  assert.equal(refused.status, 2);
  assert.match(refused.stderr, /refusing setting 'apply': crest_size=4 is outside its audited safe range -3…3 σ; pass --force --reason/);
  assert.equal(existsSync(join(out, 'no')), false);
  // Forcing needs a written reason (issue 11: "refused unless forced with a reason, which the manifest records").
  const bare = cli('apply', '--pack', packFile, '--seeds', '0', '--set', 'crest_size=4', '--force', '--out', join(out, 'bare'));
  assert.equal(bare.status, 2);
  assert.match(bare.stderr, /needs a written reason/);
  const forced = cli('apply', '--pack', packFile, '--seeds', '0', '--set', 'crest_size=4', '--force', '--reason', 'client wants the oversized crest', '--out', join(out, 'forced'));
  assert.equal(forced.status, 0, forced.stderr);
  assert.match(forced.stderr, /forced outside the safe range/);
  const manifest = JSON.parse(readFileSync(join(out, 'forced', 'manifest.json'), 'utf8'));
  assert.equal(manifest.settings[0].forced, true);
  assert.equal(manifest.forceReason, 'client wants the oversized crest');
  // Bad input is refused as input (exit 2, naming the option and what it accepts), never reaching
  // the generator and never as an unexpected error — the same limits as the other commands.
  const badInput: [string[], RegExp][] = [
    [['--psi', 'abc'], /--psi must be a number in \[0, 2\], got 'abc'/],
    [['--psi', '1e9'], /--psi must be a number in \[0, 2\]/],
    [['--psi', '-5'], /--psi must be a number in \[0, 2\]/],
    [['--seeds', 'abc'], /--seeds: 'abc' is not a seed or a seed range/],
    [['--seeds', '3-1'], /--seeds: seed range '3-1' runs backwards/],
    [['--seeds', '4294967296'], /--seeds: seed 4294967296 is above 4294967295/],
    [['--seeds', '0', '--set', 'turn=1e9'], /--set 'turn=1e9': the strength must be a number in \[-50, 50\] σ/],
    [['--seeds', '0', '--set', 'turn=abc'], /--set 'turn=abc': the strength must be a number/],
  ];
  for (const [args, message] of badInput) {
    const r = cli('apply', '--pack', packFile, ...(args.includes('--seeds') ? [] : ['--seeds', '0']), ...args, '--out', join(out, 'bad'));
    assert.equal(r.status, 2, `${args.join(' ')}: ${r.stderr}`);
    assert.match(r.stderr, message, args.join(' '));
    assert.doesNotMatch(r.stderr, /unexpected error|    at /, args.join(' '));
  }
  assert.equal(existsSync(join(out, 'bad')), false);
});

test('apply --latents renders stored codes exactly as the same codes from seeds (W+ [N, 3, 32] and W [N, 32])', async () => {
  const out = tempDir();
  const { Generator } = await import('../../app/engine/generator.ts');
  const { encodeNpy } = await import('../../app/core/npy.ts');
  const { demoCardPath } = await import('../../app/engine/host.ts');
  const gen = await Generator.open(demoCardPath(), { threads: 1 });
  const codes = await gen.codesForSeeds([4, 9], 0.7); // [2, 3, 32], rows identical
  await gen.dispose();
  writeFileSync(join(out, 'wplus.npy'), encodeNpy(codes, [2, 3, 32]));
  writeFileSync(join(out, 'w.npy'), encodeNpy(Float32Array.from([...codes.subarray(0, 32), ...codes.subarray(96, 128)]), [2, 32]));
  const bySeeds = cli('apply', '--pack', packFile, '--seeds', '4,9', '--set', 'turn=1', '--out', join(out, 'seeds'));
  assert.equal(bySeeds.status, 0, bySeeds.stderr);
  for (const kind of ['wplus', 'w']) {
    const r = cli('apply', '--pack', packFile, '--latents', join(out, `${kind}.npy`), '--set', 'turn=1', '--out', join(out, kind));
    assert.equal(r.status, 0, r.stderr);
    for (const [i, seed] of [[0, 4], [1, 9]]) {
      const a = readFileSync(join(out, kind, `latent-${String(i).padStart(6, '0')}.png`));
      const b = readFileSync(join(out, 'seeds', `seed-${String(seed).padStart(6, '0')}.png`));
      assert.ok(a.equals(b), `${kind} latent ${i} differs from seed ${seed}`);
    }
    assert.equal(JSON.parse(readFileSync(join(out, kind, 'manifest.json'), 'utf8')).latents.sha256.length, 64);
  }
  writeFileSync(join(out, 'bad.npy'), encodeNpy(new Float32Array(2 * 31), [2, 31]));
  const bad = cli('apply', '--pack', packFile, '--latents', join(out, 'bad.npy'), '--out', join(out, 'bad'));
  assert.equal(bad.status, 2);
  assert.match(bad.stderr, /bad\.npy: latents have shape \[2, 31\]; this generator needs \[N, 32\] or \[N, 3, 32\]/);
  const both = cli('apply', '--pack', packFile, '--latents', join(out, 'w.npy'), '--seeds', '1', '--out', join(out, 'both'));
  assert.equal(both.status, 2);
});

test('import brings the directions into another project', () => {
  const dest = join(tempDir(), 'production');
  const r = cli('import', '--pack', packFile, '--project', dest);
  assert.equal(r.status, 0, r.stderr);
  assert.deepEqual(readdirSync(join(dest, 'directions')).sort(), ['crest_size.json', 'crest_size.npy', 'turn.json', 'turn.npy']);
});

/** Rebuilds the valid pack's entries with a change, recomputing the manifest hashes unless told not to. */
async function variant(change: (files: Map<string, Uint8Array>, manifest: any) => void, rehash = true): Promise<Uint8Array> {
  const p = await readPack(packBytes);
  const files = new Map(p.files);
  const manifest = structuredClone(p.manifest) as any;
  change(files, manifest);
  if (rehash) manifest.entries = [...files.keys()].filter((k) => k !== 'manifest.json').map((k) => ({ path: k, size: files.get(k)!.length, sha256: sha256(files.get(k)!) }));
  files.set('manifest.json', new TextEncoder().encode(JSON.stringify(manifest)));
  return rawZip([...files].map(([name, data]) => ({ name, data })));
}

test('hostile packs are refused with a clear reason, and the CLI gives each class its exit code', async () => {
  const valid = await readPack(packBytes);
  const manifest = new TextEncoder().encode(JSON.stringify(valid.manifest));
  const npyHeader = (dict: string, data: Uint8Array) => {
    let h = dict;
    h += ' '.repeat((64 - ((10 + h.length + 1) % 64)) % 64) + '\n';
    const out = new Uint8Array(10 + h.length + data.length);
    out.set([0x93, 0x4e, 0x55, 0x4d, 0x50, 0x59, 1, 0]);
    new DataView(out.buffer).setUint16(8, h.length, true);
    for (let i = 0; i < h.length; i++) out[10 + i] = h.charCodeAt(i);
    out.set(data, 10 + h.length);
    return out;
  };
  const cases: [string, Uint8Array, string, RegExp, number][] = [
    ['dot-dot path', rawZip([{ name: 'manifest.json', data: manifest }, { name: '../../evil.sh', data: new Uint8Array(4) }]), 'hostile', /unsafe path|invalid relative path|absolute path/, 4],
    ['absolute path', rawZip([{ name: '/etc/cron.d/x', data: new Uint8Array(4) }]), 'hostile', /unsafe path|absolute path/, 4],
    ['symlink', rawZip([{ name: 'manifest.json', data: manifest }, { name: 'link', data: new TextEncoder().encode('/etc/passwd'), mode: 0o120777 }]), 'hostile', /symbolic link/, 4],
    ['duplicate names', rawZip([{ name: 'manifest.json', data: manifest }, { name: 'manifest.json', data: manifest }]), 'hostile', /appears twice/, 4],
    ['size that lies', rawZip([{ name: 'manifest.json', data: manifest, claimedSize: 10 }]), 'hostile', /size|bytes/, 4],
    ['zip bomb', rawZip([{ name: 'manifest.json', data: manifest }, { name: 'previews/bomb.png', data: new Uint8Array(80 * 1024 * 1024), deflate: true }]), 'hostile', /claims \d+ bytes, more than|expands \d+×/, 4],
    ['hash mismatch', await variant((f) => { const b = new Uint8Array(f.get('directions/turn.npy')!); b[b.length - 1] ^= 1; f.set('directions/turn.npy', b); }, false), 'hash', /does not match its SHA-256/, 5],
    ['unlisted entry', await variant((f) => f.set('extra.bin', new Uint8Array(3)), false), 'hash', /not in the manifest/, 5],
    ['unknown version', await variant((_f, m) => (m.version = 9)), 'version', /format version 9 is not supported/, 6],
    ['lying .npy header', await variant((f) => f.set('directions/turn.npy', npyHeader("{'descr': '<f4', 'fortran_order': False, 'shape': (512,), }", new Uint8Array(128)))), 'range', /turn\.npy: header says shape \[512\]/, 8],
    ['Fortran order', await variant((f) => f.set('directions/turn.npy', npyHeader("{'descr': '<f4', 'fortran_order': True, 'shape': (32,), }", new Uint8Array(128)))), 'range', /Fortran-ordered/, 8],
    ['wrong dtype', await variant((f) => f.set('directions/turn.npy', npyHeader("{'descr': '<c8', 'fortran_order': False, 'shape': (32,), }", new Uint8Array(256)))), 'range', /unsupported dtype <c8/, 8],
    ['pickled object', await variant((f) => f.set('directions/turn.npy', npyHeader("{'descr': '|O', 'fortran_order': False, 'shape': (1,), }", new Uint8Array(8)))), 'range', /pickled Python objects/, 8],
    ['not a zip', new TextEncoder().encode('this is a text file pretending to be a pack'), 'archive', /not a readable ZIP/, 3],
  ];
  const dir = tempDir();
  for (const [name, bytes, failure, pattern, code] of cases) {
    const file = join(dir, `${name.replace(/\W+/g, '-')}.plpack`);
    writeFileSync(file, bytes);
    const r = cli('verify', '--pack', file);
    assert.equal(r.status, code, `${name}: exit ${r.status}: ${r.stderr}`);
    assert.match(r.stderr, pattern, name);
    assert.match(r.stderr, new RegExp(file.replace(/[.*+?^${}()|[\]\\]/g, '\\$&')), `${name}: names the file`);
    if (failure !== 'range') await assert.rejects(readPack(bytes, name), (e: PackError) => e instanceof PackError && e.failure === failure, name);
  }
  assert.deepEqual(readdirSync(dir).filter((f) => !f.endsWith('.plpack')), [], 'nothing was written beside the packs');
});

test('fuzz: mutated packs and .npy bytes never crash the readers (fast-check)', async () => {
  await fc.assert(
    fc.asyncProperty(fc.array(fc.tuple(fc.nat(packBytes.length - 1), fc.integer({ min: 0, max: 255 })), { minLength: 1, maxLength: 12 }), fc.boolean(), async (edits, truncate) => {
      const b = new Uint8Array(packBytes);
      for (const [at, v] of edits) b[at] = v;
      const input = truncate ? b.subarray(0, edits[0][0]) : b;
      try {
        await readPack(input, 'fuzzed.plpack');
      } catch (e) {
        if (!(e instanceof PackError)) throw e;
      }
    }),
    { numRuns: 150, seed: 42 },
  );
  const valid = new Uint8Array(readFileSync(join(root, 'resources', 'demo', 'sigil-directions.npy')));
  fc.assert(
    fc.property(fc.array(fc.tuple(fc.nat(valid.length - 1), fc.integer({ min: 0, max: 255 })), { minLength: 1, maxLength: 8 }), fc.nat(valid.length), (edits, cut) => {
      const b = new Uint8Array(valid);
      for (const [at, v] of edits) b[at] = v;
      try {
        decodeNpy(b.subarray(0, Math.max(cut, 1)), 'fuzzed.npy');
      } catch (e) {
        if (!(e instanceof PlumblineError)) throw e;
      }
    }),
    { numRuns: 500, seed: 7 },
  );
});
