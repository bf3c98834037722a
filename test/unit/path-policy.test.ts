// The path policy (issue 10): regular files only where files are expected, real paths through
// symlinks, card-relative paths kept inside the card's folder, user-chosen outputs never
// overwriting a file nobody chose, errors that name the file and never quote it, JSON depth caps
// and the clean-up of interrupted atomic writes. Card paths are fuzzed with fast-check and every
// accepted path is checked with Python's os.path (an independent implementation of POSIX path
// resolution) to lie inside the folder.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { existsSync, mkdirSync, readdirSync, realpathSync, symlinkSync, utimesSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { spawnSync } from 'node:child_process';
import fc from 'fast-check';
import { chosenOutputFile, chosenOutputFolder, readRegularFile, resolveInside } from '../../app/core/path-policy.ts';
import { PlumblineError } from '../../app/core/errors.ts';
import { jsonDepth, parseJsonFile } from '../../app/core/json-file.ts';
import { removeStaleTemps, writeFileAtomic, STALE_TEMP_AGE_MS } from '../../app/core/atomic-write.ts';
import { parseDirectionsMeta } from '../../app/core/directions.ts';
import { tempDir } from '../helpers/models.ts';
import { z } from 'zod';

const PYTHON = '/usr/bin/python3';
const code = (fn: () => unknown) => {
  try {
    fn();
  } catch (err) {
    return err instanceof PlumblineError ? err.code : `not a PlumblineError: ${(err as Error).message}`;
  }
  return 'no error';
};

test('folders, FIFOs and devices are refused where a file is expected, without blocking', () => {
  const dir = tempDir();
  assert.equal(code(() => readRegularFile(dir, 'directions array', 1e6)), 'not-a-file');
  assert.match((() => { try { readRegularFile(dir, 'directions array', 1e6); } catch (e) { return (e as Error).message; } return ''; })(), /is a folder, not a file/);
  const fifo = join(dir, 'pipe.npy');
  assert.equal(spawnSync('mkfifo', [fifo]).status, 0, 'mkfifo (coreutils) makes the FIFO');
  const started = Date.now();
  assert.equal(code(() => readRegularFile(fifo, 'directions array', 1e6)), 'not-a-file');
  assert.ok(Date.now() - started < 2000, 'a FIFO with no writer does not block the read');
  assert.equal(code(() => readRegularFile('/dev/zero', 'synthesis model', 1e9)), 'not-a-file');
  assert.equal(code(() => readRegularFile(join(dir, 'absent.onnx'), 'synthesis model', 1e9)), 'file-missing');
  writeFileSync(join(dir, 'big.bin'), new Uint8Array(2000));
  assert.equal(code(() => readRegularFile(join(dir, 'big.bin'), 'model', 1000)), 'limit-exceeded');
  assert.equal(readRegularFile(join(dir, 'big.bin'), 'model', 2000).length, 2000);
});

test('card-relative paths stay inside the card folder, also through symlinks', () => {
  const base = tempDir();
  const card = join(base, 'cards');
  mkdirSync(card);
  writeFileSync(join(base, 'outside.onnx'), 'x');
  symlinkSync(join(base, 'outside.onnx'), join(card, 'link.onnx'));
  mkdirSync(join(card, 'sub'));
  const declared = join(card, 'g.card.json');
  assert.equal(resolveInside(card, 'sub/model.onnx', 'synthesis.file', declared), join(card, 'sub', 'model.onnx'));
  for (const bad of ['/etc/passwd', '../outside.onnx', 'sub/../../outside.onnx', 'link.onnx', 'C:\\\\x.onnx', 'a\0b']) {
    assert.equal(code(() => resolveInside(card, bad, 'synthesis.file', declared)), 'path-refused', bad);
  }
});

test('fuzz: any card path is refused or resolves inside the card folder (checked with Python os.path)', (t) => {
  if (!existsSync(PYTHON)) return t.skip('/usr/bin/python3 is missing');
  const card = tempDir();
  const accepted: string[] = [];
  const segment = fc.oneof(fc.constantFrom('..', '.', '', 'a', 'b.onnx', '...', '..a', 'a..', '~', '%2e%2e'), fc.string({ maxLength: 6 }));
  fc.assert(
    fc.property(fc.array(segment, { minLength: 1, maxLength: 6 }), fc.boolean(), (parts, absolute) => {
      const written = (absolute ? '/' : '') + parts.join('/');
      try {
        accepted.push(written);
        const p = resolveInside(card, written, 'synthesis.file', join(card, 'x.card.json'));
        return p === card || p.startsWith(card + '/');
      } catch (err) {
        accepted.pop();
        return err instanceof PlumblineError && err.code === 'path-refused';
      }
    }),
    { numRuns: 600, seed: 10 },
  );
  assert.ok(accepted.length > 50, 'the fuzz reached accepted paths too');
  const py = spawnSync(PYTHON, ['-c', 'import os,sys,json\nd=sys.argv[1]\nbad=[p for p in json.load(sys.stdin) if not (os.path.normpath(os.path.join(d,p))+"/").startswith(d+"/")]\nprint(json.dumps(bad))', card], { input: JSON.stringify(accepted), encoding: 'utf8' });
  assert.equal(py.status, 0, py.stderr);
  assert.deepEqual(JSON.parse(py.stdout), [], 'Python finds no accepted path outside the folder');
});

