// The interface's state and intents. Components stay thin and call these methods; images and
// result lists live in $state.raw so Svelte does not proxy large arrays.
import type { DirectionInfo, ModelInfo, WireImage } from '../../../app/protocol/messages.ts';
import { EngineClient, EngineRequestError } from './engine.ts';
import { History } from './history.ts';
import { desktop } from './bridge.ts';
import { GRID_PAGE, LAST_PAGE_START, MAX_SEED, gridPageStart } from './fields.ts';

export { GRID_PAGE, MAX_SEED } from './fields.ts';
export const STRENGTH_LIMIT = 5;

export interface Snapshot {
  seed: number;
  strengths: Record<string, number>;
}

export interface Banner {
  kind: 'error' | 'warning' | 'info';
  text: string;
}

export type EngineState = 'connecting' | 'ready' | 'stopped' | 'restarting';

export class Studio {
  readonly engine = new EngineClient();
  engineState = $state<EngineState>('connecting');
  model = $state.raw<ModelInfo | null>(null);
  directions = $state.raw<DirectionInfo[]>([]);
  strengths = $state<Record<string, number>>({});
  seed = $state(0);
  /** A named reference (a located latent pinned in the project) shown in place of the seed, or null. */
  reference = $state<string | null>(null);
  psi = $state(0.7);
  gridStart = $state(0);
  grid = $state.raw<{ seed: number; image: WireImage }[]>([]);
  gridBusy = $state(false);
  preview = $state.raw<WireImage | null>(null);
  /** Strengths and seed that produced `preview`. */
  previewKey = $state('');
  baseline = $state.raw<WireImage | null>(null);
  comparing = $state(false);
  renderMillis = $state<number | null>(null);
  attributes = $state.raw<number[]>([]);
  banner = $state<Banner | null>(null);
  busy = $state<string | null>(null);
  historyVersion = $state(0);
  theme = $state<'dark' | 'light'>('dark');
  /** Seeds pinned into every audit's probe set. */
  pinned = $state<number[]>([]);
  /** Seeds tagged as having or lacking an attribute (for difference-of-means directions). */
  tags = $state<Record<string, 'has' | 'lacks'>>({});
  lastSaved = $state<string | null>(null);
  /** Set by the lab when a project is open: persists interface state. */
  onAutosave: ((ui: { seed: number; psi: number; strengths: Record<string, number>; pinned: number[]; tags: Record<string, 'has' | 'lacks'> }) => Promise<string>) | null = null;
  /** Set by the lab: reopens the project after an engine restart. */
  onRecover: (() => Promise<void>) | null = null;
  #saveTimer: ReturnType<typeof setTimeout> | null = null;
  #firstPending = 0;

  readonly history = new History<Snapshot>();
  #modelPath: string | null = null;
  #directionFiles: string[] = [];
  #previewInFlight = false;
  #previewDirty = false;
  #gestureStart: Snapshot | null = null;

  canUndo = $derived.by(() => (this.historyVersion, this.history.canUndo));
  canRedo = $derived.by(() => (this.historyVersion, this.history.canRedo));
  edited = $derived(Object.values(this.strengths).some((s) => s !== 0));

