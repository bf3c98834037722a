// Direction names (issue 10): one rule everywhere, judged on path segments, not substrings; names
// that differ only in case are one file on macOS and Windows. Fuzzed with fast-check: whatever
// name a project is asked to save, nothing is written outside the project's directions/ folder.
// Outside references: POSIX path resolution as Python's os.path implements it; Microsoft's
// "Naming Files, Paths, and Namespaces" (reserved device names, trailing dots dropped).
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { existsSync, mkdirSync, readdirSync, statSync } from 'node:fs';
import { join, relative } from 'node:path';
import { spawnSync } from 'node:child_process';
import fc from 'fast-check';
import { directionNameKey, directionNameProblem, isDirectionName, toDirectionName } from '../../app/protocol/names.ts';
import { Project } from '../../app/engine/project.ts';
import { PlumblineError } from '../../app/core/errors.ts';
import { tempDir } from '../helpers/models.ts';

const PYTHON = '/usr/bin/python3';

test('names are one path segment: dots inside are fine, dot segments and separators are not', () => {
  for (const ok of ['crest_size', 'crest..v2', 'a', 'v1.2-final', 'x'.repeat(120), '_hidden_not', 'a.b.c']) assert.equal(directionNameProblem(ok), null, ok);
  for (const bad of ['', '.', '..', '...', '.hidden', 'crest.', 'a/b', 'a\\b', '../../../../tmp/x/ESCAPED', '../../victimcfg', 'x'.repeat(121), 'CON', 'nul.txt', 'com1', 'tab\tname', 'space name', 'é']) {
    assert.notEqual(directionNameProblem(bad), null, JSON.stringify(bad));
  }
  assert.equal(directionNameKey('Crest'), directionNameKey('crest'));
});

test('names derived from file names are made safe', () => {
  for (const raw of ['my directions', '../x', '..', '.', 'CON', '', 'a'.repeat(300), '...a...']) assert.ok(isDirectionName(toDirectionName(raw)), `${JSON.stringify(raw)} → ${toDirectionName(raw)}`);
});

test('fuzz: accepted names resolve to one file directly inside directions/ (checked with Python os.path)', (t) => {
  if (!existsSync(PYTHON)) return t.skip('/usr/bin/python3 is missing');
  const accepted = new Set<string>();
  const alphabet = fc.constantFrom(...'aaZZ0099__--..../\\ ~:%\u0000\u00e9'.split(''), '..', 'CON');
  fc.assert(fc.property(fc.array(alphabet, { minLength: 0, maxLength: 12 }).map((a) => a.join('')), (name) => {
    if (isDirectionName(name)) accepted.add(name);
    return true;
  }), { numRuns: 3000, seed: 10 });
  assert.ok(accepted.size > 30, `only ${accepted.size} accepted names`);
  const py = spawnSync(PYTHON, ['-c', 'import os,sys,json\nd="/p/directions"\nbad=[n for n in json.load(sys.stdin) if os.path.dirname(os.path.normpath(os.path.join(d,n+".npy")))!=d or os.path.basename(os.path.normpath(os.path.join(d,n+".npy")))!=n+".npy"]\nprint(json.dumps(bad))'], { input: JSON.stringify([...accepted]), encoding: 'utf8' });
  assert.equal(py.status, 0, py.stderr);
  assert.deepEqual(JSON.parse(py.stdout), []);
});

/** Every file below `dir`, relative to it. */
function tree(dir: string): string[] {
  return readdirSync(dir).flatMap((n) => (statSync(join(dir, n)).isDirectory() ? tree(join(dir, n)).map((x) => `${n}/${x}`) : [n]));
}

test('fuzz: saving directions under any name writes nothing outside the project', () => {
  const sandbox = tempDir();
  const projectDir = join(sandbox, 'inner', 'project');
  mkdirSync(join(sandbox, 'inner'), { recursive: true });
  const project = Project.open(projectDir, true, { name: 'g', fingerprint: 'f'.repeat(64) });
  const segment = fc.oneof(fc.constantFrom('..', '.', '', 'victim', 'ESCAPED', 'crest..v2', 'Crest', 'crest', '.hidden'), fc.string({ maxLength: 5 }));
  let saved = 0;
  fc.assert(fc.property(fc.array(segment, { minLength: 1, maxLength: 5 }).map((p) => p.join('/')), (name) => {
    try {
      project.saveDirection({ name, target: null, layers: null, vector: new Float32Array([1, 0]), notes: '', source: { method: 'fuzz' } }, 'z');
      saved++;
      return isDirectionName(name);
    } catch (err) {
      return err instanceof PlumblineError && !isDirectionName(name) ? true : err instanceof PlumblineError && err.code === 'directions-invalid';
    }
  }), { numRuns: 400, seed: 11 });
  assert.ok(saved > 5, 'some names were saved');
  const outside = tree(sandbox).filter((f) => !f.startsWith('inner/project/'));
  assert.deepEqual(outside, [], 'nothing outside the project');
  const files = tree(projectDir).filter((f) => f !== 'project.json' && !f.startsWith('audits') && !f.startsWith('renders'));
  for (const f of files) assert.match(f, /^directions\/[^/]+\.(npy|json)$/, f);
  const keys = project.doc.directions.map((d) => directionNameKey(d.name));
  assert.equal(new Set(keys).size, keys.length, 'no two entries differ only in case');
  const reopened = Project.open(projectDir, false, { name: 'g', fingerprint: 'f'.repeat(64) });
  assert.deepEqual(reopened.refused, [], 'the project reopens with every saved entry');
  assert.equal(relative(projectDir, reopened.dir), '');
});
