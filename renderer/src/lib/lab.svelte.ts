// State and intents of the lab screens: project, discovery, audit, repair and sign-off. Works
// through the same engine client as the workbench (Studio) and keeps Studio's direction list
// in step with the engine's.
import type { AuditWire, DirectionInfo, EventData, Params, Result, WireImage } from '../../../app/protocol/messages.ts';
import { desktop } from './bridge.ts';
import { EngineRequestError } from './engine.ts';
import type { Studio } from './studio.svelte.ts';

export type View = 'workbench' | 'discover' | 'audit' | 'signoff' | 'variants';
type ProjectInfo = Result<'project.open'>;
type Candidate = Extract<Result<'lab.discover'>, { cancelled: false }>['candidates'][number];
type Thumb = Extract<Result<'audit.run'>, { cancelled: false }>['thumbnails'][number];
/** A job's progress; `workers` on a farm: per-worker units, images and images/s. */
export type JobProgress = { done: number; total: number; label: string; workers?: EventData<'job.progress'>['workers'] };
export type Status = 'draft' | 'in-review' | 'approved' | 'rejected';

const LAST_PROJECT_KEY = 'plumbline.lastProject';
const RECENT_KEY = 'plumbline.recentProjects';
const RECENT_LIMIT = 8;

function readRecent(): string[] {
  try {
    const v = JSON.parse(globalThis.localStorage?.getItem(RECENT_KEY) ?? '[]');
    return Array.isArray(v) ? v.filter((x): x is string => typeof x === 'string').slice(0, RECENT_LIMIT) : [];
  } catch {
    return [];
  }
}
const REVIEWER_KEY = 'plumbline.reviewer';

export class Lab {
  view = $state<View>('workbench');
  project = $state.raw<ProjectInfo | null>(null);
  reviewer = $state(globalThis.localStorage?.getItem(REVIEWER_KEY) ?? '');
  /** Recently opened project folders, newest first. */
  recent = $state<string[]>(readRecent());

  method = $state<Params<'lab.discover'>['method']>('sefa');
  components = $state(6);
  boundaryAttribute = $state('');
  candidateName = $state('');
  candidates = $state.raw<Candidate[]>([]);
  discovering = $state(false);

  auditSelection = $state<string[]>([]);
  probes = $state(64);
  auditProgress = $state<JobProgress | null>(null);
  report = $state.raw<AuditWire | null>(null);
  previousReport = $state.raw<AuditWire | null>(null);
  thumbnails = $state.raw<Thumb[]>([]);
  focus = $state<string | null>(null);
  #auditRequest = 0;

  variantName = $state('variant_set');
  variantSeeds = $state('0-7');
  variantOut = $state('');
  variantSettings = $state<{ label: string; strengths: Record<string, number> }[]>([{ label: 'base', strengths: {} }]);
  variantProgress = $state<JobProgress | null>(null);
  contactSheet = $state<string | null>(null);
  variantSummary = $state<string | null>(null);
  #variantRequest = 0;

  /** The render farm (Redis address); the password stays in memory here, or in the OS keychain on the desktop. */
  farmUrl = $state('');
  farmPassword = $state('');
  farm = $state.raw<Result<'farm.status'> | null>(null);

  repairAgainst = $state<string[]>([]);
  holdOthers = $state(true);
  repairing = $state(false);

  constructor(readonly studio: Studio) {}

  get engine() {
    return this.studio.engine;
  }

