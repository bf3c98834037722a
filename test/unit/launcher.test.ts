// `npm start`'s launcher: with no Electron binary it runs Electron's installer, and falls back to
// the web shell only when the installer fails, saying why. The installer is stubbed by small
// scripts in a scratch project: one that fails the way a machine without internet does, one that
// installs a binary the way electron's install.js does (dist/<exe> plus path.txt naming it).
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { mkdirSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
// @ts-expect-error — a plain JavaScript module without type declarations.
import { chooseShell, findElectron, runInstaller } from '../../app/launch.js';
import { tempDir } from '../helpers/models.ts';

function scratchProject(installerSource: string): string {
  const root = tempDir('plumbline-launch-');
  const pkg = join(root, 'node_modules', 'electron');
  mkdirSync(pkg, { recursive: true });
  writeFileSync(join(pkg, 'install.js'), installerSource);
  return root;
}

test('a failing installer leads to the web shell, with the installer\'s own reason', () => {
  const root = scratchProject("console.error('RequestError: getaddrinfo ENOTFOUND github.com\\n    at stack line'); process.exit(1);\n");
  assert.equal(findElectron(root), null);
  let ran = '';
  const choice = chooseShell(root, (installer: string) => ((ran = installer), runInstaller(installer)));
  assert.equal(ran, join(root, 'node_modules', 'electron', 'install.js'), 'Electron\'s own installer ran');
  assert.equal(choice.shell, 'web');
  assert.equal(choice.reason, 'the installer exited with code 1: RequestError: getaddrinfo ENOTFOUND github.com');
});

test('a working installer leads to Electron; an installed binary skips the installer', () => {
  const root = scratchProject("const fs = require('fs'); fs.mkdirSync('dist', { recursive: true }); fs.writeFileSync('dist/electron', ''); fs.writeFileSync('path.txt', 'electron');\n");
  const first = chooseShell(root);
  assert.deepEqual(first, { shell: 'electron', exe: join(root, 'node_modules', 'electron', 'dist', 'electron'), installed: true });
  const second = chooseShell(root, () => assert.fail('the installer must not run again'));
  assert.equal(second.installed, false);
});

test('a missing installer or a silent no-op installer still says why it fell back', () => {
  const empty = tempDir('plumbline-launch-');
  assert.match(chooseShell(empty).reason, /install\.js is missing/);
  const noop = scratchProject('process.exit(0);\n');
  assert.match(chooseShell(noop).reason, /no Electron binary appeared/);
});
