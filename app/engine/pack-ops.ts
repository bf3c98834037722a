// Building, verifying, applying and importing preset packs against a loaded generator.
import { existsSync, readFileSync, readdirSync } from 'node:fs';
import { join, resolve } from 'node:path';
import { encodePng, tileImages } from '../core/image.ts';
import type { ScaledDirection } from '../core/latent.ts';
import { renderAlong, type StripSpec } from './strip.ts';
import { encodeNpy } from '../core/npy.ts';
import { parseDirectionsMeta, readDirections, type Direction } from '../core/directions.ts';
import { PACK_FORMAT, PACK_VERSION, PackError, readPack, writePack, type PackManifest, type ReadPack } from '../core/pack.ts';
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

interface AuditEntry {
  name: string;
  verdict: 'pass' | 'review' | 'fail';
  reason: string;
  leakage: { value: number | null; low: number | null; high: number | null };
  pathLength: { value: number | null; low: number | null; high: number | null };
  safeRange: [number, number];
}

/** The newest audit in the project that covers each direction. */
function latestAudits(projectDir: string): Map<string, { entry: AuditEntry; probes: number; file: string }> {
  const dir = join(projectDir, 'audits');
  const out = new Map<string, { entry: AuditEntry; probes: number; file: string }>();
  if (!existsSync(dir)) return out;
  for (const f of readdirSync(dir).filter((x) => x.endsWith('.json')).sort().reverse()) {
    try {
      const r = JSON.parse(readFileSync(join(dir, f), 'utf8')) as { directions: AuditEntry[]; probes: { count: number } };
      for (const d of r.directions) if (!out.has(d.name)) out.set(d.name, { entry: d, probes: r.probes.count, file: `audits/${f}` });
    } catch {
      // An unreadable audit is skipped; the pack then reports that direction as unaudited.
    }
  }
  return out;
}

export async function buildPack(gen: Generator, projectDir: string): Promise<{ bytes: Uint8Array; manifest: Omit<PackManifest, 'entries'>; skipped: string[] }> {
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
    const sigma = gen.sigmaOf(d.vector, d.layers);
    const [lo, hi] = audit.entry.safeRange;
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
      signOff: { status: 'approved', reviewer: last.reviewer, at: last.at, note: last.note },
      previewSpec: spec,
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
  return { bytes: await writePack(files, manifest), manifest, skipped };
}

/** A self-contained HTML report: inline styles, previews as data URIs, no scripts, nothing fetched. */
function reportHtml(m: Omit<PackManifest, 'entries'>, files: { path: string; bytes: Uint8Array }[]): string {
  const esc = (s: string) => s.replace(/[&<>"']/g, (c) => ({ '&': '&amp;', '<': '&lt;', '>': '&gt;', '"': '&quot;', "'": '&#39;' })[c]!);
  const png = (p: string | null) => {
    const f = p ? files.find((x) => x.path === p) : null;
    return f ? `data:image/png;base64,${Buffer.from(f.bytes).toString('base64')}` : '';
  };
  const bar = (v: number | null) => {
    const w = Math.min(1, Math.max(0, (v ?? 0) / 0.5)) * 200;
    return `<svg width="220" height="14" role="img" aria-label="leakage ${v}"><rect width="200" height="10" y="2" fill="#2f3a46"/><rect width="${w.toFixed(1)}" height="10" y="2" fill="${(v ?? 0) < 0.15 ? '#4fb3a1' : (v ?? 0) < 0.35 ? '#e0a84a' : '#e26d5c'}"/><line x1="60" x2="60" y1="0" y2="14" stroke="#e6e9ec"/><line x1="140" x2="140" y1="0" y2="14" stroke="#e6e9ec"/></svg>`;
  };
  const rows = m.directions.map((d) => `<section><h2>${esc(d.name)} <small>→ ${esc(d.target ?? 'no target')}</small></h2>
<p><b>${esc(d.audit.verdict)}</b> — ${esc(d.audit.reason)}</p>
<p>leakage ${d.audit.leakage.value?.toFixed(3)} [${d.audit.leakage.low?.toFixed(3)}–${d.audit.leakage.high?.toFixed(3)}] ${bar(d.audit.leakage.value)} (marks at 0.15 and 0.35) · path length ${d.audit.pathLength.value?.toPrecision(3)} · safe range ${d.safeRange[0]} to ${d.safeRange[1]} σ · ${d.audit.probes} probes</p>
<p>approved by ${esc(d.signOff.reviewer)} on ${esc(d.signOff.at)}${d.signOff.note ? ` — ${esc(d.signOff.note)}` : ''}</p>
<figure><img alt="${esc(d.name)} preview: seeds ${d.previewSpec?.seeds.join(', ')} at strengths ${d.previewSpec?.strengths.join(', ')}" src="${png(d.preview)}"><figcaption>rows: seeds ${d.previewSpec?.seeds.join(', ')}; columns: strengths ${d.previewSpec?.strengths.join(', ')} σ at ψ ${d.previewSpec?.psi}</figcaption></figure></section>`).join('\n');
  return `<!doctype html><html lang="en"><head><meta charset="utf-8"><meta http-equiv="Content-Security-Policy" content="default-src 'none'; img-src data:; style-src 'unsafe-inline'"><title>${esc(m.project)} — preset pack</title>
<style>body{font:14px system-ui,sans-serif;background:#14181d;color:#e6e9ec;margin:2em;max-width:980px}section{border-top:1px solid #2f3a46;padding:1em 0}small{color:#95a1ad}img{image-rendering:auto;max-width:100%}code{font-family:monospace}</style></head>
<body><h1>${esc(m.project)}: preset pack</h1><p>Generator <b>${esc(m.generator.name)}</b>, fingerprint <code>${m.generator.fingerprint}</code>. Created ${esc(m.createdAt)} by ${esc(m.createdBy)}. Apply only to this exact generator: <code>plumbline verify</code> checks it.</p>
<p><i>${esc(m.caution)}</i></p>${rows}</body></html>`;
}

export interface VerifyResult {
  pack: ReadPack;
  directions: (Direction & { sigma: number; safeRange: [number, number] })[];
}

/** Full verification: archive safety, hashes, format version, generator fingerprint, direction files and ranges. */
export async function verifyPack(bytes: Uint8Array, label: string, gen: Generator): Promise<VerifyResult> {
  const pack = await readPack(bytes, label);
  const m = pack.manifest;
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
    return { ...parsed, sigma: d.sigma, safeRange: d.safeRange as [number, number] };
  });
  return { pack, directions };
}

export { resolve };