  async #guard(label: string, work: () => Promise<void>): Promise<boolean> {
    this.studio.busy = label;
    try {
      await work();
      return true;
    } catch (err) {
      this.studio.banner = { kind: 'error', text: err instanceof EngineRequestError ? err.message : `${label} failed: ${(err as Error).message}` };
      return false;
    } finally {
      this.studio.busy = null;
    }
  }

  /** Puts the engine's kept directions into the workbench, keeping slider positions by id. */
  async refreshDirections(list?: DirectionInfo[]): Promise<void> {
    const dirs = list ?? (await this.engine.request('directions.list', {})).directions;
    this.studio.directions = dirs;
    this.studio.strengths = Object.fromEntries(dirs.map((d) => [d.id, this.studio.strengths[d.id] ?? 0]));
  }

  async openProject(path: string, create: boolean): Promise<void> {
    const ok = await this.#guard(create ? `Creating project ${path}` : `Opening project ${path}`, async () => {
      const p = await this.engine.request('project.open', { path, create });
      this.project = p;
      globalThis.localStorage?.setItem(LAST_PROJECT_KEY, path);
      this.recent = [path, ...this.recent.filter((r) => r !== path)].slice(0, RECENT_LIMIT);
      globalThis.localStorage?.setItem(RECENT_KEY, JSON.stringify(this.recent));
      this.studio.onAutosave = (ui) => this.engine.request('project.saveUi', ui).then((r) => r.savedAt);
      this.studio.onRecover = () => this.openProject(path, false);
      await this.refreshDirections(p.directions);
      if (p.ui) this.studio.restoreUi(p.ui);
      if (!p.generatorMatches) this.studio.banner = { kind: 'warning', text: `This project was made with another generator (fingerprint ${p.generatorFingerprint?.slice(0, 12)}…). Its directions and sign-offs may not hold for ${this.studio.model?.name}.` };
    });
    if (ok) await Promise.all([this.studio.refreshGrid(), this.studio.requestPreview()]);
  }

  /** Reopens the last project after a reload or a crash. */
  async restoreLastProject(): Promise<void> {
    const last = globalThis.localStorage?.getItem(LAST_PROJECT_KEY);
    if (last) await this.openProject(last, false);
  }

  async discover(): Promise<void> {
    this.discovering = true;
    await this.#guard(`Discovering (${this.method})`, async () => {
      const tags = Object.entries(this.studio.tags);
      const r = await this.engine.request('lab.discover', {
        method: this.method,
        components: this.components,
        samples: 3000,
        seed: 1,
        layers: null,
        attribute: this.method === 'boundary' ? this.boundaryAttribute || undefined : undefined,
        positive: tags.filter(([, t]) => t === 'has').map(([s]) => Number(s)),
        negative: tags.filter(([, t]) => t === 'lacks').map(([s]) => Number(s)),
        name: this.candidateName || undefined,
        stripSeeds: [this.studio.seed, this.studio.seed + 1, this.studio.seed + 2],
        stripStrengths: [-3, -1.5, 0, 1.5, 3],
      });
      if (!r.cancelled) this.candidates = r.candidates;
    });
    this.discovering = false;
  }

  async keep(candidate: Candidate, name: string): Promise<void> {
    await this.#guard(`Keeping ${name}`, async () => {
      await this.engine.request('directions.keep', { id: candidate.direction.id, name });
      this.candidates = this.candidates.filter((c) => c !== candidate);
      await this.refreshDirections();
    });
  }

  async runAudit(ids = this.auditSelection): Promise<void> {
    if (ids.length === 0) return;
    this.auditProgress = { done: 0, total: 1, label: 'starting' };
    await this.#guard('Auditing', async () => {
      const pending = this.engine.request(
        'audit.run',
        { directions: ids, probes: this.probes, pinnedSeeds: this.studio.pinned, psi: this.studio.psi, seed: 1, referenceStrength: 2, leakPass: 0.15, leakFail: 0.35, combinations: 'all' },
        (done, total, label, workers) => (this.auditProgress = { done, total, label, workers }),
      );
      this.#auditRequest = this.engine.lastRequestId;
      const r = await pending;
      if (r.cancelled) {
        this.studio.banner = { kind: 'info', text: 'Audit cancelled.' };
        return;
      }
      if (this.report) this.previousReport = this.report;
      this.report = r.report;
      this.thumbnails = r.thumbnails;
      this.focus = r.report.directions.find((d) => d.verdict !== 'pass')?.name ?? r.report.directions[0]?.name ?? null;
    });
    this.auditProgress = null;
  }

  async cancelAudit(): Promise<void> {
    if (this.#auditRequest) await this.engine.request('job.cancel', { requestId: this.#auditRequest });
  }

  async repair(directionName: string): Promise<void> {
    const d = this.studio.directions.find((x) => x.name === directionName);
    if (!d || this.repairAgainst.length === 0) return;
    this.repairing = true;
    await this.#guard(`Repairing ${directionName}`, async () => {
      const r = await this.engine.request('lab.repair', { direction: d.id, against: this.repairAgainst, hold: this.holdOthers ? 'others' : [] });
      if (r.cancelled) return;
      await this.refreshDirections();
      this.studio.banner = { kind: 'info', text: `Made ${r.direction.name}: ${r.direction.notes}. Auditing it beside the original…` };
      this.auditSelection = [d.id, r.direction.id];
    });
    this.repairing = false;
    if (this.auditSelection.length === 2) await this.runAudit();
  }

  async review(direction: DirectionInfo, status: Status, note: string): Promise<void> {
    if (!this.reviewer.trim()) {
      this.studio.banner = { kind: 'warning', text: 'Enter your name as reviewer first; the review log records who signed off.' };
      return;
    }
    globalThis.localStorage?.setItem(REVIEWER_KEY, this.reviewer.trim());
    await this.#guard(`Recording ${status} for ${direction.name}`, async () => {
      const r = await this.engine.request('project.review', { direction: direction.id, status, reviewer: this.reviewer.trim(), note });
      this.studio.directions = this.studio.directions.map((d) => (d.id === direction.id ? { ...d, signOff: r.signOff } : d));
    });
  }

  /** Captures the workbench sliders as one setting of the variant set. */
  addSettingFromSliders(label: string): void {
    const strengths = Object.fromEntries(Object.entries(this.studio.strengths).filter(([, v]) => v !== 0));
    const clean = label.replace(/[^A-Za-z0-9_.=+-]/g, '_').slice(0, 60) || `setting_${this.variantSettings.length}`;
    this.variantSettings = [...this.variantSettings.filter((s) => s.label !== clean), { label: clean, strengths }];
  }

  removeSetting(label: string): void {
    this.variantSettings = this.variantSettings.filter((s) => s.label !== label);
  }

  /** Connects the engine to a farm: audits and variant sets then render there. */
  async connectFarm(): Promise<void> {
    await this.#guard('Connecting to the farm', async () => {
      this.farm = await this.engine.request('farm.connect', { url: this.farmUrl.trim(), password: this.farmPassword || undefined });
      const d = desktop();
      if (d?.setSecret) {
        await d.setSetting('farmUrl', this.farmUrl.trim());
        if (this.farmPassword) await d.setSecret('farmPassword', this.farmPassword);
      }
    });
  }

  async disconnectFarm(): Promise<void> {
    await this.#guard('Leaving the farm', async () => {
      this.farm = await this.engine.request('farm.disconnect', {});
    });
  }

  async refreshFarm(): Promise<void> {
    this.farm = await this.engine.request('farm.status', {});
  }

  /** The desktop app remembers the farm address and (sealed by the OS keychain) its password. */
  async restoreFarmSetting(): Promise<void> {
    const d = desktop();
    if (!d?.getSecret) return;
    this.farmUrl = String((await d.getSetting('farmUrl')) ?? '');
    this.farmPassword = (await d.getSecret('farmPassword')) ?? '';
  }

  async renderVariants(): Promise<void> {
    let seeds: number[];
    try {
      seeds = parseSeedList(this.variantSeeds);
    } catch (err) {
      this.studio.banner = { kind: 'error', text: (err as Error).message };
      return;
    }
    this.variantProgress = { done: 0, total: 1, label: 'starting' };
    await this.#guard('Rendering the variant set', async () => {
      const pending = this.engine.request('variants.render', { name: this.variantName, seeds, psi: this.studio.psi, settings: this.variantSettings, out: this.variantOut }, (done, total, label, workers) => (this.variantProgress = { done, total, label, workers }));
      this.#variantRequest = this.engine.lastRequestId;
      const r = await pending;
      if (r.cancelled) {
        this.variantSummary = 'Cancelled; render again to resume where it stopped.';
        return;
      }
      this.contactSheet = this.thumbUrl(r.contactSheet);
      this.variantSummary = `${r.rendered} rendered, ${r.reused} kept from an earlier run, in ${r.out}`;
    });
    this.variantProgress = null;
  }

  async cancelVariants(): Promise<void> {
    if (this.#variantRequest) await this.engine.request('job.cancel', { requestId: this.#variantRequest });
  }

  async buildPack(out: string): Promise<void> {
    await this.#guard(`Building pack ${out}`, async () => {
      const r = await this.engine.request('pack.build', { out });
      this.studio.banner = { kind: 'info', text: `Wrote ${r.file} with ${r.directions.join(', ')} (${Math.round(r.bytes / 1024)} KiB).${r.skipped.length ? ` Not included: ${r.skipped.join('; ')}.` : ''}` };
    });
  }

  async importPack(path: string): Promise<void> {
    await this.#guard(`Importing ${path}`, async () => {
      const r = await this.engine.request('pack.import', { path });
      await this.refreshDirections(r.directions);
      this.studio.banner = { kind: 'info', text: `Imported ${r.imported.join(', ')} from ${path}.` };
    });
  }

  thumbUrl(bytes: Uint8Array): string {
    return URL.createObjectURL(new Blob([bytes as Uint8Array<ArrayBuffer>], { type: 'image/png' }));
  }

  stripImages(c: Candidate): WireImage[] {
    return c.strip;
  }

  safeRange(name: string): [number, number] | null {
    return this.report?.directions.find((d) => d.name === name)?.safeRange ?? null;
  }
}

/** "0-7,12" → [0..7, 12]. */
export function parseSeedList(text: string): number[] {
  const out: number[] = [];
  for (const part of text.split(',').map((x) => x.trim()).filter(Boolean)) {
    const m = /^(\d+)(?:-(\d+))?$/.exec(part);
    if (!m) throw new Error(`'${part}' is not a seed or a range like 0-7`);
    const a = Number(m[1]);
    const b = m[2] === undefined ? a : Number(m[2]);
    if (b < a || b - a > 10_000) throw new Error(`seed range '${part}' is backwards or too long`);
    for (let s = a; s <= b; s++) out.push(s);
  }
  if (!out.length) throw new Error('no seeds given');
  return out;
}
