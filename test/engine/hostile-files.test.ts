// Hostile files (issue 10), each finding reproduced through the engine's own protocol or the CLI:
// direction names that walk out of the project, a model card that points outside its folder,
// names with '..' inside, names that differ only in case, a project with a bad entry on disk,
// a 200,000-deep sidecar, FIFOs and folders where files belong, errors that echo file content,
// and temp files of interrupted writes. Each test failed before the path policy existed.
import { test, before } from 'node:test';
import assert from 'node:assert/strict';
import { existsSync, mkdirSync, readFileSync, readdirSync, statSync, symlinkSync, utimesSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { spawnSync } from 'node:child_process';
import { EngineHost } from '../../app/engine/host.ts';
import { callHost } from '../helpers/host.ts';
import { encodeNpy } from '../../app/core/npy.ts';
import { STALE_TEMP_AGE_MS } from '../../app/core/atomic-write.ts';
import { cardGenerator, tempDir } from '../helpers/models.ts';

const root = join(import.meta.dirname, '..', '..');
const cli = (...args: string[]) => spawnSync(process.execPath, [join(root, 'app', 'cli', 'bin.js'), ...args], { encoding: 'utf8', timeout: 60_000 });

const call = callHost;

/** A direction set for the 4-d test generator: .npy plus a sidecar naming its directions. */
function directionFiles(dir: string, base: string, names: string[], source: string = '{"method":"hand"}'): string {
  const data = new Float32Array(names.length * 4);
  names.forEach((_, k) => (data[k * 4 + (k % 4)] = 1));
  writeFileSync(join(dir, `${base}.npy`), encodeNpy(data, [names.length, 4]));
  writeFileSync(join(dir, `${base}.json`), `{"format":"plumbline.directions","version":1,"file":"${base}.npy","directions":[${names.map((n) => `{"name":${JSON.stringify(n)},"source":${source}}`).join(',')}]}`);
  return join(dir, `${base}.npy`);
}

/** Every file below `dir`, relative to it. */
const tree = (dir: string): string[] => readdirSync(dir).flatMap((n) => (statSync(join(dir, n)).isDirectory() ? tree(join(dir, n)).map((x) => `${n}/${x}`) : [n]));

let card: string;
before(() => {
  card = cardGenerator(join(tempDir(), '.'), 4).card;
});

async function hostWithProject(projectDir: string) {
  const host = new EngineHost({ threads: 1 });
  await call(host, 'model.open', { path: card });
  await call(host, 'project.open', { path: projectDir, create: true });
  return host;
}

test('direction names that walk out of the project are refused; nothing is written outside; the project reopens', async () => {
  const sandbox = tempDir();
  const projectDir = join(sandbox, 'a', 'b', 'project');
  mkdirSync(join(sandbox, 'a', 'b'), { recursive: true });
  writeFileSync(join(sandbox, 'a', 'victimcfg.json'), '{"mine":true}');
  const host = await hostWithProject(projectDir);
  const incoming = join(sandbox, 'incoming');
  mkdirSync(incoming);
  for (const name of ['../../../../tmp/x/ESCAPED', '../../victimcfg', '..', '.', 'a/b']) {
    const file = directionFiles(incoming, `set${name.length}`, [name]);
    await assert.rejects(call(host, 'directions.open', { path: file }), (e: any) => e.code === 'directions-invalid' && /direction name/.test(e.message), name);
  }
  assert.equal(readFileSync(join(sandbox, 'a', 'victimcfg.json'), 'utf8'), '{"mine":true}', 'the unrelated file is untouched');
  assert.deepEqual(tree(sandbox).filter((f) => !f.startsWith('a/b/project/') && !f.startsWith('incoming/')), ['a/victimcfg.json']);
  assert.equal(existsSync('/tmp/x/ESCAPED.npy'), false);
  await host.dispose();
  const again = new EngineHost({ threads: 1 });
  await call(again, 'model.open', { path: card });
  const reopened = await call(again, 'project.open', { path: projectDir, create: false });
  assert.equal(reopened.path, projectDir);
  const fresh = await call(again, 'project.open', { path: join(sandbox, 'fresh'), create: true });
  assert.equal(fresh.path, join(sandbox, 'fresh'), 'a project created afterwards opens too');
  await again.dispose();
});

test("names with '..' inside are one rule everywhere: 'crest..v2' is kept, renamed and reopened", async () => {
  const projectDir = join(tempDir(), 'project');
  const host = await hostWithProject(projectDir);
  const opened = await call(host, 'directions.open', { path: directionFiles(tempDir(), 'set', ['crest..v2', 'glow']) });
  assert.deepEqual(opened.directions.map((d: any) => d.name), ['crest..v2', 'glow']);
  const glow = opened.directions.find((d: any) => d.name === 'glow');
  const renamed = await call(host, 'directions.keep', { id: glow.id, name: 'glow..v3' });
  assert.equal(renamed.name, 'glow..v3');
  await assert.rejects(call(host, 'directions.keep', { id: glow.id, name: '..' }), /direction name '\.\.'/);
  await host.dispose();
  const again = new EngineHost({ threads: 1 });
  await call(again, 'model.open', { path: card });
  const reopened = await call(again, 'project.open', { path: projectDir, create: false });
  assert.deepEqual(reopened.directions.map((d: any) => d.name).sort(), ['crest..v2', 'glow', 'glow..v3']);
  await again.dispose();
});

test('names that differ only in case are one file on macOS and Windows: refused', async () => {
  const projectDir = join(tempDir(), 'project');
  const host = await hostWithProject(projectDir);
  await assert.rejects(call(host, 'directions.open', { path: directionFiles(tempDir(), 'set', ['Crest', 'crest']) }), /two directions are named 'crest' \(names are compared ignoring case\)/);
  const opened = await call(host, 'directions.open', { path: directionFiles(tempDir(), 'one', ['crest']) });
  const other = await call(host, 'directions.open', { path: directionFiles(tempDir(), 'two', ['glow']) });
  await assert.rejects(call(host, 'directions.keep', { id: other.directions[0].id, name: 'CREST' }), /differs only in case|already named/);
  assert.equal(opened.directions[0].name, 'crest');
  await host.dispose();
});

test('a project with a bad entry on disk still opens: the entry is refused, the rest loads', async () => {
  const projectDir = join(tempDir(), 'project');
  const host = await hostWithProject(projectDir);
  await call(host, 'directions.open', { path: directionFiles(tempDir(), 'set', ['crest', 'glow']) });
  await host.dispose();
  const doc = JSON.parse(readFileSync(join(projectDir, 'project.json'), 'utf8'));
  doc.directions.push({ name: '../../../../tmp/x/ESCAPED', file: 'directions/../../../../tmp/x/ESCAPED.npy' }, { name: 'elsewhere', file: '/etc/passwd' });
  writeFileSync(join(projectDir, 'project.json'), JSON.stringify(doc));
  const again = new EngineHost({ threads: 1 });
  await call(again, 'model.open', { path: card });
  const reopened = await call(again, 'project.open', { path: projectDir, create: false });
  assert.deepEqual(reopened.directions.map((d: any) => d.name).sort(), ['crest', 'glow']);
  await again.dispose();
});

test('a model card whose paths lead outside its folder is refused, also through a symlink', async () => {
  const sandbox = tempDir();
  const folder = join(sandbox, 'card');
  mkdirSync(folder);
  const base = JSON.parse(readFileSync(card, 'utf8'));
  writeFileSync(join(sandbox, 'outside.onnx'), readFileSync(join(card, '..', 'linear.onnx')));
  symlinkSync(join(sandbox, 'outside.onnx'), join(folder, 'link.onnx'));
  const host = new EngineHost({ threads: 1 });
  const cases: [string, object][] = [
    ['/etc/passwd', { ...base, synthesis: { ...base.synthesis, file: '/etc/passwd' } }],
    ['../outside.onnx', { ...base, synthesis: { ...base.synthesis, file: '../outside.onnx' } }],
    ['link.onnx', { ...base, synthesis: { ...base.synthesis, file: 'link.onnx' } }],
    ['directions', { ...base, synthesis: { ...base.synthesis, file: 'link.onnx' }, directions: '../../victim/hostile.npy' }],
  ];
  for (const [label, c] of cases) {
    const f = join(folder, `${label.replace(/\W/g, '_')}.card.json`);
    writeFileSync(f, JSON.stringify(c));
    await assert.rejects(call(host, 'model.open', { path: f }), (e: any) => e.code === 'path-refused' && e.message.startsWith(f) && /leads outside|absolute path/.test(e.message), label);
  }
  await host.dispose();
});

test('opening a private file by mistake names it and never echoes its bytes', async () => {
  const host = new EngineHost({ threads: 1 });
  const secret = join(tempDir(), 'private.onnx');
  writeFileSync(secret, 'root:x:0:0:SECRET:/root:/bin/bash\n');
  await assert.rejects(call(host, 'model.open', { path: secret }), (e: any) => e.code === 'not-onnx' && e.message.startsWith(secret) && !/SECRET|root|72 6f 6f 74/.test(e.message));
  await host.dispose();
});

test('a 200,000-deep source object is a clear error and leaves nothing half-loaded', async () => {
  const projectDir = join(tempDir(), 'project');
  const host = await hostWithProject(projectDir);
  await call(host, 'directions.open', { path: directionFiles(tempDir(), 'good', ['crest']) });
  const deep = '{"a":'.repeat(200_000) + '1' + '}'.repeat(200_000);
  const file = directionFiles(tempDir(), 'deep', ['deep'], deep);
  await assert.rejects(call(host, 'directions.open', { path: file }), (e: any) => e.code === 'limit-exceeded' && /deep\.json: JSON nested \d+ levels deep/.test(e.message));
  const list = await call(host, 'directions.list', {});
  assert.deepEqual(list.directions.map((d: any) => d.name), ['crest']);
  const preview = await call(host, 'preview.render', { seed: 1, psi: 0.7, edits: [{ direction: 'crest', strength: 1 }] });
  assert.equal(preview.superseded, false, 'later calls still work');
  await host.dispose();
  const again = new EngineHost({ threads: 1 });
  await call(again, 'model.open', { path: card });
  assert.deepEqual((await call(again, 'project.open', { path: projectDir, create: false })).directions.map((d: any) => d.name), ['crest']);
  await again.dispose();
});

test('a FIFO or a folder as directions is refused at once with a clear message, no stack trace', async () => {
  const dir = tempDir();
  const fifo = join(dir, 'pipe.npy');
  assert.equal(spawnSync('mkfifo', [fifo]).status, 0);
  const host = new EngineHost({ threads: 1 });
  await call(host, 'model.open', { path: card });
  await assert.rejects(call(host, 'directions.open', { path: fifo }), (e: any) => e.code === 'not-a-file' && /named pipe/.test(e.message));
  await assert.rejects(call(host, 'directions.open', { path: dir }), (e: any) => e.code === 'not-a-file' && /is a folder/.test(e.message));
  await host.dispose();
  for (const target of [dir, fifo]) {
    const started = Date.now();
    const r = cli('audit', '--model', card, '--directions', target, '--probes', '4');
    assert.equal(r.status, 2, r.stderr);
    assert.match(r.stderr, /^plumbline: error: .*(is a folder|named pipe)/m);
    assert.doesNotMatch(r.stderr, /^\s+at /m, 'no stack trace');
    assert.ok(Date.now() - started < 30_000);
  }
});

test('temp files left by interrupted writes are removed when the project opens', async () => {
  const projectDir = join(tempDir(), 'project');
  (await hostWithProject(projectDir)).dispose();
  const stale = [join(projectDir, '.project.json.0a1b2c3d4e5f.tmp'), join(projectDir, 'directions', '.crest.npy.00112233aabb.tmp')];
  const fresh = join(projectDir, 'audits', '.audit.json.ffeeddccbbaa.tmp');
  for (const f of [...stale, fresh]) writeFileSync(f, 'partial write');
  const old = (Date.now() - STALE_TEMP_AGE_MS - 60_000) / 1000;
  for (const f of stale) utimesSync(f, old, old);
  const host = new EngineHost({ threads: 1 });
  await call(host, 'model.open', { path: card });
  await call(host, 'project.open', { path: projectDir, create: false });
  for (const f of stale) assert.equal(existsSync(f), false, f);
  assert.equal(existsSync(fresh), true, 'a write that may still be running is left alone');
  await host.dispose();
});

test('engine outputs go only where the user chose: relative paths refused, an unrelated file never replaced unasked', async () => {
  const sandbox = tempDir();
  const projectDir = join(sandbox, 'project');
  const host = await hostWithProject(projectDir);
  await call(host, 'directions.open', { path: directionFiles(tempDir(), 'set', ['crest']) });
  const notes = join(sandbox, 'notes.txt');
  writeFileSync(notes, 'my notes');
  await assert.rejects(call(host, 'pack.build', { out: notes, overwrite: false }), (e: any) => e.code === 'would-overwrite' && e.message.startsWith(notes));
  assert.equal(readFileSync(notes, 'utf8'), 'my notes');
  await assert.rejects(call(host, 'pack.build', { out: 'relative.plpack', overwrite: false }), (e: any) => e.code === 'path-refused');
  await assert.rejects(call(host, 'variants.render', { name: 'v', seeds: [1], psi: 0.7, settings: [{ label: 'base', strengths: {} }], out: 'relative-folder' }), (e: any) => e.code === 'path-refused');
  await assert.rejects(call(host, 'model.open', { path: 'relative.card.json' }), (e: any) => e.code === 'path-refused');
  await assert.rejects(call(host, 'directions.open', { path: 'relative.npy' }), (e: any) => e.code === 'path-refused');
  await assert.rejects(call(host, 'project.open', { path: 'relative-project', create: true }), (e: any) => e.code === 'path-refused');
  assert.equal(existsSync(join(process.cwd(), 'relative-project')), false, 'nothing created in the engine\'s working folder');
  await host.dispose();
});

test('a project reports the entries it refused on open', async () => {
  const projectDir = join(tempDir(), 'project');
  (await hostWithProject(projectDir)).dispose();
  const doc = JSON.parse(readFileSync(join(projectDir, 'project.json'), 'utf8'));
  doc.directions.push({ name: '../../victimcfg', file: 'directions/../../victimcfg.npy' });
  writeFileSync(join(projectDir, 'project.json'), JSON.stringify(doc));
  const host = new EngineHost({ threads: 1 });
  await call(host, 'model.open', { path: card });
  const opened = await call(host, 'project.open', { path: projectDir, create: false });
  assert.equal(opened.refused.length, 1);
  assert.match(opened.refused[0], /refused direction '\.\.\/\.\.\/victimcfg': the name may use only/);
  await host.dispose();
});
