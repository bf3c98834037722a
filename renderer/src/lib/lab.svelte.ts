// State and intents of the lab screens: project, discovery, audit, repair and sign-off. Works
// through the same engine client as the workbench (Studio) and keeps Studio's direction list
// in step with the engine's.
import { APP_NULL_DIRECTIONS, type AuditWire, type DefinedAttributeInfo, type DirectionInfo, type EventData, type LockHolderWire, type Params, type Result, type VariantDraft, type WireImage } from '../../../app/protocol/messages.ts';
import { EngineRequestError } from './engine.ts';
import { desktop } from './bridge.ts';
import { reportHtml } from './report.ts';
import { parseSeedList, probesProblem, seedListProblem, wholeProblem } from './fields.ts';
import { beforeResults } from './audit-rows.ts';
import type { Studio } from './studio.svelte.ts';

export type View = 'workbench' | 'discover' | 'audit' | 'signoff' | 'variants';
type ProjectInfo = Result<'project.open'>;
type Candidate = Extract<Result<'lab.discover'>, { cancelled: false }>['candidates'][number];
type Thumb = Extract<Result<'audit.run'>, { cancelled: false }>['thumbnails'][number];
type ChangeMapPng = Extract<Result<'audit.run'>, { cancelled: false }>['changeMaps'][number];
/** A job's progress; `workers` on a farm: per-worker units, images and images/s. */
export type JobProgress = { done: number; total: number; label: string; workers?: EventData<'job.progress'>['workers'] };
export type Status = 'draft' | 'in-review' | 'approved' | 'rejected';

const LAST_PROJECT_KEY = 'plumbline.lastProject';
const RECENT_KEY = 'plumbline.recentProjects';
const RECENT_LIMIT = 8;

const RECENT_GENERATORS_KEY = 'plumbline.recentGenerators';

function readRecent(key = RECENT_KEY): string[] {
  try {
    const v = JSON.parse(globalThis.localStorage?.getItem(key) ?? '[]');
    return Array.isArray(v) ? v.filter((x): x is string => typeof x === 'string').slice(0, RECENT_LIMIT) : [];
  } catch {
    return [];
  }
}
const REVIEWER_KEY = 'plumbline.reviewer';
const SESSION_KEY = 'plumbline.session';
/** How often an open project's lock is renewed; the engine treats one silent for 90 s as stale. */
const LOCK_RENEW_MS = 20_000;

/**
 * This tab's session id. sessionStorage keeps it across a reload of the tab, but a browser copies
 * sessionStorage into a duplicated tab or a window opened from this one — which must not become a
 * second writer of the same project — so the stored id is reused only when this page load is a
 * reload; any other navigation starts a new session.
 */
function sessionId(): string {
  const store = globalThis.sessionStorage;
  const navigation = globalThis.performance?.getEntriesByType?.('navigation')[0] as PerformanceNavigationTiming | undefined;
  let id = navigation?.type === 'reload' ? store?.getItem(SESSION_KEY) : null;
  if (!id || !/^[A-Za-z0-9_-]{8,64}$/.test(id)) {
    id = Array.from(globalThis.crypto.getRandomValues(new Uint8Array(12)), (b) => b.toString(16).padStart(2, '0')).join('');
    store?.setItem(SESSION_KEY, id);
  }
  return id;
}

export { parseSeedList, probesProblem, seedListProblem, wholeProblem } from './fields.ts';

export class Lab {
  view = $state<View>('workbench');
  project = $state.raw<ProjectInfo | null>(null);
  reviewer = $state(globalThis.localStorage?.getItem(REVIEWER_KEY) ?? '');
  /** A sign-off step was asked for without a reviewer name (said beside the field until one is typed). */
  reviewerMissing = $state(false);
  /** An engine's refusal of a sign-off step or a delete, by direction id: shown in that direction's row. */
  rowErrors = $state<Record<string, string>>({});
  /** Recently opened project folders, newest first. */
  recent = $state<string[]>(readRecent());
  /** Recently opened generators (model cards or .onnx), newest first. */
  recentGenerators = $state<string[]>(readRecent(RECENT_GENERATORS_KEY));
  /** Another window or tab holds this project's lock: look, do not write. */
  readOnly = $state(false);
  lockHolder = $state.raw<LockHolderWire | null>(null);
  readonly session = sessionId();
  #lockTimer: ReturnType<typeof setInterval> | null = null;

