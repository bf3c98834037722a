// Resource caps (issue 10): tiny hostile models built here — a latent of 100,000 and of 10⁹
// values, a 400-byte graph that expands to 8000×8000 images, a card whose synthesis file is
// /dev/zero — are each refused within seconds and under 500 MB, with an error naming the file and
// the cap. Peak memory is measured from outside the process by GNU time (%M, maximum resident set
// size in KiB), not by the code under test.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { existsSync, readFileSync, symlinkSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { spawnSync } from 'node:child_process';
import { GraphBuilder } from '../../app/core/onnx/graph-builder.ts';
import { cardGenerator, tempDir } from '../helpers/models.ts';

const root = join(import.meta.dirname, '..', '..');
const TIME = '/usr/bin/time';
/** The budget for refusing a hostile model. */
const MAX_RSS_MB = 500;
const MAX_SECONDS = 20;

/** Runs `plumbline <args>` under GNU time; returns exit status, stderr, seconds and peak RSS in MB. */
function measured(...args: string[]) {
  const started = Date.now();
  const r = spawnSync(TIME, ['-f', 'peak-rss-kib=%M', process.execPath, join(root, 'app', 'cli', 'bin.js'), ...args], { encoding: 'utf8', timeout: MAX_SECONDS * 1000, env: { ...process.env, PLUMBLINE_THREADS: '1' } });
  const kib = Number(/peak-rss-kib=(\d+)/.exec(r.stderr ?? '')?.[1] ?? NaN);
  return { status: r.status, signal: r.signal, stderr: r.stderr ?? '', seconds: (Date.now() - started) / 1000, rssMb: kib / 1024 };
}

function check(label: string, r: ReturnType<typeof measured>, message: RegExp) {
  assert.equal(r.signal, null, `${label}: still running after ${MAX_SECONDS} s (killed)`);
  assert.equal(r.status, 2, `${label}: ${r.stderr}`);
  assert.match(r.stderr, message, label);
  assert.doesNotMatch(r.stderr, /^\s+at /m, `${label}: no stack trace`);
  assert.ok(r.rssMb < MAX_RSS_MB, `${label}: peak ${r.rssMb.toFixed(0)} MB`);
  process.stdout.write(`# ${label}: refused in ${r.seconds.toFixed(1)} s, peak ${r.rssMb.toFixed(0)} MB\n`);
}

/** A bare generator z [N, d] → first 192 values → image [N, 3, 8, 8]: tiny file, any declared latent size. */
function wideLatent(d: number): Uint8Array {
  const g = new GraphBuilder('wide');
  const z = g.input('z', ['N', d]);
  const head = g.op('Slice', [z, g.int64s('a', [0]), g.int64s('b', [192]), g.int64s('x', [1])]);
  g.output(g.op('Reshape', [head, g.int64s('s', [-1, 3, 8, 8])]), 'image', ['N', 3, 8, 8]);
  return g.toModel();
}

/** z [N, 4] → one value per sample expanded to [N, 3, 8000, 8000]; the output's size is not declared. */
function expanding(): Uint8Array {
  const g = new GraphBuilder('expand');
  const z = g.input('z', ['N', 4]);
  const one = g.op('Reshape', [g.op('Slice', [z, g.int64s('a', [0]), g.int64s('b', [1]), g.int64s('x', [1])]), g.int64s('s', [-1, 1, 1, 1])]);
  g.output(g.op('Expand', [one, g.int64s('shape', [1, 3, 8000, 8000])]), 'image', ['N', 3, 'H', 'W']);
  return g.toModel();
}

test('tiny hostile models are refused within seconds and under 500 MB', (t) => {
  if (!existsSync(TIME)) return t.skip('GNU time (/usr/bin/time) is missing: no outside memory measurement');
  const dir = tempDir();
  const wide = join(dir, 'wide.onnx');
  writeFileSync(wide, wideLatent(100_000));
  assert.ok(wideLatent(100_000).length < 1000, 'a few hundred bytes');
  check('latent [N, 100000]', measured('inspect', '--model', wide), /wide\.onnx: latent input 'z' has 100000 values per latent row, more than the cap of 8192/);
  const huge = join(dir, 'huge.onnx');
  writeFileSync(huge, wideLatent(1e9));
  check('latent [N, 1e9]', measured('inspect', '--model', huge), /huge\.onnx: latent input 'z' has 1000000000 values per latent row, more than the cap/);
  const expand = join(dir, 'expand.onnx');
  writeFileSync(expand, expanding());
  assert.ok(expanding().length < 1000);
  check('expanding to 8000×8000', measured('sample', '--model', expand, '--seeds', '0-3', '--out', join(dir, 'renders')), /expand\.onnx: node '.*' \(Expand\) makes a tensor of shape \[1, 3, 8000, 8000\], 192000000 elements per sample, more than the cap/);
});

test('/dev/zero as a synthesis file is refused at once, whether named directly or through a card', (t) => {
  if (!existsSync(TIME)) return t.skip('GNU time (/usr/bin/time) is missing');
  const dir = tempDir();
  const { card } = cardGenerator(dir);
  const base = JSON.parse(readFileSync(card, 'utf8'));
  const absolute = join(dir, 'zero.card.json');
  writeFileSync(absolute, JSON.stringify({ ...base, synthesis: { ...base.synthesis, file: '/dev/zero' } }));
  check('card with synthesis.file /dev/zero', measured('inspect', '--model', absolute), /zero\.card\.json: synthesis\.file '\/dev\/zero' is an absolute path/);
  symlinkSync('/dev/zero', join(dir, 'zero.onnx'));
  const linked = join(dir, 'linked.card.json');
  writeFileSync(linked, JSON.stringify({ ...base, synthesis: { ...base.synthesis, file: 'zero.onnx' } }));
  check('card with a symlink to /dev/zero', measured('inspect', '--model', linked), /linked\.card\.json: synthesis\.file 'zero\.onnx' leads outside the folder/);
  check('/dev/zero as the model', measured('inspect', '--model', '/dev/zero'), /\/dev\/zero: synthesis model is a device, not a file/);
});
