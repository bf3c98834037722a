// The CLI's main path: `plumbline sample` writes PNGs and a manifest that identify the generator;
// its help; and the audit's text output (the verdict table, then the instrument's calibration).
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { readFileSync, readdirSync } from 'node:fs';
import { join } from 'node:path';
import { spawnSync } from 'node:child_process';
import { createHash } from 'node:crypto';
import { decode } from 'fast-png';
import { tempDir } from '../helpers/models.ts';
import { auditTable } from '../../app/cli/lab-commands.ts';
import { planAudit } from '../../app/core/audit/plan.ts';
import { directionStatistics, type DirectionMeasurements } from '../../app/core/audit/statistics.ts';
import { judgeDirection } from '../../app/core/audit/verdict.ts';
import { assembleReport, directionReport, instrumentCalibrationReport } from '../../app/core/audit/report.ts';
import { ProbeBootstrap } from '../../app/core/stats.ts';

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

test('audit text: after the verdicts, the instrument table (floor, detection limit, what it can see, cross-talk) and the no-subject line', () => {
  // A synthetic calibrated audit through the same pure steps the engine runs, printed by the CLI's auditTable.
  const n = 32;
  const names = ['subject_x', 'subject_detail', 'background_hue', 'colourfulness'];
  const grid = [-2, 0, 2];
  const plan = planAudit({ probes: n, strengths: grid, combinations: 'none', nullDirections: 0, referencePathSamples: 0 }, [{ name: 'slide', target: 'subject_x', layers: null, vector: Float32Array.from([1, 0, 0, 0]), sigma: 1 }], { size: 4, layers: 1 }, names, false);
  const col = (v: number) => new Float64Array(n).fill(v);
  const m: DirectionMeasurements = { change: [[col(-2), col(0), col(0), col(0.4)], null, [col(2), col(0), col(0), col(0.4)]], pathLength: plan.pathLengthGrid.map(() => col(1)) };
  // subject_detail: floor 59.5 σ (limit 119 σ, blind to a failing leak); background_hue: floor 0.15 σ (limit 0.3 σ).
  const floors = [0.004, 59.5, 0.15, 3];
  const instrument = { floor: floors, crossTalk: () => [0, 0, 0, 0], floorMultiple: 2, crossTalkMultiple: 1.5 };
  const stats = directionStatistics(m, plan, names, plan.seeds, 'subject_x', new ProbeBootstrap(n, 200, 1), [true, true, true, false], instrument);
  const judged = judgeDirection(stats, { reference: 2, settings: plan.settings, fewProbes: false, pathLengthGrid: plan.pathLengthGrid });
  const translate = 'translate (3, −2) px';
  const rotate = 'rotate 15° about the centroid';
  const calibration = instrumentCalibrationReport({
    probes: 24,
    operations: { invisible: ['±1 dither'], exact: [translate, rotate] },
    measures: Object.fromEntries(names.map((name, j) => [name, { noiseFloor: floors[j], crossTalk: name === 'subject_x' ? { [translate]: null, [rotate]: 0 } : name === 'subject_detail' ? { [translate]: 0.8, [rotate]: 2.5 } : { [translate]: 0, [rotate]: 0 } }])),
  }, 2, 1.5, plan.settings);
  const report = assembleReport({
    plan, tool: 'test', generator: { name: 'disc', fingerprint: 'f'.repeat(64) },
    attributes: names.map((name) => ({ name, unit: '', source: 'image', sigma: 1, ...(name === 'colourfulness' ? { judged: false } : {}) })),
    warnings: [], directions: [directionReport('slide', stats, judged, plan, [])], combinations: [], groundTruth: null, calibration, noSubject: { probes: 3, of: 32 },
  });
  const text = auditTable(report);
  const lines = text.split('\n');
  const at = (re: RegExp) => lines.findIndex((l) => re.test(l));
  // After the verdict table and its reasons, before the rule.
  assert.ok(at(/^slide: pass — /) < at(/^instrument \(calibrated on 24 probes\)/) && at(/^instrument/) < at(/^rule:/), text);
  assert.match(lines[at(/^instrument/)], /a leak counts only beyond its detection limit \(2× the noise floor\) and 1\.5× the cross-talk into it/);
  assert.match(lines[at(/^instrument/) + 1], /^measure\s+noise floor σ\s+detection limit σ\s+can it see a leak\?\s+largest cross-talk σ\/σ\s+under$/);
  assert.match(text, /\nsubject_x\s+0\.004\s+0\.008\s+sees a 0\.2 σ leak\s+—\s+unmoved by every other exact operation\n/);
  assert.match(text, /\nsubject_detail\s+59\.500\s+119\s+cannot see a failing leak\s+2\.50\s+rotate 15° about the centroid\n/);
  assert.match(text, /\nbackground_hue\s+0\.150\s+0\.30\s+cannot tell pass from review\s+—\s+unmoved by every exact operation\n/);
  assert.match(text, /\ncolourfulness \(reported, not judged\)\s+3\.000\s+6\.00\s+not judged\s+—/);
  assert.match(text, /\ncross-talk: σ of the measure per σ of the measure the operation owns/);
  assert.match(text, /\nno-subject probes: 3 of 32 — no subject separated from the background; subject measures leave those out\n/);
  // The pass is not read as clean for the blind measures: the reason and a warning name them.
  assert.match(text, /slide: pass — clean within ±2 in the measures that can see a leak: .*; cannot see a failing leak \(0\.5 σ\) into subject_detail \(detection limit 119 σ on this generator\); cannot tell pass from review for background_hue \(detection limit 0\.30 σ on this generator\)/);
  assert.match(text, /\nwarning: blind measures: subject_detail cannot detect a leak below 119 σ on this generator .*; a pass does not clear it\n/);
  // Without a calibration or built-in measures, neither the table nor the line is printed.
  const plain = auditTable({ ...report, calibration: null, noSubject: null });
  assert.doesNotMatch(plain, /^instrument|no-subject probes/m);
});