  method = $state<Params<'lab.discover'>['method']>('sefa');
  components = $state(6);
  boundaryAttribute = $state('');
  candidateName = $state('');
  candidates = $state.raw<Candidate[]>([]);
  discovering = $state(false);

  auditSelection = $state<string[]>([]);
  probes = $state<number>(64);
  /** Candidates waiting for "discard all" to be confirmed. */
  confirmingDiscard = $state(false);
  /** Audit history files of the project (every audit is kept). */
  auditFiles = $state.raw<string[]>([]);
  auditProgress = $state<JobProgress | null>(null);
  report = $state.raw<AuditWire | null>(null);
  previousReport = $state.raw<AuditWire | null>(null);
  /** Each direction's earlier result, shown as "before" on its row (only where there is an earlier audit of it). */
  before = $state.raw<Record<string, AuditWire['directions'][number]>>({});
  thumbnails = $state.raw<Thumb[]>([]);
  /** Each direction's change map (PNG of the mean per-pixel ΔE00 at +reference), from the last audit. */
  changeMaps = $state.raw<ChangeMapPng[]>([]);
  /** Whether the change map is drawn over the preview in the Audit screen. */
  showChangeMap = $state(true);
  focus = $state<string | null>(null);
  #auditRequest = 0;

  variantName = $state('variant_set');
  variantSeeds = $state('0-7');
  /** Project references rendered beside the seeds (by name). */
  variantReferences = $state<string[]>([]);
  variantOut = $state('');
  variantSettings = $state<{ label: string; strengths: Record<string, number> }[]>([{ label: 'base', strengths: {} }]);
  variantProgress = $state<JobProgress | null>(null);
  contactSheet = $state<string | null>(null);
  variantSummary = $state<string | null>(null);
  #variantRequest = 0;
  /** The engine's refusal of the last variant render (shown beside the button), and a reason to force it. */
  variantError = $state<string | null>(null);
  /** The last variant render's failure that is not a use-rule refusal (nothing to force). */
  variantFailure = $state<string | null>(null);
  forceReason = $state('');

  /** A worst probe shown large (rendered at full size on request). */
  enlarged = $state.raw<{ direction: string; seed: number | null; reference?: string; strength: number; attribute: string; leakage: number; before: string; after: string } | null>(null);
  /** Repair before/after on the same probes, by repaired direction name. */
  repairImages = $state.raw<Record<string, { parent: string; strength: number; rows: { seed: number; before: string; original: string; repaired: string }[] }>>({});
  /** Attributes defined from tagged seeds (the project's, or this session's without a project). */
  defined = $state.raw<DefinedAttributeInfo[]>([]);
  defineName = $state('');
  defining = $state(false);
  /** The last definition's outcome: its accuracy, or why it was refused. */
  lastDefinition = $state.raw<{ attribute: DefinedAttributeInfo; refused: string | null } | null>(null);
  /** Defined attributes chosen for the next audit, by name. */
  auditDefined = $state<string[]>([]);
  /** Named references of the open project added to the audit's probes (after the seeds). */
  auditReferences = $state<string[]>([]);
  /** Target attribute per direction id for the next audit (absent: the direction's own target). */
  auditTargets = $state<Record<string, string>>({});
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

