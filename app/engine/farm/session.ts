// The engine's connection to a render farm, as the app uses it: set from the farm setting
// (address, password held in memory only), asked for status, and used by audit and variant-set
// jobs while connected. Without a connection, jobs run on this machine as before.
import type { Generator } from '../generator.ts';
import { Farm } from './coordinator.ts';
import { redact } from './connection.ts';
import type { RunRecord, WorkerRecord } from './protocol.ts';

export interface FarmStatus {
  connected: boolean;
  url: string | null;
  workers: WorkerRecord[];
  runs: RunRecord[];
}

export class FarmSession {
  #farm: Farm | null = null;
  #url: string | null = null;

  get farm(): Farm | null {
    return this.#farm;
  }

  async connect(url: string, password?: string): Promise<FarmStatus> {
    await this.disconnect();
    this.#farm = await Farm.connect(url, password);
    this.#url = redact(url);
    return this.status();
  }

  async disconnect(): Promise<FarmStatus> {
    const f = this.#farm;
    this.#farm = null;
    this.#url = null;
    await f?.close();
    return { connected: false, url: null, workers: [], runs: [] };
  }

  async status(): Promise<FarmStatus> {
    if (!this.#farm) return { connected: false, url: null, workers: [], runs: [] };
    return { connected: true, url: this.#url, workers: await this.#farm.workers(), runs: (await this.#farm.runs()).slice(-10) };
  }
}

/** Where workers find the loaded generator: its entry file, and a separate mapping network for a bare .onnx. */
export function modelLocation(gen: Generator): { modelPath: string; mappingPath?: string } {
  const files = gen.info.files;
  const bare = !files[0].toLowerCase().endsWith('.json');
  return { modelPath: files[0], mappingPath: bare && gen.info.hasMapping ? files[1] : undefined };
}
