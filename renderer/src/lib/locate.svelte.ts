// State and intents of "Start from an image…": read a PNG or JPEG the user picked or dropped,
// run the engine's locate job with live progress and best-so-far previews, cancel, show
// reference / match / difference, pin the result in the project as a named reference, and put it
// on the workbench in place of a seed.
import type { ReferenceInfo, Result, WireImage } from '../../../app/protocol/messages.ts';
import { EngineRequestError } from './engine.ts';
import type { Studio } from './studio.svelte.ts';
import { budgetProblem } from './fields.ts';

type Found = Extract<Result<'locate.run'>, { cancelled: false }>;

/** Files cross to the engine as one message; the web shell's WebSocket takes at most 16 MiB, so
 * the app accepts 15 MiB (the command line takes up to the engine's 64 MiB cap). */
const MAX_FILE_BYTES = 15 * 1024 * 1024;

export class Locate {
  open = $state(false);
  fileName = $state<string | null>(null);
  bytes = $state.raw<Uint8Array | null>(null);
  /** The evaluation budget as typed; checked beside the field, sent only when valid. */
  budgetText = $state('3000');
  /** What was typed as a number (NaN when it is not one; the check below names the problem). */
  budget = $derived(/^\s*-?\d+(\.\d+)?(e\d+)?\s*$/i.test(this.budgetText) ? Number(this.budgetText) : NaN);
  budgetProblem = $derived(budgetProblem(this.budget));
  space = $state<'w' | 'w+'>('w');
  running = $state(false);
  progress = $state<{ done: number; total: number; ssim: number; deltaE: number } | null>(null);
  best = $state.raw<WireImage | null>(null);
  result = $state.raw<Found | null>(null);
  error = $state<string | null>(null);
  cancelled = $state(false);
  pinName = $state('');
  references = $state.raw<ReferenceInfo[]>([]);
  #requestId = 0;

  constructor(readonly studio: Studio) {
    studio.engine.on('locate.preview', (d) => {
      if (d.requestId !== this.#requestId) return;
      this.best = d.image;
      this.progress = { done: d.done, total: d.total, ssim: d.ssim, deltaE: d.deltaE };
    });
  }

  show(): void {
    this.open = true;
    this.error = null;
  }

  close(): void {
    if (this.running) void this.cancel();
    this.open = false;
  }

  async choose(file: File): Promise<void> {
    this.error = null;
    this.result = null;
    this.best = null;
    this.progress = null;
    this.cancelled = false;
    if (file.size > MAX_FILE_BYTES) {
      this.error = `${file.name}: the file is ${file.size.toLocaleString('en')} bytes, over the ${MAX_FILE_BYTES.toLocaleString('en')} the app accepts; use plumbline locate for larger files`;
      return;
    }
    this.fileName = file.name;
    this.bytes = new Uint8Array(await file.arrayBuffer());
    this.pinName = file.name.replace(/\.[^.]+$/, '').replace(/[^A-Za-z0-9_.-]+/g, '_').replace(/^[.]+/, '').slice(0, 120) || 'reference';
  }

  async run(): Promise<void> {
    if (!this.bytes || !this.fileName || this.running || this.budgetProblem) return;
    this.running = true;
    this.cancelled = false;
    this.result = null;
    this.best = null;
    this.error = null;
    this.progress = { done: 0, total: this.budget, ssim: 0, deltaE: 0 };
    try {
      const pending = this.studio.engine.request('locate.run', { image: this.bytes, fileName: this.fileName, budget: this.budget, space: this.space, seed: 1 }, (done, total) => {
        if (this.progress) this.progress = { ...this.progress, done, total };
      });
      this.#requestId = this.studio.engine.lastRequestId;
      const r = await pending;
      if (r.cancelled) this.cancelled = true;
      else this.result = r;
    } catch (err) {
      this.error = err instanceof EngineRequestError ? err.message : `Locating failed: ${(err as Error).message}`;
    } finally {
      this.running = false;
    }
  }

  async cancel(): Promise<void> {
    if (!this.running) return;
    await this.studio.engine.request('job.cancel', { requestId: this.#requestId }).catch(() => undefined);
  }

  async pin(): Promise<boolean> {
    if (!this.result) return false;
    try {
      const info = await this.studio.engine.request('reference.pin', { name: this.pinName });
      await this.refresh();
      this.studio.useReference(info.name);
      this.open = false;
      return true;
    } catch (err) {
      this.error = err instanceof EngineRequestError ? err.message : (err as Error).message;
      return false;
    }
  }

  async refresh(): Promise<void> {
    try {
      this.references = (await this.studio.engine.request('reference.list', {})).references;
    } catch {
      this.references = [];
    }
  }
}
