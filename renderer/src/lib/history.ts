// An undo/redo stack of labelled snapshots. Pushing after an undo discards the redo branch,
// as users of creative tools expect. Pure TypeScript so it is unit-tested directly.
export interface HistoryEntry<T> {
  label: string;
  before: T;
  after: T;
}

export class History<T> {
  #done: HistoryEntry<T>[] = [];
  #undone: HistoryEntry<T>[] = [];
  constructor(readonly limit = 200) {}

  push(label: string, before: T, after: T): void {
    this.#done.push({ label, before, after });
    if (this.#done.length > this.limit) this.#done.shift();
    this.#undone = [];
  }
  undo(): HistoryEntry<T> | null {
    const e = this.#done.pop();
    if (!e) return null;
    this.#undone.push(e);
    return e;
  }
  redo(): HistoryEntry<T> | null {
    const e = this.#undone.pop();
    if (!e) return null;
    this.#done.push(e);
    return e;
  }
  get canUndo(): boolean {
    return this.#done.length > 0;
  }
  get canRedo(): boolean {
    return this.#undone.length > 0;
  }
  get undoLabel(): string | null {
    return this.#done.at(-1)?.label ?? null;
  }
  get redoLabel(): string | null {
    return this.#undone.at(-1)?.label ?? null;
  }
  clear(): void {
    this.#done = [];
    this.#undone = [];
  }
}