  async #guard(label: string, work: () => Promise<void>, rowOf?: string): Promise<boolean> {
    this.studio.busy = label;
    if (rowOf) delete this.rowErrors[rowOf];
    try {
      await work();
      return true;
    } catch (err) {
      const text = err instanceof EngineRequestError ? err.message : `${label} failed: ${(err as Error).message}`;
      // A refusal about one direction is shown in its row, where the user acted; the banner is for the rest.
      if (rowOf) this.rowErrors[rowOf] = text;
      else this.studio.banner = { kind: 'error', text };
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

  async openProject(path: string, create: boolean): Promise<boolean> {
    const ok = await this.#guard(create ? `Creating project ${path}` : `Opening project ${path}`, () => this.#openProject(path, create));
    if (ok) await Promise.all([this.studio.refreshGrid(), this.studio.requestPreview()]);
    return ok;
  }

  /** As openProject, for a dialog that shows a refusal beside the path it names: the message, or null when opened. */
  async openProjectFromDialog(path: string, create: boolean): Promise<string | null> {
    this.studio.busy = create ? `Creating project ${path}` : `Opening project ${path}`;
    try {
      await this.#openProject(path, create);
    } catch (err) {
      return (err as Error).message;
    } finally {
      this.studio.busy = null;
    }
    // The dialog closes as soon as the project is open; the grid and preview repaint behind it
    // (awaiting them kept a modal dialog over a page that already showed the project).
    void Promise.all([this.studio.refreshGrid(), this.studio.requestPreview()]);
    return null;
  }

  async #openProject(path: string, create: boolean): Promise<void> {
    const p = await this.engine.request('project.open', { path, create, session: this.session });
    this.project = p;
    this.readOnly = p.readOnly;
    this.lockHolder = p.lockHolder;
    globalThis.localStorage?.setItem(LAST_PROJECT_KEY, path);
    this.recent = [path, ...this.recent.filter((r) => r !== path)].slice(0, RECENT_LIMIT);
    globalThis.localStorage?.setItem(RECENT_KEY, JSON.stringify(this.recent));
    // A read-only window saves nothing: the holder's autosave is the one that counts.
    this.studio.onAutosave = p.readOnly ? null : (ui) => this.engine.request('project.saveUi', { ...ui, variants: this.variantDraft(), auditProbes: this.probesProblem ? undefined : this.probes }).then((r) => r.savedAt);
    this.studio.onRecover = () => this.openProject(path, false).then(() => undefined);
    await this.refreshDirections(p.directions);
    this.defined = (await this.engine.request('attributes.list', {})).attributes;
    this.auditReferences = [];
    if (p.ui) {
      this.studio.restoreUi(p.ui);
      if (p.ui.variants) this.#restoreVariants(p.ui.variants);
      if (p.ui.auditProbes !== undefined) this.probes = p.ui.auditProbes;
    }
    await this.loadAuditHistory();
    // Candidates left unkept in the project come back until they are kept or discarded.
    this.candidates = [...this.candidates.filter((c) => !p.candidates.some((n) => n.direction.id === c.direction.id)), ...p.candidates];
    this.#keepLock();
    if (p.readOnly) {
      const h = p.lockHolder;
      this.studio.banner = { kind: 'warning', text: `Opened read-only: another window has this project open${h ? ` (${h.user ? `${h.user}, ` : ''}process ${h.pid} on ${h.host}, active ${new Date(h.at).toLocaleString()})` : ''}. You can look around; changes are not saved here.` };
    } else if (!p.generatorMatches) this.studio.banner = { kind: 'warning', text: `This project was made with another generator (fingerprint ${p.generatorFingerprint?.slice(0, 12)}…). Its directions and sign-offs may not hold for ${this.studio.model?.name}.` };
    else if (p.refused?.length) this.studio.banner = { kind: 'warning', text: `Opened with ${p.refused.length} entr${p.refused.length === 1 ? 'y' : 'ies'} refused: ${p.refused.join('; ')}` };
  }

  rememberGenerator(path: string): void {
    this.recentGenerators = [path, ...this.recentGenerators.filter((r) => r !== path)].slice(0, RECENT_LIMIT);
    globalThis.localStorage?.setItem(RECENT_GENERATORS_KEY, JSON.stringify(this.recentGenerators));
  }

  /** Renews this tab's lock while it holds one; releases it when the page goes away. */
  #keepLock(): void {
    if (this.#lockTimer) clearInterval(this.#lockTimer);
    this.#lockTimer = null;
    if (this.readOnly) return;
    this.#lockTimer = setInterval(() => void this.engine.request('project.lock', { session: this.session, release: false }).catch(() => undefined), LOCK_RENEW_MS);
  }

  /** Called on pagehide: lets another window take the project at once. */
  releaseLock(): void {
    if (this.project && !this.readOnly) void this.engine.request('project.lock', { session: this.session, release: true }).catch(() => undefined);
  }

