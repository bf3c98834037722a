// Packs carry proof, not claims (issue 10). A pack whose σ was multiplied by 1000 and whose safe
// range was widened to ±20, with every hash recomputed, used to pass `verify` and let
// `apply --set crest_size=20` run without --force. Now verify recomputes σ on the generator and
// the safe range from the audit curves the pack carries, and optional Ed25519 signatures tell a
// studio's own packs from edited ones. The signature is checked with OpenSSL (an independent
// Ed25519 implementation, RFC 8032); the report's markup is checked with Python's html.parser.
import { test, before } from 'node:test';
import assert from 'node:assert/strict';
import { existsSync, readFileSync, readdirSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { spawnSync } from 'node:child_process';
import { generateKeyPairSync } from 'node:crypto';
import { EngineHost } from '../../app/engine/host.ts';
import { callHost } from '../helpers/host.ts';
import { readPack, writePack, type PackManifest } from '../../app/core/pack.ts';
import { tempDir } from '../helpers/models.ts';

const root = join(import.meta.dirname, '..', '..');
const cli = (...args: string[]) => spawnSync(process.execPath, [join(root, 'app', 'cli', 'bin.js'), ...args], { encoding: 'utf8' });
const HOSTILE_REVIEWER = '"><img src=x onerror=alert(1)>';
const HOSTILE_NOTE = '</p><script>alert(1)</script><p>';
let dir: string;
let project: string;
let packFile: string;
let signedFile: string;
const keys = { private: '', public: '', otherPublic: '' };

const call = callHost;

before(async () => {
  dir = tempDir();
  project = join(dir, 'tidebound');
  const host = new EngineHost({ threads: 1 });
  await call(host, 'model.openDemo', {});
  await call(host, 'directions.open', { path: join(root, 'resources', 'demo', 'sigil-directions.npy') });
  const opened = await call(host, 'project.open', { path: project, create: true });
  const ids = opened.directions.filter((d: any) => ['crest_size', 'turn'].includes(d.name)).map((d: any) => d.id);
  await call(host, 'audit.run', { directions: ids, probes: 32, pinnedSeeds: [], psi: 0.7, seed: 1, referenceStrength: 2, leakPass: 0.15, leakFail: 0.35, nullDirections: 8, combinations: 'none' });
  for (const d of opened.directions.filter((x: any) => ['crest_size', 'turn'].includes(x.name))) await call(host, 'project.review', { direction: d.id, status: 'approved', reviewer: HOSTILE_REVIEWER, note: HOSTILE_NOTE });
  await host.dispose();
  const pair = generateKeyPairSync('ed25519');
  keys.private = join(dir, 'studio.key');
  keys.public = join(dir, 'studio.pub');
  keys.otherPublic = join(dir, 'other.pub');
  writeFileSync(keys.private, pair.privateKey.export({ type: 'pkcs8', format: 'pem' }));
  writeFileSync(keys.public, pair.publicKey.export({ type: 'spki', format: 'pem' }));
  writeFileSync(keys.otherPublic, generateKeyPairSync('ed25519').publicKey.export({ type: 'spki', format: 'pem' }));
  packFile = join(dir, 'tidebound.plpack');
  signedFile = join(dir, 'tidebound-signed.plpack');
  const r = cli('pack', '--project', project, '--out', packFile);
  assert.equal(r.status, 0, r.stderr);
  const s = cli('pack', '--project', project, '--out', signedFile, '--sign', keys.private);
  assert.equal(s.status, 0, s.stderr);
  assert.match(s.stdout, /signed by key [0-9a-f]{16}/);
});

/** Rewrites a pack with an edited manifest; every entry hash is recomputed, as a forger would. */
async function forge(from: string, to: string, edit: (m: PackManifest) => void): Promise<string> {
  const p = await readPack(new Uint8Array(readFileSync(from)));
  const m = structuredClone(p.manifest);
  edit(m);
  const { entries: _entries, ...rest } = m;
  const files = [...p.files].filter(([name]) => name !== 'manifest.json' && name !== 'manifest.sig').map(([path, bytes]) => ({ path, bytes }));
  writeFileSync(to, await writePack(files, rest));
  return to;
}

test('a genuine pack verifies; σ and the safe range are recomputed, not taken on trust', () => {
  const ok = cli('verify', '--pack', packFile);
  assert.equal(ok.status, 0, ok.stderr);
  assert.match(ok.stdout, /σ and safe ranges recomputed, unsigned/);
});

test('σ ×1000 and a ±20 safe range with recomputed hashes fail verify; apply --set crest_size=20 is refused', async () => {
  const forged = await forge(packFile, join(dir, 'forged.plpack'), (m) => {
    for (const d of m.directions) {
      d.sigma *= 1000;
      d.safeRange = [-20, 20];
    }
  });
  const v = cli('verify', '--pack', forged);
  assert.equal(v.status, 8, v.stderr);
  assert.match(v.stderr, /invalid direction in pack: .*claims σ = [\d.]+, but on this generator its σ is/);
  const out = join(dir, 'applied');
  const a = cli('apply', '--pack', forged, '--seeds', '0', '--set', 'crest_size=20', '--out', out);
  assert.equal(a.status, 8);
  assert.equal(existsSync(out) && readdirSync(out).length > 0, false, 'nothing rendered');
});

test('a widened safe range alone disagrees with the pack\'s own audit curves', async () => {
  const forged = await forge(packFile, join(dir, 'wide.plpack'), (m) => {
    m.directions.find((d) => d.name === 'crest_size')!.safeRange = [-20, 20];
  });
  const v = cli('verify', '--pack', forged);
  assert.equal(v.status, 8);
  assert.match(v.stderr, /'crest_size' claims the safe range \[-20, 20\] σ, but its audit curves give \[-3, 3\] σ/);
  const a = cli('apply', '--pack', forged, '--seeds', '0', '--set', 'crest_size=20', '--out', join(dir, 'applied2'));
  assert.equal(a.status, 8);
});

test('signed packs: trusted key passes, another key or no signature fails, any edit breaks the signature', async () => {
  const ok = cli('verify', '--pack', signedFile, '--trust', keys.public);
  assert.equal(ok.status, 0, ok.stderr);
  assert.match(ok.stdout, /signed by trusted key [0-9a-f]{16}/);
  const other = cli('verify', '--pack', signedFile, '--trust', keys.otherPublic);
  assert.equal(other.status, 10);
  assert.match(other.stderr, /signature check failed: .*not among the trusted keys/);
  const unsigned = cli('verify', '--pack', packFile, '--trust', keys.public);
  assert.equal(unsigned.status, 10);
  assert.match(unsigned.stderr, /unsigned, but a trusted key was required/);
  // A forger who edits the curves too can make an unsigned pack agree with itself; the signature cannot follow.
  const p = await readPack(new Uint8Array(readFileSync(signedFile)));
  const manifest = JSON.parse(new TextDecoder().decode(p.files.get('manifest.json')!));
  manifest.directions[0].evidence.leakageCurve = manifest.directions[0].evidence.leakageCurve.map((l: number | null) => (l === null ? null : 0));
  const { rawZip } = await import('../helpers/zip.ts');
  const edited = join(dir, 'edited-signed.plpack');
  writeFileSync(edited, rawZip([{ name: 'manifest.json', data: new TextEncoder().encode(JSON.stringify(manifest, null, 2) + '\n') }, ...[...p.files].filter(([n]) => n !== 'manifest.json').map(([name, data]) => ({ name, data }))]));
  const broken = cli('verify', '--pack', edited);
  assert.equal(broken.status, 10, broken.stderr);
  assert.match(broken.stderr, /its signature does not match manifest\.json \(edited after signing\)/);
});

test('OpenSSL verifies the Ed25519 signature over manifest.json', async (t) => {
  if (spawnSync('openssl', ['version']).status !== 0) return t.skip('openssl is missing');
  const p = await readPack(new Uint8Array(readFileSync(signedFile)));
  const sig = JSON.parse(new TextDecoder().decode(p.files.get('manifest.sig')!));
  writeFileSync(join(dir, 'manifest.json'), p.files.get('manifest.json')!);
  writeFileSync(join(dir, 'manifest.sig.bin'), Buffer.from(sig.signature, 'base64'));
  const r = spawnSync('openssl', ['pkeyutl', '-verify', '-pubin', '-inkey', keys.public, '-rawin', '-in', join(dir, 'manifest.json'), '-sigfile', join(dir, 'manifest.sig.bin')], { encoding: 'utf8' });
  assert.equal(r.status, 0, r.stderr + r.stdout);
  assert.match(r.stdout, /Signature Verified Successfully/);
});

test('a pack direction named ".." is refused when the pack is read', async () => {
  const forged = await forge(packFile, join(dir, 'dotdot.plpack'), (m) => {
    m.directions[0].name = '..';
  });
  const v = cli('verify', '--pack', forged);
  assert.equal(v.status, 3);
  assert.match(v.stderr, /direction name '\.\.' may use only/);
});

test("the report escapes every value it shows and keeps a strict CSP (checked with Python's html.parser)", async (t) => {
  const p = await readPack(new Uint8Array(readFileSync(packFile)));
  const html = new TextDecoder().decode(p.files.get('report.html')!);
  assert.match(html, /<meta http-equiv="Content-Security-Policy" content="default-src 'none'; img-src data:; style-src 'unsafe-inline'">/);
  assert.ok(html.includes('&quot;&gt;&lt;img src=x onerror=alert(1)&gt;'), 'the reviewer name is shown as text');
  if (!existsSync('/usr/bin/python3')) return t.skip('/usr/bin/python3 is missing');
  const py = spawnSync('/usr/bin/python3', ['-c', [
    'import sys, json, html.parser',
    'tags=set(); attrs=set()',
    'class P(html.parser.HTMLParser):',
    '  def handle_starttag(self, tag, a):',
    '    tags.add(tag); [attrs.add(k) for k, _ in a]',
    'P().feed(sys.stdin.read())',
    'print(json.dumps({"tags": sorted(tags), "attrs": sorted(attrs)}))',
  ].join('\n')], { input: html, encoding: 'utf8' });
  assert.equal(py.status, 0, py.stderr);
  const found = JSON.parse(py.stdout);
  assert.ok(!found.tags.includes('script'), 'no script element');
  assert.ok(!found.attrs.some((a: string) => a.startsWith('on')), `no event-handler attributes: ${found.attrs}`);
  assert.equal(found.tags.filter((x: string) => x === 'img').length, 1, 'the only img tags are the previews');
});
