// The CLI's main path: `plumbline sample` writes PNGs and a manifest that identify the generator.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { readFileSync, readdirSync } from 'node:fs';
import { join } from 'node:path';
import { spawnSync } from 'node:child_process';
import { createHash } from 'node:crypto';
import { decode } from 'fast-png';
import { tempDir } from '../helpers/models.ts';

const root = join(import.meta.dirname, '..', '..');
const cli = join(root, 'app', 'cli', 'bin.js');
const card = join(root, 'resources', 'demo', 'sigil.card.json');

test('sample renders seeds 0-7 to 8 PNGs and a manifest with the fingerprint', () => {
  const out = tempDir();
  const r = spawnSync(process.execPath, [cli, 'sample', '--model', card, '--seeds', '0-7', '--out', out, '--threads', '1'], { encoding: 'utf8' });
  assert.equal(r.status, 0, r.stderr);
  const pngs = readdirSync(out).filter((f) => f.endsWith('.png')).sort();
  assert.equal(pngs.length, 8);
  const manifest = JSON.parse(readFileSync(join(out, 'manifest.json'), 'utf8'));
  assert.match(manifest.generator.fingerprint, /^[0-9a-f]{64}$/);
  assert.deepEqual(manifest.seeds, [0, 1, 2, 3, 4, 5, 6, 7]);
  assert.equal(manifest.truncation.psi, 0.7);
  assert.equal(manifest.modelCard.name, 'Tidebound sigils (demo)');
  for (const entry of manifest.images) {
    const bytes = readFileSync(join(out, entry.file));
    assert.equal(createHash('sha256').update(bytes).digest('hex'), entry.sha256);
    const png = decode(bytes);
    assert.equal(png.width, 128);
    assert.equal(png.height, 128);
  }
  // Same command, same bytes: renders are reproducible.
  const again = tempDir();
  spawnSync(process.execPath, [cli, 'sample', '--model', card, '--seeds', '0-7', '--out', again, '--threads', '1']);
  for (const f of pngs) assert.ok(readFileSync(join(out, f)).equals(readFileSync(join(again, f))), `${f} differs between runs`);
});

test('--help works on every command', () => {
  for (const args of [['--help'], ['sample', '--help'], ['inspect', '--help']]) {
    const r = spawnSync(process.execPath, [cli, ...args], { encoding: 'utf8' });
    assert.equal(r.status, 0, args.join(' '));
    assert.match(r.stdout, /Usage: plumbline/);
  }
  const r = spawnSync(process.execPath, [cli, 'frobnicate'], { encoding: 'utf8' });
  assert.equal(r.status, 2);
  assert.match(r.stderr, /unknown command 'frobnicate'/);
});

test('audit --probes: the range --help states is the range accepted (issue 11: it said [0, 100000] and refused 0)', () => {
  const dirs = join(root, 'resources', 'demo', 'sigil-directions.npy');
  const help = spawnSync(process.execPath, [cli, 'audit', '--help'], { encoding: 'utf8' });
  // Commander wraps help text at the terminal width, wherever the longest option puts the column: read it unwrapped.
  assert.match(help.stdout.replace(/\s+/g, ' '), /random probe latents, 0–100000 \(with the --pin seeds and --pin-latents at least 2 in all; 0 only with either\)/);
  const zero = spawnSync(process.execPath, [cli, 'audit', '--directions', dirs, '--probes', '0'], { encoding: 'utf8' });
  assert.equal(zero.status, 2);
  assert.match(zero.stderr, /--probes 0 with 0 --pin seed\(s\) and 0 --pin-latents file\(s\) makes 0 probe\(s\); an audit needs at least 2 in all \(--probes 0–100000, 0 only with --pin or --pin-latents\)/);
  const negative = spawnSync(process.execPath, [cli, 'audit', '--directions', dirs, '--probes', '-5'], { encoding: 'utf8' });
  assert.equal(negative.status, 2);
  assert.match(negative.stderr, /--probes must be an integer in \[0, 100000\], got '-5'/);
});

test('every ranged option states in --help the range it accepts, and refuses just past it (issue 11)', () => {
  const dirs = join(root, 'resources', 'demo', 'sigil-directions.npy');
  const help = spawnSync(process.execPath, [cli, 'audit', '--help'], { encoding: 'utf8' }).stdout.replace(/\s+/g, ' ');
  const stated = [...help.matchAll(/(--[a-z-]+) <[a-z]+> (?:(?! --[a-z]).)*?\(an? (integer|number) in \[(-?[\d.e]+), (-?[\d.e]+)\]\)/g)].map((m) => ({ option: m[1], hi: Number(m[4]), integer: m[2] === 'integer' }));
  // The limits the tryout found unstated, among the rest.
  for (const o of ['--psi', '--seed', '--reference', '--nulls', '--resamples', '--threads']) assert.ok(stated.some((s) => s.option === o), `${o} states its range in audit --help`);
  for (const s of stated) {
    const past = s.integer ? s.hi + 1 : s.hi * 1.5 + 1;
    const r = spawnSync(process.execPath, [cli, 'audit', '--directions', dirs, s.option, String(past)], { encoding: 'utf8' });
    assert.equal(r.status, 2, `${s.option} ${past}: ${r.stderr}`);
    assert.match(r.stderr, new RegExp(`${s.option} must be an? (integer|number) in`), s.option);
  }
});