  /** Every stored audit of the project, merged: the newest result of each direction. */
  async loadAuditHistory(): Promise<void> {
    const h = await this.engine.request('audit.history', {});
    this.auditFiles = h.files;
    if (!h.report) return;
    if (this.report) this.previousReport = this.report;
    this.before = beforeResults(this.before, this.report, h.report);
    this.report = h.report;
    this.thumbnails = h.thumbnails;
    this.changeMaps = h.changeMaps;
    if (!this.focus || !h.report.directions.some((d) => d.name === this.focus)) this.focus = h.report.directions.find((d) => d.verdict !== 'pass')?.name ?? h.report.directions[0]?.name ?? null;
  }

  get probesProblem(): string | null {
    return probesProblem(this.probes, this.studio.pinned.length + this.auditReferences.length);
  }

  get componentsProblem(): string | null {
    return wholeProblem(this.components, 1, 64, 'Components');
  }

  get variantSeedsProblem(): string | null {
    return seedListProblem(this.variantSeeds);
  }

  get variantNameProblem(): string | null {
    return /^[A-Za-z0-9_.-]{1,80}$/.test(this.variantName) ? null : 'Name: 1–80 letters, digits, _ . or - (it names the folder).';
  }

  /** Variant-set settings as stored in the project: strengths by direction name. */
  variantDraft(): VariantDraft {
    const nameOf = Object.fromEntries(this.studio.directions.map((d) => [d.id, d.name]));
    return {
      name: this.variantName.slice(0, 80), seeds: this.variantSeeds.slice(0, 400), references: this.variantReferences.slice(0, 1000), out: this.variantOut.slice(0, 4096),
      settings: this.variantSettings.map((s) => ({ label: s.label, strengths: Object.fromEntries(Object.entries(s.strengths).filter(([id]) => nameOf[id]).map(([id, v]) => [nameOf[id], v])) })),
    };
  }