test('outputs go only where the user chose; an existing file is replaced only when they say so', () => {
  const dir = tempDir();
  const victim = join(dir, 'notes.txt');
  writeFileSync(victim, 'keep me');
  assert.equal(code(() => chosenOutputFile('relative/pack.plpack', 'the pack')), 'path-refused', 'the engine has no meaningful working folder');
  assert.equal(code(() => chosenOutputFile(victim, 'the pack')), 'would-overwrite');
  assert.equal(chosenOutputFile(victim, 'the pack', { overwrite: true }), victim);
  assert.equal(code(() => chosenOutputFile(dir, 'the pack', { overwrite: true })), 'would-overwrite', 'never a folder');
  assert.equal(code(() => chosenOutputFile(join(dir, 'absent', 'p.plpack'), 'the pack')), 'file-missing');
  assert.equal(chosenOutputFile('p.plpack', 'the pack', { relativeTo: dir }), join(dir, 'p.plpack'), 'the CLI resolves against its working folder');
  assert.equal(code(() => chosenOutputFolder(victim, 'the variant-set folder')), 'not-a-file');
  assert.equal(code(() => chosenOutputFolder('variants', 'the variant-set folder')), 'path-refused');
  // Never into the operating system's folders (Filesystem Hierarchy Standard 3.0), checked before
  // anything is created: the tryout's variant set landed in /etc/plumbline-variants.
  for (const p of ['/etc/plumbline-variants', '/usr/share/plumbline', '/proc/x', '/']) {
    assert.equal(code(() => chosenOutputFolder(p, 'the variant-set folder')), 'path-refused', p);
  }
  assert.equal(existsSync('/etc/plumbline-variants'), false);
  assert.equal(code(() => chosenOutputFile('/etc/emblems.plpack', 'the pack')), 'path-refused');
  assert.match(String((() => { try { chosenOutputFolder('/etc/plumbline-variants', 'the variant-set folder'); } catch (e) { return (e as Error).message; } })()), /^\/etc\/plumbline-variants is inside the system folder \/etc: the variant-set folder is not written/);
  // Inside the temporary folder (and the home folder) outputs stay allowed.
  assert.equal(chosenOutputFolder(join(dir, 'renders'), 'the variant-set folder'), realpathSync(join(dir, 'renders')));
});

test('errors name the file and never quote its content', async () => {
  const dir = tempDir();
  const secret = join(dir, 'secret.card.json');
  writeFileSync(secret, 'root:x:0:0:SECRET-CONTENT:/root:/bin/bash\n');
  let message = '';
  try {
    parseJsonFile(z.object({}), 'root:x:0:0:SECRET-CONTENT', secret, 'card');
  } catch (err) {
    message = (err as Error).message;
  }
  assert.match(message, /secret\.card\.json: not valid JSON/);
  assert.doesNotMatch(message, /SECRET|root:x/);
  const { decodeModel } = await import('../../app/core/onnx/inspect.ts');
  try {
    decodeModel(new TextEncoder().encode('root:x:0:0:SECRET-CONTENT'), '/etc/passwd');
  } catch (err) {
    message = (err as Error).message;
  }
  assert.match(message, /\/etc\/passwd: not an ONNX model/);
  assert.doesNotMatch(message, /72 6f 6f 74|SECRET|root:/, 'no bytes of the file, in hex or otherwise');
});

test('a 200,000-deep source object is a clear error, counted without recursion', () => {
  const deep = '{"a":'.repeat(200_000) + '1' + '}'.repeat(200_000);
  assert.equal(jsonDepth(deep), 200_000);
  assert.equal(jsonDepth('{"s":"{{{{[[[["}'), 1, 'brackets inside strings do not count');
  assert.equal(jsonDepth('{"s":"\\"{{"}'), 1, 'escaped quotes do not end the string');
  const sidecar = `{"format":"plumbline.directions","version":1,"directions":[{"name":"deep","source":${deep}}]}`;
  let message = '';
  try {
    parseDirectionsMeta(sidecar, '/p/deep.json');
  } catch (err) {
    assert.equal((err as PlumblineError).code, 'limit-exceeded');
    message = (err as Error).message;
  }
  assert.match(message, /\/p\/deep\.json: JSON nested 200003 levels deep, more than the 64 allowed/);
});

test('temporary files of interrupted atomic writes are removed once stale; fresh ones and other files stay', () => {
  const dir = tempDir();
  writeFileAtomic(join(dir, 'project.json'), '{}');
  const stale = join(dir, '.project.json.0123456789ab.tmp');
  const fresh = join(dir, '.audit.json.ba9876543210.tmp');
  const other = join(dir, '.notes.tmp');
  for (const f of [stale, fresh, other]) writeFileSync(f, 'partial');
  const old = (Date.now() - STALE_TEMP_AGE_MS - 60_000) / 1000;
  utimesSync(stale, old, old);
  utimesSync(other, old, old);
  assert.deepEqual(removeStaleTemps(dir), ['.project.json.0123456789ab.tmp']);
  assert.deepEqual(readdirSync(dir).sort(), ['.audit.json.ba9876543210.tmp', '.notes.tmp', 'project.json']);
});
