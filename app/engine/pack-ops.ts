// Building, verifying, applying and importing preset packs against a loaded generator.
// Verification trusts no claim it can check: σ is recomputed on the generator, the safe range
// is recomputed from the audit curves the pack carries, and a signature (when the user names a
// trusted key) ties the whole manifest to the studio that made it.
import { existsSync, readdirSync } from 'node:fs';
import { join, resolve } from 'node:path';
import type { KeyObject } from 'node:crypto';
import { encodePng, tileImages } from '../core/image.ts';
import type { ScaledDirection } from '../core/latent.ts';
import { renderAlong, type StripSpec } from './strip.ts';
import { encodeNpy } from '../core/npy.ts';
import { parseDirectionsMeta, readDirections, type Direction } from '../core/directions.ts';
import { PACK_FORMAT, PACK_VERSION, PackError, keyIdOf, readPack, writePack, type PackEvidence, type PackManifest, type ReadPack } from '../core/pack.ts';
import { safeRangeFromCurves } from '../core/audit/safe-range.ts';
import { readTextFile } from '../core/path-policy.ts';
import { AUDIT_CAUTION } from '../core/audit/settings.ts';
import { TOOL_STAMP } from '../protocol/version.ts';
import { Project, vectorHash } from './project.ts';
import type { Generator } from './generator.ts';

export const PREVIEW_SEEDS = [0, 1, 2];

/** A pack preview: seeds × strengths at ψ, recorded in the manifest so `plumbline apply --preview` reproduces it. */
export type PreviewSpec = StripSpec;

/** Seeds × strengths along one direction as a PNG tile: reproducible byte for byte. */
export async function renderStrip(gen: Generator, d: ScaledDirection, spec: PreviewSpec): Promise<Uint8Array> {
  const images = await renderAlong(gen, d, spec);
  return encodePng(tileImages(images, spec.strengths.length));
}

/**
 * Relative slack when comparing a pack's σ with the σ recomputed here: both come from the same
 * deterministic samples and code, so they agree to float32 rounding; ×1000 edits are far outside.
 */
export const SIGMA_TOLERANCE = 1e-4;

interface AuditEntry {
  name: string;
  verdict: 'pass' | 'review' | 'fail' | 'no-measure';
  reason: string;
  leakage: { value: number | null; low: number | null; high: number | null };
  pathLength: { value: number | null; low: number | null; high: number | null };
  safeRange: [number, number];
  curves?: { strengths: number[] };
  leakageCurve?: (number | null)[];
  leakageLower?: (number | null)[];
  leakageUpper?: (number | null)[];
  pathLengthCurve?: { strengths: number[]; mean: number[] };
}

interface AuditFound {
  entry: AuditEntry;
  probes: number;
  file: string;
  generator: string;
  settings: { leakPass: number; leakFail: number; pathLength: { spikeRatio: number } };
}

/** The newest audit in the project that covers each direction. */
function latestAudits(projectDir: string): Map<string, AuditFound> {
  const dir = join(projectDir, 'audits');
  const out = new Map<string, AuditFound>();
  if (!existsSync(dir)) return out;
  for (const f of readdirSync(dir).filter((x) => x.endsWith('.json')).sort().reverse()) {
    try {
      const r = JSON.parse(readTextFile(join(dir, f), 'audit report')) as { directions: AuditEntry[]; probes: { count: number }; generator: { fingerprint: string }; settings: AuditFound['settings'] };
      for (const d of r.directions) if (!out.has(d.name)) out.set(d.name, { entry: d, probes: r.probes.count, file: `audits/${f}`, generator: r.generator.fingerprint, settings: r.settings });
    } catch {
      // An unreadable audit is skipped; the pack then reports that direction as unaudited.
    }
  }
  return out;
}

/** The audit curves a safe range was derived from, as the pack carries them; null when the audit lacks them. */
function evidenceOf(a: AuditFound): PackEvidence | null {
  const e = a.entry;
  if (!e.curves?.strengths || !e.leakageCurve || !e.leakageLower || !e.leakageUpper || !e.pathLengthCurve) return null;
  return {
    auditGenerator: a.generator,
    strengths: e.curves.strengths,
    leakageCurve: e.leakageCurve,
    leakageLower: e.leakageLower,
    leakageUpper: e.leakageUpper,
    leakPass: a.settings.leakPass,
    leakFail: a.settings.leakFail,
    pathLength: { strengths: e.pathLengthCurve.strengths, mean: e.pathLengthCurve.mean },
    spikeRatio: a.settings.pathLength.spikeRatio,
  };
}