  #restoreVariants(v: VariantDraft): void {
    const idOf = Object.fromEntries(this.studio.directions.map((d) => [d.name, d.id]));
    this.variantName = v.name || this.variantName;
    this.variantSeeds = v.seeds || this.variantSeeds;
    this.variantReferences = v.references ?? [];
    this.variantOut = v.out;
    if (v.settings.length) this.variantSettings = v.settings.map((s) => ({ label: s.label, strengths: Object.fromEntries(Object.entries(s.strengths).filter(([n]) => idOf[n]).map(([n, x]) => [idOf[n], x])) }));
  }

  /** Reopens the last project after a reload or a crash. */
  async restoreLastProject(): Promise<boolean> {
    const last = globalThis.localStorage?.getItem(LAST_PROJECT_KEY);
    return last ? this.openProject(last, false) : false;
  }

  async discover(): Promise<void> {
    if (this.method !== 'boundary' && this.method !== 'means' && this.componentsProblem) return;
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
      // New candidates join the unkept ones; nothing is thrown away without being asked.
      if (!r.cancelled) this.candidates = [...this.candidates.filter((c) => !r.candidates.some((n) => n.direction.id === c.direction.id)), ...r.candidates];
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

  /** Discards candidates: dropped from the engine and from the project's candidates/. */
  async discardCandidates(ids: string[]): Promise<void> {
    if (!ids.length) return;
    await this.#guard('Discarding candidates', async () => {
      await this.engine.request('directions.discard', { ids });
      this.candidates = this.candidates.filter((c) => !ids.includes(c.direction.id));
    });
  }

  async discardCandidate(id: string): Promise<void> {
    await this.discardCandidates([id]);
  }

  async discardAll(confirmed: boolean): Promise<void> {
    if (!confirmed) {
      this.confirmingDiscard = true;
      return;
    }
    this.confirmingDiscard = false;
    await this.discardCandidates(this.candidates.map((c) => c.direction.id));
  }

  /** Fits an attribute from the seeds tagged has/lacks in the workbench; shows its accuracy or the refusal. */
  async defineAttribute(): Promise<void> {
    const name = this.defineName.trim();
    if (!name) {
      this.studio.banner = { kind: 'warning', text: 'Name the attribute first (letters, digits, _ . -).' };
      return;
    }
    const tags = Object.entries(this.studio.tags);
    this.defining = true;
    await this.#guard(`Defining ${name}`, async () => {
      const r = await this.engine.request('attributes.define', {
        name,
        has: tags.filter(([, t]) => t === 'has').map(([s]) => Number(s)),
        lacks: tags.filter(([, t]) => t === 'lacks').map(([s]) => Number(s)),
        psi: this.studio.psi,
      });
      if (r.cancelled) return;
      this.lastDefinition = { attribute: r.attribute, refused: r.refused };
      if (!r.refused) {
        this.defined = [...this.defined.filter((d) => d.name !== r.attribute.name), r.attribute];
        if (!this.auditDefined.includes(r.attribute.name)) this.auditDefined = [...this.auditDefined, r.attribute.name];
      }
    });
    this.defining = false;
  }

  async runAudit(ids = this.auditSelection): Promise<void> {
    if (ids.length === 0 || this.probesProblem) return;
    this.auditProgress = { done: 0, total: 1, label: 'starting' };
    await this.#guard('Auditing', async () => {
      const pending = this.engine.request(
        'audit.run',
        {
          directions: ids, probes: this.probes, pinnedSeeds: this.studio.pinned, references: this.auditReferences, psi: this.studio.psi, seed: 1, referenceStrength: 2, leakPass: 0.2, leakFail: 0.5, nullDirections: APP_NULL_DIRECTIONS, combinations: 'all',
          defined: this.auditDefined.filter((n) => this.defined.some((d) => d.name === n)),
          targets: Object.fromEntries(Object.entries(this.auditTargets).filter(([id, t]) => ids.includes(id) && t)),
        },
        (done, total, label, workers) => (this.auditProgress = { done, total, label, workers }),
      );
      this.#auditRequest = this.engine.lastRequestId;
      const r = await pending;
      if (r.cancelled) {
        this.studio.banner = { kind: 'info', text: 'Audit cancelled.' };
        return;
      }
      if (r.savedAs && this.project) {
        // Stored in the project: show every direction's newest result, not only this audit's.
        await this.loadAuditHistory();
        this.focus = r.report.directions.find((d) => d.verdict !== 'pass')?.name ?? r.report.directions[0]?.name ?? null;
      } else {
        if (this.report) this.previousReport = this.report;
        const merged = mergeReports(this.report, r.report);
        this.before = beforeResults(this.before, this.report, merged);
        this.report = merged;
        this.thumbnails = [...this.thumbnails.filter((t) => !r.report.directions.some((d) => d.name === t.direction)), ...r.thumbnails];
        this.changeMaps = [...this.changeMaps.filter((c) => !r.report.directions.some((d) => d.name === c.direction)), ...r.changeMaps];
        this.focus = r.report.directions.find((d) => d.verdict !== 'pass')?.name ?? r.report.directions[0]?.name ?? null;
      }
      await this.refreshDirections();
    });
    this.#auditRequest = 0;
    this.auditProgress = null;
  }

  /** Ends the wait at once, whatever the engine does with the cancel. */
  cancelAudit(): void {
    if (this.#auditRequest > 0) this.engine.cancel(this.#auditRequest);
    this.auditProgress = null;
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
    const auditing = this.studio.banner;
    if (this.auditSelection.length === 2) {
      await this.runAudit();
      const child = this.studio.directions.find((x) => x.id === this.auditSelection[1]);
      if (child) await this.loadRepairImages(directionName, child.name);
    }
    // "…Auditing it beside the original…" is done now (a message that came since stays).
    if (auditing && this.studio.banner === auditing) this.studio.banner = null;
  }

  /** Renders the parent's worst probes with the original and with the repaired direction, at the same strength. */
  async loadRepairImages(parent: string, child: string): Promise<void> {
    const p = this.report?.directions.find((d) => d.name === parent);
    if (!p || !this.report) return;
    const seeds = this.thumbnails.filter((t) => t.direction === parent).flatMap((t) => (t.seed === null ? [] : [t.seed])).slice(0, 4);
    if (!seeds.length) return;
    const strength = p.leakage.strength;
    const psi = this.report.probes.psi;
    await this.#guard(`Rendering ${parent} and ${child} on the same probes`, async () => {
      const [a, b] = [await this.engine.request('lab.probeImages', { direction: parent, seeds, strength, psi }), await this.engine.request('lab.probeImages', { direction: child, seeds, strength, psi })];
      const rows = a.images.map((x, i) => ({ seed: x.seed, before: this.thumbUrl(x.before), original: this.thumbUrl(x.after), repaired: this.thumbUrl(b.images[i].after) }));
      this.repairImages = { ...this.repairImages, [child]: { parent, strength, rows } };
    });
  }

  async enlarge(t: Thumb): Promise<void> {
    const psi = this.report?.probes.psi ?? this.studio.psi;
    const seed = t.seed;
    if (seed === null) {
      // A reference probe has no seed to re-render from here: its audit thumbnails are shown.
      this.enlarged = { direction: t.direction, seed: null, reference: t.reference, strength: t.strength, attribute: t.attribute, leakage: t.leakage, before: this.thumbUrl(t.before), after: this.thumbUrl(t.after) };
      return;
    }
    await this.#guard(`Rendering seed ${seed} at full size`, async () => {
      const r = await this.engine.request('lab.probeImages', { direction: t.direction, seeds: [seed], strength: t.strength, psi });
      const img = r.images[0];
      this.enlarged = { direction: t.direction, seed: t.seed, strength: t.strength, attribute: t.attribute, leakage: t.leakage, before: this.thumbUrl(img.before), after: this.thumbUrl(img.after) };
    });
  }

  /** Renames a direction; the engine's refusal comes back as text for the screen to show beside the control (null when renamed). */
  async renameDirection(direction: DirectionInfo, name: string): Promise<string | null> {
    this.studio.busy = `Renaming ${direction.name}`;
    try {
      const r = await this.engine.request('directions.rename', { id: direction.id, name });
      this.studio.directions = this.studio.directions.map((d) => (d.id === r.id ? r : d));
      return null;
    } catch (err) {
      return (err as Error).message;
    } finally {
      this.studio.busy = null;
    }
  }

  async deleteDirection(direction: DirectionInfo): Promise<void> {
    await this.#guard(`Deleting ${direction.name}`, async () => {
      const r = await this.engine.request('directions.delete', { id: direction.id });
      await this.refreshDirections(r.directions);
      this.studio.banner = { kind: 'info', text: `Deleted ${direction.name}; its files are kept in the project's directions/deleted/ and its history stays in the review log.` };
    }, direction.id);
  }

  /** Records a sign-off step; `override` is the written reason when the audits do not support it. */
  async review(direction: DirectionInfo, status: Status, note: string, override?: string): Promise<boolean> {
    // Asked beside the reviewer field (not in the banner, which would outlive it); gone once a name is there.
    if (!this.reviewer.trim()) {
      this.reviewerMissing = true;
      return false;
    }
    this.reviewerMissing = false;
    globalThis.localStorage?.setItem(REVIEWER_KEY, this.reviewer.trim());
    return this.#guard(`Recording ${status} for ${direction.name}`, async () => {
      const r = await this.engine.request('project.review', { direction: direction.id, status, reviewer: this.reviewer.trim(), note, ...(override?.trim() ? { override: override.trim() } : {}) });
      this.studio.directions = this.studio.directions.map((d) => (d.id === direction.id ? { ...d, signOff: r.signOff } : d));
    }, direction.id);
  }

  /** Captures the workbench sliders as one setting of the variant set. */
  addSettingFromSliders(label: string): void {
    const strengths = Object.fromEntries(Object.entries(this.studio.strengths).filter(([, v]) => v !== 0));
    // Same rule as the protocol's variantLabelSchema: one folder name, no leading or trailing dots.
    const clean = label.replace(/[^A-Za-z0-9_.=+-]/g, '_').replace(/^\.+|\.+$/g, '').slice(0, 60).replace(/\.+$/, '') || `setting_${this.variantSettings.length}`;
    this.variantSettings = [...this.variantSettings.filter((s) => s.label !== clean), { label: clean, strengths }];
    this.variantError = null;
    this.studio.scheduleSave();
  }

  removeSetting(label: string): void {
    this.variantSettings = this.variantSettings.filter((s) => s.label !== label);
    this.variantError = null;
    this.studio.scheduleSave();
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

  async renderVariants(force = false): Promise<void> {
    if (this.variantSeedsProblem || this.variantNameProblem) return;
    const seeds = parseSeedList(this.variantSeeds);
    this.studio.scheduleSave();
    this.variantError = null;
    this.variantFailure = null;
    this.variantProgress = { done: 0, total: 1, label: 'starting' };
    this.studio.busy = 'Rendering the variant set';
    try {
      const pending = this.engine.request('variants.render', { name: this.variantName, seeds, references: this.variantReferences, psi: this.studio.psi, settings: this.variantSettings, out: this.variantOut, ...(force ? { forceReason: this.forceReason } : {}) }, (done, total, label, workers) => (this.variantProgress = { done, total, label, workers }));
      this.#variantRequest = this.engine.lastRequestId;
      const r = await pending;
      if (r.cancelled) {
        this.variantSummary = 'Cancelled; render again to resume where it stopped.';
        return;
      }
      this.contactSheet = this.thumbUrl(r.contactSheet);
      const sheet = r.sheet && r.sheet.shown < r.sheet.of ? `; the contact sheet shows the first ${r.sheet.shown} of ${r.sheet.of} ${r.sheet.what}` : '';
      this.variantSummary = `${r.rendered} rendered, ${r.reused} kept from an earlier run, in ${r.out}${force ? ` (forced: ${this.forceReason})` : ''}${sheet}`;
    } catch (err) {
      // Refusals by the use rules are shown beside the button with the way to force them; any
      // other refusal or failure is shown there too, but nothing about it can be forced.
      if (err instanceof EngineRequestError && err.code === 'use-refused') this.variantError = (err as Error).message;
      else this.variantFailure = `The variant set was not rendered: ${(err as Error).message}`;
    } finally {
      this.#variantRequest = 0;
      this.variantProgress = null;
      this.studio.busy = null;
    }
  }

  cancelVariants(): void {
    if (this.#variantRequest > 0) this.engine.cancel(this.#variantRequest);
    this.variantProgress = null;
  }

  async buildPack(out: string): Promise<void> {
    await this.#guard(`Building pack ${out}`, async () => {
      let r;
      try {
        r = await this.engine.request('pack.build', { out, overwrite: false });
      } catch (err) {
        // The engine never replaces a file nobody chose to replace: ask, then say so explicitly.
        if (!(err instanceof EngineRequestError && err.code === 'would-overwrite' && globalThis.confirm?.(`${err.message}\n\nReplace ${out}?`))) throw err;
        r = await this.engine.request('pack.build', { out, overwrite: true });
      }
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

  /** The audit and sign-off report as one self-contained HTML file; in the desktop app, also as PDF. */
  async exportReport(asPdf = false): Promise<void> {
    const name = (this.project?.name ?? 'plumbline').replace(/[^A-Za-z0-9_. -]/g, '_').slice(0, 100);
    const html = reportHtml({ project: this.project?.name ?? 'Plumbline', generator: this.studio.model ? { name: this.studio.model.name, fingerprint: this.studio.model.fingerprint } : null, report: this.report, directions: this.studio.directions, thumbnails: this.thumbnails, createdAt: new Date().toISOString() });
    const bridge = desktop();
    if (asPdf && bridge?.printPdf) {
      const saved = await bridge.printPdf(html, `${name}-sign-off`);
      if (saved) this.studio.banner = { kind: 'info', text: `Saved ${saved}.` };
      return;
    }
    const a = document.createElement('a');
    a.href = URL.createObjectURL(new Blob([html], { type: 'text/html' }));
    a.download = `${name}-sign-off.html`;
    a.click();
    setTimeout(() => URL.revokeObjectURL(a.href), 10_000);
  }

  /** "AUC 0.96 (…)" for a defined attribute used in the last audit or defined in this project; null for any other attribute. */
  accuracyOf(name: string): string | null {
    const inReport = this.report?.attributes.find((a) => a.name === name && a.source === 'defined')?.accuracy;
    if (inReport) return inReport;
    const d = this.defined.find((x) => x.name === name);
    return d ? `${d.metric === 'auc' ? 'AUC' : 'R²'} ${d.value.toFixed(2)}${d.noisy ? ', noisy' : ''}` : null;
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

/** The newer report's directions replace the older's of the same name; the others stay. */
export function mergeReports(older: AuditWire | null, newer: AuditWire): AuditWire {
  if (!older) return newer;
  const names = new Set(newer.directions.map((d) => d.name));
  const attributes = [...newer.attributes, ...older.attributes.filter((a) => !newer.attributes.some((b) => b.name === a.name))];
  return { ...newer, attributes, directions: [...older.directions.filter((d) => !names.has(d.name)), ...newer.directions] };
}