  /** Connects, opens the demo generator, then `afterModel` (reopening a project; true when it did), else the grid. */
  async start(afterModel?: () => Promise<boolean>): Promise<void> {
    this.engine.on('engine.stopped', (d) => {
      this.engineState = d.restarting ? 'restarting' : 'stopped';
      this.banner = { kind: 'error', text: `The engine stopped (${d.reason}).${d.restarting ? ' Restarting it; your work is kept.' : ''}` };
    });
    this.engine.on('engine.ready', (d) => {
      this.engineState = 'ready';
      if (d.restarted) void this.#recover();
    });
    const params = new URLSearchParams(location.search);
    const token = params.get('token');
    if (token) this.engine.connectWebSocket(`ws://${location.host}/engine?token=${encodeURIComponent(token)}`);
    else await this.#connectDesktop();
    // Another window or tab may already work with this engine: join its generator and directions
    // instead of reopening the demo, which would reset them under that window's feet.
    const hello = await this.engine.request('engine.hello', {}).catch(() => null);
    if (hello?.model) {
      const model = hello.model;
      await this.#guard('Joining the open generator', async () => {
        this.model = model;
        this.psi = model.defaultPsi;
        const list = await this.engine.request('directions.list', {});
        this.directions = list.directions;
        this.strengths = Object.fromEntries(list.directions.map((d) => [d.id, 0]));
      });
      if (await afterModel?.()) return;
      await Promise.all([this.refreshGrid(), this.requestPreview()]);
      return;
    }
    await this.#guard('Opening the demo generator', async () => {
      this.model = await this.engine.request('model.openDemo', {});
      this.#modelPath = null;
      this.psi = this.model.defaultPsi;
      if (this.model.demoDirections) await this.#loadDirections(this.model.demoDirections);
    });
    // A project to reopen comes first (it renders the grid and preview with its own state).
    if (await afterModel?.()) return;
    await Promise.all([this.refreshGrid(), this.requestPreview()]);
  }

  #connectDesktop(): Promise<void> {
    // The preload forwards the engine's MessagePort with window.postMessage; after an engine
    // restart a fresh port arrives the same way.
    // Main reports the engine's death with the web shell's protocol event; the client settles
    // every pending request and the handlers in start() recover the same way.
    desktop()?.onEngineStopped?.((message) => this.engine.deliver(message));
    return new Promise((resolve) => {
      window.addEventListener('message', (e: MessageEvent) => {
        if (e.source !== window || e.data !== 'plumbline:engine-port' || !e.ports[0]) return;
        this.engine.connectPort(e.ports[0]);
        resolve();
      });
    });
  }

  async #guard(label: string, work: () => Promise<void>): Promise<boolean> {
    this.busy = label;
    try {
      await work();
      return true;
    } catch (err) {
      const text = err instanceof EngineRequestError ? err.message : `${label} failed: ${(err as Error).message}`;
      this.banner = { kind: 'error', text };
      return false;
    } finally {
      this.busy = null;
    }
  }

  async #recover(): Promise<void> {
    // After an engine restart: reopen the same generator and directions, keep strengths.
    const keep = { ...this.strengths };
    const names = Object.fromEntries(this.directions.map((d) => [d.id, d.name]));
    const ok = await this.#guard('Reloading the generator after the engine restarted', async () => {
      this.model = this.#modelPath ? await this.engine.request('model.open', { path: this.#modelPath }) : await this.engine.request('model.openDemo', {});
      const files = this.#directionFiles;
      this.#directionFiles = [];
      this.directions = [];
      for (const f of files) await this.#loadDirections(f);
      const byName = Object.fromEntries(this.directions.map((d) => [d.name, d.id]));
      const restored: Record<string, number> = {};
      for (const [oldId, s] of Object.entries(keep)) if (byName[names[oldId]]) restored[byName[names[oldId]]] = s;
      this.strengths = { ...Object.fromEntries(this.directions.map((d) => [d.id, 0])), ...restored };
    });
    if (ok && this.onRecover) await this.onRecover();
    if (ok) {
      this.banner = { kind: 'info', text: 'The engine was restarted and your generator, directions and slider settings were restored.' };
      await Promise.all([this.refreshGrid(), this.requestPreview()]);
    }
  }

  async openModel(path: string): Promise<void> {
    const ok = await this.#guard(`Opening ${path}`, async () => {
      const info = await this.engine.request('model.open', { path });
      this.model = info;
      this.#modelPath = path;
      this.#directionFiles = [];
      this.directions = [];
      this.strengths = {};
      this.history.clear();
      this.historyVersion++;
      this.psi = info.defaultPsi;
      if (info.demoDirections) await this.#loadDirections(info.demoDirections);
      if (info.assumptions.length) this.banner = { kind: 'warning', text: `Opened without everything spelled out: ${info.assumptions.join('; ')}.` };
      await desktop()?.addRecent(path);
    });
    if (ok) await Promise.all([this.refreshGrid(), this.requestPreview()]);
  }

  async openDirections(path: string): Promise<void> {
    const ok = await this.#guard(`Opening directions ${path}`, () => this.#loadDirections(path));
    if (ok) await this.requestPreview();
  }

  async #loadDirections(path: string): Promise<void> {
    const r = await this.engine.request('directions.open', { path });
    this.#directionFiles.push(path);
    this.directions = [...this.directions, ...r.directions];
    this.strengths = { ...this.strengths, ...Object.fromEntries(r.directions.map((d) => [d.id, 0])) };
  }

  async refreshGrid(): Promise<void> {
    if (!this.model) return;
    this.gridBusy = true;
    // Never ask for a page the engine's seed range does not hold.
    this.gridStart = gridPageStart(this.gridStart);
    const seeds = Array.from({ length: GRID_PAGE }, (_, i) => this.gridStart + i);
    try {
      const r = await this.engine.request('grid.render', { seeds, psi: this.psi });
      if (!r.cancelled) this.grid = r.images;
    } catch (err) {
      this.banner = { kind: 'error', text: (err as Error).message };
    } finally {
      this.gridBusy = false;
    }
  }

  snapshot(): Snapshot {
    return { seed: this.seed, strengths: { ...this.strengths } };
  }

  /** Live slider motion: updates the preview without making an undo step. */
  setStrength(id: string, value: number): void {
    if (!this.#gestureStart) this.#gestureStart = this.snapshot();
    this.strengths = { ...this.strengths, [id]: clampStrength(value) };
    this.scheduleSave();
    void this.requestPreview();
  }

  /** End of a gesture (pointer up, key press): one undo step for the whole motion. */
  commitStrength(id: string): void {
    const before = this.#gestureStart ?? this.snapshot();
    this.#gestureStart = null;
    const after = this.snapshot();
    if (before.strengths[id] === after.strengths[id]) return;
    const name = this.directions.find((d) => d.id === id)?.name ?? id;
    this.#record(`move ${name}`, before, after);
  }

  resetStrength(id: string): void {
    if (!this.strengths[id]) return;
    const before = this.snapshot();
    this.strengths = { ...this.strengths, [id]: 0 };
    this.#record('reset slider', before, this.snapshot());
    void this.requestPreview();
  }

  resetAll(): void {
    if (!this.edited) return;
    const before = this.snapshot();
    this.strengths = Object.fromEntries(Object.keys(this.strengths).map((k) => [k, 0]));
    this.#record('reset all sliders', before, this.snapshot());
    void this.requestPreview();
  }

  /** Puts a pinned reference on the workbench in place of a seed (sliders then edit it). */
  useReference(name: string | null): void {
    if (name === this.reference) return;
    this.reference = name;
    this.baseline = null;
    void this.requestPreview();
  }

  selectSeed(seed: number): void {
    if (this.reference !== null) {
      this.reference = null;
      this.baseline = null;
      if (seed === this.seed) {
        void this.requestPreview();
        return;
      }
    }
    if (seed === this.seed || !Number.isInteger(seed) || seed < 0 || seed > MAX_SEED) return;
    const before = this.snapshot();
    this.seed = seed;
    this.#record(`pick seed ${seed}`, before, this.snapshot());
    this.baseline = null;
    void this.requestPreview();
  }

  #record(label: string, before: Snapshot, after: Snapshot): void {
    this.history.push(label, before, after);
    this.historyVersion++;
    this.scheduleSave();
  }

  /**
   * Debounced autosave: at most 300 ms after the last change and never more than 1 s after the
   * first unsaved one, so a crash loses at most the last second of slider motion.
   */
  scheduleSave(): void {
    if (!this.onAutosave) return;
    const now = Date.now();
    if (!this.#saveTimer) this.#firstPending = now;
    if (this.#saveTimer) clearTimeout(this.#saveTimer);
    const wait = Math.max(0, Math.min(300, 1000 - (now - this.#firstPending)));
    this.#saveTimer = setTimeout(() => void this.saveNow(), wait);
  }

  async saveNow(): Promise<void> {
    if (this.#saveTimer) clearTimeout(this.#saveTimer);
    this.#saveTimer = null;
    if (!this.onAutosave) return;
    const byName = Object.fromEntries(this.directions.map((d) => [d.id, d.name]));
    const strengths = Object.fromEntries(Object.entries(this.strengths).filter(([id, v]) => v !== 0 && byName[id]).map(([id, v]) => [byName[id], v]));
    try {
      this.lastSaved = await this.onAutosave({ seed: this.seed, psi: this.psi, strengths, pinned: this.pinned, tags: this.tags });
    } catch (err) {
      this.banner = { kind: 'error', text: `Autosave failed: ${(err as Error).message}. Your work is still here; try again or open the project elsewhere.` };
    }
  }

  /** Applies saved interface state (strengths are stored by direction name, ids change per session). */
  restoreUi(ui: { seed: number; psi: number; strengths: Record<string, number>; pinned: number[]; tags: Record<string, 'has' | 'lacks'> }): void {
    const byName = Object.fromEntries(this.directions.map((d) => [d.name, d.id]));
    this.seed = ui.seed;
    this.psi = ui.psi;
    this.pinned = [...ui.pinned];
    this.tags = { ...ui.tags };
    const next = Object.fromEntries(this.directions.map((d) => [d.id, 0]));
    for (const [name, v] of Object.entries(ui.strengths)) if (byName[name]) next[byName[name]] = v;
    this.strengths = next;
    this.baseline = null;
  }

  togglePin(seed = this.seed): void {
    this.pinned = this.pinned.includes(seed) ? this.pinned.filter((s) => s !== seed) : [...this.pinned, seed].sort((a, b) => a - b);
    this.scheduleSave();
  }

  setTag(seed: number, tag: 'has' | 'lacks' | null): void {
    const next = { ...this.tags };
    if (tag) next[String(seed)] = tag;
    else delete next[String(seed)];
    this.tags = next;
    this.scheduleSave();
  }

  undo(): void {
    const e = this.history.undo();
    if (e) this.#restore(e.before);
  }

  redo(): void {
    const e = this.history.redo();
    if (e) this.#restore(e.after);
  }

  #restore(s: Snapshot): void {
    this.historyVersion++;
    if (s.seed !== this.seed) this.baseline = null;
    this.seed = s.seed;
    this.strengths = { ...this.strengths, ...s.strengths };
    void this.requestPreview();
  }

  setPsi(psi: number): void {
    this.psi = Math.min(1.5, Math.max(0, psi));
    this.scheduleSave();
    this.baseline = null;
    void this.requestPreview();
  }

  async pageGrid(delta: number): Promise<void> {
    this.gridStart = Math.min(LAST_PAGE_START, Math.max(0, this.gridStart + delta * GRID_PAGE));
    await this.refreshGrid();
  }

  /** "Go to seed": shows the seed's grid page and picks it (callers check it with seedProblem first). */
  async goToSeed(seed: number): Promise<void> {
    if (!Number.isInteger(seed) || seed < 0 || seed > MAX_SEED) return;
    this.gridStart = gridPageStart(seed);
    this.selectSeed(seed);
    await this.refreshGrid();
  }

  get lastPage(): boolean {
    return this.gridStart >= LAST_PAGE_START;
  }

  /** Client-side coalescing on top of the engine's: at most one preview in flight. */
  async requestPreview(): Promise<void> {
    if (!this.model) return;
    if (this.#previewInFlight) {
      this.#previewDirty = true;
      return;
    }
    this.#previewInFlight = true;
    try {
      do {
        this.#previewDirty = false;
        const seed = this.seed;
        const reference = this.reference ?? undefined;
        const strengths = { ...this.strengths };
        const edits = Object.entries(strengths).filter(([, s]) => s !== 0).map(([direction, strength]) => ({ direction, strength }));
        const key = (reference ? `ref:${reference}|` : '') + previewKey(seed, this.psi, strengths);
        const r = await this.engine.request('preview.render', { seed, psi: this.psi, edits, reference });
        if (r.superseded) continue;
        this.preview = r.image;
        this.previewKey = key;
        this.renderMillis = r.millis;
        this.attributes = r.attributes;
        if (edits.length === 0) this.baseline = r.image;
        else if (!this.baseline) {
          const b = await this.engine.request('preview.render', { seed, psi: this.psi, edits: [], reference });
          if (!b.superseded) this.baseline = b.image;
        }
      } while (this.#previewDirty);
    } catch (err) {
      if (!(err instanceof EngineRequestError && err.code === 'engine-stopped')) this.banner = { kind: 'error', text: (err as Error).message };
    } finally {
      this.#previewInFlight = false;
    }
  }

  toggleTheme(): void {
    this.theme = this.theme === 'dark' ? 'light' : 'dark';
    document.documentElement.dataset.theme = this.theme;
    void desktop()?.setSetting('theme', this.theme);
  }
}

export function clampStrength(v: number): number {
  if (!Number.isFinite(v)) return 0;
  return Math.round(Math.min(STRENGTH_LIMIT, Math.max(-STRENGTH_LIMIT, v)) * 100) / 100;
}

export function previewKey(seed: number, psi: number, strengths: Record<string, number>): string {
  const parts = Object.entries(strengths).filter(([, s]) => s !== 0).sort(([a], [b]) => a.localeCompare(b)).map(([k, s]) => `${k}=${s}`);
  return `${seed}|${psi}|${parts.join(',')}`;
}
