// The audit and sign-off report exported from the app: one self-contained HTML file (inline
// styles, images as data URIs, no scripts, nothing fetched), readable offline and printable to
// PDF. Built from what the studio shows: every direction's newest audit, its sign-off status and
// history, overrides spelled out.
import type { AuditWire, DirectionInfo } from '../../../app/protocol/messages.ts';
import { attributeColors, heatDomain, heatmapCells, worstProbeCaption, VERDICT_LABEL } from './charts.ts';
import { formatDate, leakPhrase } from './format.ts';

export interface ReportInput {
  project: string;
  generator: { name: string; fingerprint: string } | null;
  report: AuditWire | null;
  directions: DirectionInfo[];
  thumbnails: { direction: string; seed: number | null; reference?: string; strength: number; attribute: string; leakage: number; before: Uint8Array; after: Uint8Array }[];
  createdAt: string;
}

const esc = (s: unknown) => String(s).replace(/[&<>"']/g, (c) => ({ '&': '&amp;', '<': '&lt;', '>': '&gt;', '"': '&quot;', "'": '&#39;' })[c]!);

export function pngDataUri(bytes: Uint8Array): string {
  let bin = '';
  for (let i = 0; i < bytes.length; i += 0x8000) bin += String.fromCharCode(...bytes.subarray(i, i + 0x8000));
  return `data:image/png;base64,${btoa(bin)}`;
}

/** Linear blend of two #rrggbb colours, t in [0, 1]. */
function mix(a: string, b: string, t: number): string {
  const p = (h: string) => [1, 3, 5].map((i) => parseInt(h.slice(i, i + 2), 16));
  const [x, y] = [p(a), p(b)];
  return `rgb(${x.map((v, i) => Math.round(v + (y[i] - v) * Math.min(1, Math.max(0, t)))).join(',')})`;
}

export function reportHtml(r: ReportInput): string {
  const STATUS: Record<string, string> = { draft: 'Draft', 'in-review': 'In review', approved: 'Approved', rejected: 'Rejected' };
  const audit = r.report;
  const colours = audit ? attributeColors(audit) : {};
  let heat = '';
  if (audit) {
    const cells = heatmapCells(audit);
    const [, top] = heatDomain(cells);
    heat = `<h2>Attribute dependency at ±${esc(audit.settings.referenceStrength)} σ</h2>
<p class="muted">Mean change of each attribute in σ of the attribute; colour scale 0 to ${top} (covers every coloured cell). Outlined: the direction's own target. Grey, hatched: set aside as within the instrument (not counted as a leak). Grey: reported, not judged.</p>
<table class="heat"><tr><th></th>${audit.attributes.map((a) => `<th><span class="sw" style="background:${colours[a.name]}"></span>${esc(a.name)}</th>`).join('')}</tr>
${audit.directions.map((d) => `<tr><th>${esc(d.name)}</th>${audit.attributes.map((a) => {
      const c = cells.find((x) => x.direction === d.name && x.attribute === a.name)!;
      // Grey cells are not leaks: set aside within the instrument (hatched) or reported only; the title says why.
      if (c.kind === 'target') return `<td class="target" title="${esc(c.label)}">${c.value.toFixed(2)}</td>`;
      if (c.kind === 'set-aside') return `<td class="aside" title="${esc(c.label)}">${c.value.toFixed(2)}</td>`;
      if (c.kind === 'unjudged') return `<td class="unjudged" title="${esc(c.label)}">${c.value.toFixed(2)}</td>`;
      return `<td title="${esc(c.label)}" style="background:${mix('#1c2a33', '#e0a84a', c.value / top)};color:${c.value > 0.55 * top ? '#111' : '#e6e9ec'}">${c.value.toFixed(2)}</td>`;
    }).join('')}</tr>`).join('\n')}</table>`;
  }
  const rows = r.directions.map((d) => {
    const a = audit?.directions.find((x) => x.name === d.name);
    const s = d.signOff;
    const thumbs = r.thumbnails.filter((t) => t.direction === d.name);
    const history = (s?.history ?? []).map((h) => `<li>${esc(formatDate(h.at))} — ${esc(h.reviewer)}: ${esc(STATUS[h.status])}${h.note ? ` — ${esc(h.note)}` : ''}${h.override ? ` <b class="ovr">override</b> (${esc(h.gate ?? '')}): “${esc(h.override)}”` : ''}</li>`).join('');
    return `<section><h3>${esc(d.name)} <small>→ ${esc(d.target ?? 'no target')}</small> <span class="st st-${esc(s?.status ?? 'draft')}">${esc(STATUS[s?.status ?? 'draft'])}</span></h3>
${a ? `<p><b class="v-${esc(a.verdict)}">${esc(VERDICT_LABEL[a.verdict])}</b> — ${esc(a.reason)}</p>
<p class="muted">leakage ${esc(leakPhrase(a.leakage, 3))} · path length ${a.pathLength.value?.toPrecision(3)} (${esc(a.pathLength.distance)} per σ²) · safe range ${a.safeRange[0]} to ${a.safeRange[1]} σ${typeof a.auditedAt === 'string' ? ` · audited ${esc(formatDate(a.auditedAt))}` : ''}</p>` : '<p class="muted">No audit on record.</p>'}
${s?.gate ? `<p class="muted">Approval gate: ${esc(s.gate.explanation)}.</p>` : ''}
${thumbs.length ? `<div class="thumbs">${thumbs.map((t) => ({ ...t, probe: t.reference ? `reference ${esc(t.reference)}` : `seed ${t.seed}`, caption: audit ? worstProbeCaption(audit, d.name, t) : { attribute: null, text: `${t.attribute} ${t.leakage.toFixed(2)}` } })).map((t) => `<figure><img alt="${t.probe} before" src="${pngDataUri(t.before)}"><img alt="${t.probe} at ${t.strength} σ" src="${pngDataUri(t.after)}"><figcaption>${t.probe}: ${t.caption.attribute ? `<span class="sw" style="background:${colours[t.caption.attribute] ?? '#888'}"></span>` : ''}${esc(t.caption.text)}</figcaption></figure>`).join('')}</div>` : ''}
${history ? `<ol class="hist">${history}</ol>` : ''}</section>`;
  }).join('\n');
  return `<!doctype html><html lang="en"><head><meta charset="utf-8"><meta http-equiv="Content-Security-Policy" content="default-src 'none'; img-src data:; style-src 'unsafe-inline'"><title>${esc(r.project)} — audit and sign-off</title>
<style>body{font:14px system-ui,sans-serif;background:#14181d;color:#e6e9ec;margin:2em;max-width:1000px}section{border-top:1px solid #2f3a46;padding:.8em 0}small,.muted{color:#95a1ad}.heat{border-collapse:collapse;font-size:12px}.heat th,.heat td{padding:4px 6px;text-align:right}.heat th{font-weight:normal;color:#95a1ad}.target{outline:2px solid #4fb3a1;background:#2c5f57}.aside{background:repeating-linear-gradient(135deg,#2a3038 0 3px,#4a525c 3px 5px);color:#95a1ad}.unjudged{background:#2a3038;color:#95a1ad;outline:1px dashed #6b7480;outline-offset:-2px}.sw{display:inline-block;width:9px;height:9px;border-radius:2px;margin-right:3px}.thumbs{display:flex;gap:10px;flex-wrap:wrap}figure{margin:0;font-size:11px;color:#95a1ad}figure img{width:96px;height:96px;margin-right:2px}.st{font-size:12px;padding:1px 8px;border-radius:10px;background:#222a33}.st-approved{background:#4fb3a1;color:#0c1f1b}.st-rejected{background:#e26d5c}.v-pass{color:#4fb3a1}.v-fail{color:#e26d5c}.v-review{color:#e0a84a}.ovr{color:#e0a84a}.hist{font-size:12px;color:#95a1ad}@media print{body{background:#fff;color:#111}}</style></head>
<body><h1>${esc(r.project)}: audit and sign-off</h1>
<p>Generator <b>${esc(r.generator?.name ?? 'unknown')}</b>${r.generator ? `, fingerprint <code>${esc(r.generator.fingerprint)}</code>` : ''}. Exported ${esc(formatDate(r.createdAt))}.${audit ? ` Newest audit: ${esc(audit.probes.count)} probes at ψ ${esc(audit.probes.psi)}.` : ''}</p>
${audit ? `<p><i>${esc(audit.caution)}</i></p>` : ''}
${heat}
<h2>Directions</h2>
${rows}</body></html>`;
}