export async function buildPack(gen: Generator, projectDir: string, options: { signWith?: KeyObject } = {}): Promise<{ bytes: Uint8Array; manifest: Omit<PackManifest, 'entries'>; skipped: string[] }> {
  const project = Project.open(projectDir, false, { name: gen.info.name, fingerprint: gen.info.fingerprint });
  if (project.doc.generator && project.doc.generator.fingerprint !== gen.info.fingerprint) {
    throw new PackError('generator', `${project.dir}: the project was audited on generator ${project.doc.generator.fingerprint.slice(0, 12)}…, not on ${gen.info.fingerprint.slice(0, 12)}… (${gen.info.name}); pack it with the generator it was audited on`);
  }
  const audits = latestAudits(project.dir);
  const files: { path: string; bytes: Uint8Array }[] = [];
  const directions: PackManifest['directions'] = [];
  const skipped: string[] = [];
  for (const d of project.loadDirections(gen.layout)) {
    const hash = vectorHash(d.vector, d.layers);
    const s = project.signOff(d.name, hash);
    const last = s.history.at(-1);
    if (s.status !== 'approved' || !last) {
      skipped.push(`${d.name} (${s.approvalReset ? 'approval reset: it changed after sign-off' : s.status})`);
      continue;
    }
    const audit = audits.get(d.name);
    if (!audit) {
      skipped.push(`${d.name} (approved but never audited)`);
      continue;
    }
    const evidence = evidenceOf(audit);
    if (!evidence || audit.generator !== gen.info.fingerprint) {
      skipped.push(`${d.name} (its latest audit ${evidence ? 'was made on another generator' : 'lacks the curves its safe range comes from'}; audit it again)`);
      continue;
    }
    const [lo, hi] = audit.entry.safeRange;
    // verify refuses an empty range (no strength is safe), so a pack must never carry one.
    if (!(hi - lo > 0)) {
      skipped.push(`${d.name} (its latest audit leaves no safe range: no strength of it is safe to ship)`);
      continue;
    }
    const sigma = gen.sigmaOf(d.vector, d.layers);
    const spec: PreviewSpec = { seeds: PREVIEW_SEEDS, strengths: [lo, lo / 2, 0, hi / 2, hi].map((v) => Math.round(v * 1000) / 1000), psi: gen.info.defaultPsi };
    const npy = `directions/${d.name}.npy`;
    const meta = `directions/${d.name}.json`;
    const preview = `previews/${d.name}.png`;
    files.push({ path: npy, bytes: encodeNpy(d.vector, [d.vector.length]) });
    files.push({ path: meta, bytes: new TextEncoder().encode(JSON.stringify({ format: 'plumbline.directions', version: 1, file: `${d.name}.npy`, directions: [{ name: d.name, target: d.target, layers: d.layers, notes: d.notes, source: d.source }] }, null, 2) + '\n') });
    files.push({ path: preview, bytes: await renderStrip(gen, { ...d, sigma }, spec) });
    directions.push({
      name: d.name, npy, meta, preview, target: d.target, layers: d.layers, sigma, safeRange: [lo, hi],
      audit: { verdict: audit.entry.verdict, reason: audit.entry.reason, leakage: audit.entry.leakage, pathLength: audit.entry.pathLength, probes: audit.probes, file: audit.file },
      signOff: { status: 'approved', reviewer: last.reviewer, at: last.at, note: last.note, ...(last.override ? { override: last.override, gate: last.gate ?? '' } : {}) },
      previewSpec: spec,
      evidence,
    });
  }
  if (directions.length === 0) throw new PackError('missing', `${project.dir}: no approved and audited directions to pack${skipped.length ? ` (skipped: ${skipped.join(', ')})` : ''}`);
  const manifest: Omit<PackManifest, 'entries'> = {
    format: PACK_FORMAT,
    version: PACK_VERSION,
    createdAt: new Date().toISOString(),
    createdBy: TOOL_STAMP,
    project: project.doc.name,
    generator: { name: gen.info.name, fingerprint: gen.info.fingerprint },
    directions,
    caution: AUDIT_CAUTION,
  };
  files.push({ path: 'report.html', bytes: new TextEncoder().encode(reportHtml(manifest, files)) });
  return { bytes: await writePack(files, manifest, { signWith: options.signWith }), manifest, skipped };
}

