// The version lives in app/protocol/version.ts; package.json (read by npm and electron-builder)
// must carry the same number, and every stamp derives from it. Semantic Versioning 2.0.0 §2
// (semver.org): MAJOR.MINOR.PATCH, non-negative integers without leading zeros.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { readFileSync, readdirSync, statSync } from 'node:fs';
import { join } from 'node:path';
import { ENGINE_NAME, PLUMBLINE_VERSION, TOOL_STAMP } from '../../app/protocol/version.ts';

const root = join(import.meta.dirname, '..', '..');

test('one version: package.json agrees with app/protocol/version.ts, and the stamps derive from it', () => {
  assert.match(PLUMBLINE_VERSION, /^(0|[1-9]\d*)\.(0|[1-9]\d*)\.(0|[1-9]\d*)$/);
  assert.equal(JSON.parse(readFileSync(join(root, 'package.json'), 'utf8')).version, PLUMBLINE_VERSION);
  assert.equal(TOOL_STAMP, `plumbline ${PLUMBLINE_VERSION}`);
  assert.equal(ENGINE_NAME, `plumbline-engine/${PLUMBLINE_VERSION}`);
});

test('no other file in app/ spells the version out as a string', () => {
  const hits = (readFileSync(join(root, 'app', 'protocol', 'version.ts'), 'utf8').match(new RegExp(PLUMBLINE_VERSION.replace(/\./g, '\\.'), 'g')) ?? []).length;
  assert.equal(hits, 1);
  const grep = (dir: string): string[] => {
    return readdirSync(dir).flatMap((n) => {
      const p = join(dir, n);
      if (statSync(p).isDirectory()) return grep(p);
      return /\.(ts|js)$/.test(n) && !p.endsWith(join('protocol', 'version.ts')) && readFileSync(p, 'utf8').includes(`'${PLUMBLINE_VERSION}'`) ? [p] : [];
    });
  };
  assert.deepEqual(grep(join(root, 'app')), []);
});