/** Escapes text for HTML element content and quoted attribute values. */
export function escapeHtml(value: unknown): string {
  return String(value).replace(/[&<>"']/g, (c) => ({ '&': '&amp;', '<': '&lt;', '>': '&gt;', '"': '&quot;', "'": '&#39;' })[c]!);
}

/** A self-contained HTML report: inline styles, previews as data URIs, no scripts, nothing fetched. */
function reportHtml(m: Omit<PackManifest, 'entries'>, files: { path: string; bytes: Uint8Array }[]): string {
  // Every value goes through esc, numbers too: the manifest fields are data from a project folder.
  const esc = escapeHtml;
  const png = (p: string | null) => {
    const f = p ? files.find((x) => x.path === p) : null;
    return f ? `data:image/png;base64,${Buffer.from(f.bytes).toString('base64')}` : '';
  };
  const bar = (v: number | null) => {
    // Scale 0–1 σ; marks at the default pass (0.2 σ) and fail (0.5 σ) thresholds of the leak.
    const w = Math.min(1, Math.max(0, v ?? 0)) * 200;
    return `<svg width="220" height="14" role="img" aria-label="leakage ${esc(v)} σ"><rect width="200" height="10" y="2" fill="#2f3a46"/><rect width="${w.toFixed(1)}" height="10" y="2" fill="${(v ?? 0) < 0.2 ? '#4fb3a1' : (v ?? 0) < 0.5 ? '#e0a84a' : '#e26d5c'}"/><line x1="40" x2="40" y1="0" y2="14" stroke="#e6e9ec"/><line x1="100" x2="100" y1="0" y2="14" stroke="#e6e9ec"/></svg>`;
  };
  const rows = m.directions.map((d) => `<section><h2>${esc(d.name)} <small>→ ${esc(d.target ?? 'no target')}</small></h2>
<p><b>${esc(d.audit.verdict)}</b> — ${esc(d.audit.reason)}</p>
<p>leakage ${esc(d.audit.leakage.value?.toFixed(3))} [${esc(d.audit.leakage.low?.toFixed(3))}–${esc(d.audit.leakage.high?.toFixed(3))}] ${bar(d.audit.leakage.value)} σ (marks at 0.2 and 0.5 σ) · path length ${esc(d.audit.pathLength.value?.toPrecision(3))} · safe range ${esc(d.safeRange[0])} to ${esc(d.safeRange[1])} σ · ${esc(d.audit.probes)} probes</p>
<p>approved by ${esc(d.signOff.reviewer)} on ${esc(d.signOff.at)}${d.signOff.note ? ` — ${esc(d.signOff.note)}` : ''}</p>${d.signOff.override ? `
<p style="border-left:4px solid #e26d5c;padding-left:8px"><b>Approved by override</b> although ${esc(d.signOff.gate ?? 'its audit did not support it')}. Reason given: ${esc(d.signOff.override)}</p>` : ''}
<figure><img alt="${esc(d.name)} preview: seeds ${esc(d.previewSpec?.seeds.join(', '))} at strengths ${esc(d.previewSpec?.strengths.join(', '))}" src="${esc(png(d.preview))}"><figcaption>rows: seeds ${esc(d.previewSpec?.seeds.join(', '))}; columns: strengths ${esc(d.previewSpec?.strengths.join(', '))} σ at ψ ${esc(d.previewSpec?.psi)}</figcaption></figure></section>`).join('\n');
  return `<!doctype html><html lang="en"><head><meta charset="utf-8"><meta http-equiv="Content-Security-Policy" content="default-src 'none'; img-src data:; style-src 'unsafe-inline'"><title>${esc(m.project)} — preset pack</title>
<style>body{font:14px system-ui,sans-serif;background:#14181d;color:#e6e9ec;margin:2em;max-width:980px}section{border-top:1px solid #2f3a46;padding:1em 0}small{color:#95a1ad}img{image-rendering:auto;max-width:100%}code{font-family:monospace}</style></head>
<body><h1>${esc(m.project)}: preset pack</h1><p>Generator <b>${esc(m.generator.name)}</b>, fingerprint <code>${esc(m.generator.fingerprint)}</code>. Created ${esc(m.createdAt)} by ${esc(m.createdBy)}. Apply only to this exact generator: <code>plumbline verify</code> checks it.</p>
<p><i>${esc(m.caution)}</i></p>${rows}</body></html>`;
}

export interface VerifyResult {
  pack: ReadPack;
  directions: (Direction & { sigma: number; safeRange: [number, number] })[];
  /** 'trusted' when signed by a key the caller trusts; 'signed' when signed by a key nobody named; 'unsigned'. */
  signature: { status: 'trusted' | 'signed' | 'unsigned'; keyId: string | null };
}

/**
 * Full verification: archive safety, hashes, format version, generator fingerprint, direction
 * files, σ recomputed on this generator, the safe range recomputed from the pack's audit curves,
 * and (with `trust`) a signature by one of the trusted keys.
 */
export async function verifyPack(bytes: Uint8Array, label: string, gen: Generator, options: { trust?: KeyObject[] } = {}): Promise<VerifyResult> {
  const pack = await readPack(bytes, label);
  const m = pack.manifest;
  const sig = pack.signature;
  if (sig && !sig.valid) throw new PackError('signature', `${label}: its signature does not match manifest.json (edited after signing)`);
  if (options.trust?.length) {
    if (!sig) throw new PackError('signature', `${label}: unsigned, but a trusted key was required`);
    const trusted = options.trust.map(keyIdOf);
    if (!trusted.includes(sig.keyId)) throw new PackError('signature', `${label}: signed by key ${sig.keyId}, which is not among the trusted keys (${trusted.join(', ')})`);
  }
  if (m.generator.fingerprint !== gen.info.fingerprint) {
    throw new PackError('generator', `${label}: made for generator ${m.generator.name} (fingerprint ${m.generator.fingerprint.slice(0, 16)}…), but the model given is ${gen.info.name} (${gen.info.fingerprint.slice(0, 16)}…); its directions were not audited on this generator and must not be applied to it`);
  }
  const directions = m.directions.map((d) => {
    const metaText = new TextDecoder().decode(pack.files.get(d.meta)!);
    let parsed;
    try {
      const meta = parseDirectionsMeta(metaText, `${label}:${d.meta}`);
      [parsed] = readDirections(pack.files.get(d.npy)!, `${label}:${d.npy}`, meta, gen.layout, d.name);
    } catch (err) {
      throw new PackError('range', (err as Error).message);
    }
    const [lo, hi] = d.safeRange;
    if (!(Number.isFinite(lo) && Number.isFinite(hi) && lo <= 0 && hi >= 0 && hi - lo > 0 && Math.abs(lo) <= 20 && Math.abs(hi) <= 20)) {
      throw new PackError('range', `${label}: direction '${d.name}' has an invalid safe range [${lo}, ${hi}] (must contain 0, be non-empty and within ±20 σ)`);
    }
    if (parsed.name !== d.name) throw new PackError('range', `${label}: '${d.meta}' names its direction '${parsed.name}', the manifest says '${d.name}'`);
    // Claims checked against what this generator and the pack's own audit curves say.
    const sigma = gen.sigmaOf(parsed.vector, parsed.layers);
    if (!(Math.abs(d.sigma - sigma) <= SIGMA_TOLERANCE * sigma)) {
      throw new PackError('range', `${label}: direction '${d.name}' claims σ = ${d.sigma}, but on this generator its σ is ${sigma.toPrecision(6)}; strengths in the pack would mean something else`);
    }
    const e = d.evidence;
    if (!e) throw new PackError('range', `${label}: direction '${d.name}' carries no audit curves, so its safe range [${lo}, ${hi}] cannot be checked; rebuild the pack`);
    if (e.auditGenerator !== gen.info.fingerprint) throw new PackError('range', `${label}: direction '${d.name}' was audited on generator ${e.auditGenerator.slice(0, 16)}…, not this one`);
    if (e.leakageCurve.length !== e.strengths.length || e.pathLength.mean.length !== e.pathLength.strengths.length) throw new PackError('range', `${label}: direction '${d.name}': its audit curves have mismatched lengths`);
    if (!e.leakageLower || !e.leakageUpper || e.leakFail === undefined) throw new PackError('range', `${label}: direction '${d.name}' carries audit curves without the leak's confidence bounds (a pack made before the two-sided safe-range rule), so its safe range cannot be checked; audit again and rebuild the pack`);
    if (e.leakageLower.length !== e.strengths.length || e.leakageUpper.length !== e.strengths.length) throw new PackError('range', `${label}: direction '${d.name}': its audit curves have mismatched lengths`);
    const [elo, ehi] = safeRangeFromCurves({ ...e, leakageLower: e.leakageLower, leakageUpper: e.leakageUpper, leakFail: e.leakFail }).safeRange;
    if (elo !== lo || ehi !== hi) {
      throw new PackError('range', `${label}: direction '${d.name}' claims the safe range [${lo}, ${hi}] σ, but its audit curves give [${elo}, ${ehi}] σ`);
    }
    return { ...parsed, sigma: d.sigma, safeRange: d.safeRange as [number, number] };
  });
  const signature: VerifyResult['signature'] = !sig ? { status: 'unsigned', keyId: null } : { status: options.trust?.length ? 'trusted' : 'signed', keyId: sig.keyId };
  return { pack, directions, signature };
}

export { resolve };
