// The engine's state, one per process (and one per CLI command): the open generator, the
// direction registry (loaded, discovered, kept) and the open project. Handlers and the CLI work
// through it, so a direction's σ, its edit and its saving to the project happen in one place.
import { FarmSession } from './farm/session.ts';
import { dirname, join, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';
import { PlumblineError } from '../core/errors.ts';
import type { Direction } from '../core/directions.ts';
import { directionNameKey } from '../protocol/names.ts';
import { readDirectionSet } from './direction-sources.ts';
import { directionEdit, type EditVector } from '../core/latent.ts';
import { holderForWire, type DirectionInfo, type Params, type Outcome } from '../protocol/messages.ts';
import { Generator } from './generator.ts';
import { defaultThreads } from './sessions.ts';
import { Project, vectorHash } from './project.ts';
import { DefinedAttributeStore } from './defined-attributes.ts';

/** The bundled demo generator's card (PLUMBLINE_RESOURCES overrides where resources live, as in a packaged app). */
export function demoCardPath(): string {
  const fromEnv = process.env.PLUMBLINE_RESOURCES;
  const root = fromEnv ? resolve(fromEnv) : resolve(dirname(fileURLToPath(import.meta.url)), '..', '..', 'resources');
  return join(root, 'demo', 'sigil.card.json');
}

export interface LoadedDirection extends Direction {
  id: string;
  /** One strength unit in latent units (Generator.sigmaOf). */
  sigma: number;
  /** Candidates from discovery stay unkept until the user keeps them. */
  kept: boolean;
}

export class Workspace {
  readonly threads: number;
  /** The render farm audits and variant sets go to while connected (farm.connect); none by default. */
  readonly farm = new FarmSession();
  #generator: Generator | null = null;
  #directions = new Map<string, LoadedDirection>();
  #nextDirection = 1;
  #project: Project | null = null;
  /** Where each unkept candidate is kept in the project (candidates/<key>.*). */
  #candidateKeys = new Map<string, string>();
  /** Attributes the lead defined (the project's, or this session's without a project). */
  readonly definedAttributes = new DefinedAttributeStore();

  constructor(options: { threads?: number } = {}) {
    this.threads = options.threads ?? defaultThreads();
  }

  get generator(): Generator | null {
    return this.#generator;
  }

  requireGenerator(): Generator {
    if (!this.#generator) throw new PlumblineError('no-model', 'no generator is open; open one first (the demo loads with model.openDemo)');
    return this.#generator;
  }

  /** The open project; `why` completes "… needs an open project". */
  requireProject(why: string): Project {
    if (!this.#project) throw new PlumblineError('bad-request', `${why} needs an open project`);
    return this.#project;
  }

  get project(): Project | null {
    return this.#project;
  }

  /** Loads a generator, releasing the previous one only once the new one is ready. */
  async openModel(path: string, mappingPath?: string) {
    const next = await Generator.open(path, { threads: this.threads, mappingPath });
    const previous = this.#generator;
    this.#generator = next;
    this.#directions.clear();
    this.definedAttributes.clearSession();
    if (previous) await previous.dispose();
    return next.info;
  }

  /** Reads a directions file (.npy with an optional .json sidecar, or the sidecar itself). */
  openDirections(path: string): Outcome<'directions.open'> {
    const gen = this.requireGenerator();
    // Through the path policy: regular files only, caps, everything checked before anything registers.
    const { file: dataFile, directions: dirs } = readDirectionSet(path, gen.layout);
    const loaded = dirs.map((d) => this.register(d, true));
    // Into the open project only from the window that holds it: another tab of the web shell (or
    // a read-only window) opens the file to look at, and the project stays as its holder left it.
    if (!this.#project?.readOnlyHere) for (const d of loaded) this.save(d);
    return { file: dataFile, directions: loaded.map((d) => this.info(d)) };
  }

  /** Adds a direction with its σ; a kept direction replaces the kept one of the same name. */
  register(d: Direction, kept: boolean): LoadedDirection {
    const gen = this.requireGenerator();
    const existing = this.kept().find((x) => kept && x.name === d.name);
    const entry: LoadedDirection = { ...d, id: existing?.id ?? `d${this.#nextDirection++}`, sigma: gen.sigmaOf(d.vector, d.layers), kept };
    this.#directions.set(entry.id, entry);
    return entry;
  }

  /** By id, or by name. */
  direction(id: string): LoadedDirection {
    const d = this.#directions.get(id) ?? [...this.#directions.values()].find((x) => x.name === id);
    if (!d) throw new PlumblineError('bad-request', `unknown direction '${id}'; loaded: ${[...this.#directions.values()].map((x) => x.name).join(', ') || 'none'}`);
    return d;
  }

  kept(): LoadedDirection[] {
    return [...this.#directions.values()].filter((d) => d.kept);
  }

  keep(id: string, name: string): LoadedDirection {
    const d = this.direction(id);
    // Names become file names; 'Crest' and 'crest' are one file on macOS and Windows.
    const taken = this.kept().find((x) => directionNameKey(x.name) === directionNameKey(name) && x.id !== d.id);
    if (taken) throw new PlumblineError('bad-request', `a kept direction is already named '${taken.name}' (names are compared ignoring case)`);
    const before = { name: d.name, kept: d.kept };
    d.name = name;
    d.kept = true;
    try {
      this.save(d);
    } catch (err) {
      Object.assign(d, before);
      throw err;
    }
    this.#forgetCandidate(id);
    return d;
  }

  /**
   * Keeps a discovery candidate in the project's candidates/ until it is kept or discarded, so a
   * reload or a crash does not lose it (nothing is written into a read-only project).
   */
  saveCandidate(d: LoadedDirection, strip: { seeds: number[]; strengths: number[]; images: { width: number; height: number; rgba: Uint8Array }[] }): void {
    if (!this.#project || this.#project.readOnlyHere) return;
    const key = `${new Date().toISOString().replace(/[^0-9]/g, '')}-${this.#candidateKeys.size + 1}`;
    this.#project.saveCandidate(key, d, this.requireGenerator().layout.space, strip);
    this.#candidateKeys.set(d.id, key);
  }

  #forgetCandidate(id: string): void {
    const key = this.#candidateKeys.get(id);
    if (key && this.#project && !this.#project.readOnlyHere) this.#project.removeCandidate(key);
    this.#candidateKeys.delete(id);
  }

  /** Drops unkept candidates, here and in the project. */
  discard(ids: string[]): number {
    let n = 0;
    for (const id of ids) {
      const d = this.#directions.get(id);
      if (!d || d.kept) continue;
      this.#directions.delete(id);
      this.#forgetCandidate(id);
      n++;
    }
    return n;
  }

  /** Renames a kept direction (in the project too, where it has no history yet). */
  rename(id: string, name: string): LoadedDirection {
    const d = this.direction(id);
    // Names become file names; compared ignoring case as keep() does.
    const taken = this.kept().find((x) => directionNameKey(x.name) === directionNameKey(name) && x.id !== d.id);
    if (taken) throw new PlumblineError('bad-request', `a kept direction is already named '${taken.name}' (names are compared ignoring case)`);
    if (d.kept && this.#project?.doc.directions.some((x) => x.name === d.name)) this.#project.renameDirection(d.name, name);
    d.name = name;
    return d;
  }

  /** Takes a kept direction out (its project files move to directions/deleted/). */
  remove(id: string): void {
    const d = this.direction(id);
    if (this.#project?.doc.directions.some((x) => x.name === d.name)) this.#project.deleteDirection(d.name);
    this.#directions.delete(d.id);
  }

  /** `base`, or base2, base3… if a kept direction already has that name. */
  uniqueName(base: string): string {
    let name = base;
    for (let k = 2; this.kept().some((x) => directionNameKey(x.name) === directionNameKey(name)); k++) name = `${base}${k}`;
    return name;
  }

  /** Slider settings as latent edits (strength in σ units of each direction). */
  edits(list: { direction: string; strength: number }[]): EditVector[] {
    return list.map((e) => directionEdit(this.direction(e.direction), e.strength));
  }

  /** Writes a kept direction into the open project, if there is one. */
  save(d: LoadedDirection): void {
    if (d.kept) this.#project?.saveDirection(d, this.requireGenerator().layout.space);
  }

  info(d: LoadedDirection): DirectionInfo {
    return {
      id: d.id,
      name: d.name,
      target: d.target,
      layers: d.layers,
      sigma: d.sigma,
      notes: d.notes,
      method: d.method,
      source: d.source,
      kept: d.kept,
      signOff: this.#project ? this.#project.signOff(d.name, vectorHash(d.vector, d.layers)) : null,
    };
  }

  /** Opens (or creates) a project folder for this generator. */
  openProject(p: Params<'project.open'>): Outcome<'project.open'> {
    const gen = this.requireGenerator();
    const opened = Project.open(p.path, p.create, { name: gen.info.name, fingerprint: gen.info.fingerprint });
    const lock = p.session ? opened.lock(p.session) : null;
    // A second tab of this same engine on a project it already holds keeps the writable instance.
    const project = lock?.readOnly && this.#project?.dir === opened.dir ? this.#project : opened;
    this.#project = project;
    const created = p.create && project.doc.directions.length === 0;
    if (project !== opened) {
      // Another tab of this engine holds the project: share its directions as they are (reloading
      // them would give them new ids under the holder's feet).
    } else if (created) {
      // A new project starts with the directions already on the workbench.
      for (const d of this.kept()) this.save(d);
    } else {
      for (const d of this.kept()) this.#directions.delete(d.id);
      for (const d of project.loadDirections(gen.layout)) this.register(d, true);
    }
    // Candidates left in the project come back (unkept); the same ones already here are not doubled.
    const candidates: Outcome<'project.open'>['candidates'] = [];
    for (const c of project.loadCandidates(gen.layout)) {
      let id = [...this.#candidateKeys].find(([, k]) => k === c.key)?.[0];
      if (!id || !this.#directions.has(id)) {
        id = this.register(c.direction, false).id;
        this.#candidateKeys.set(id, c.key);
      }
      candidates.push({ direction: this.info(this.direction(id)), strip: c.strip.images, stripSeeds: c.strip.seeds, stripStrengths: c.strip.strengths });
    }
    const fingerprint = project.doc.generator?.fingerprint ?? null;
    return {
      path: project.dir,
      name: project.doc.name,
      generatorFingerprint: fingerprint,
      generatorMatches: fingerprint === gen.info.fingerprint,
      directions: this.kept().map((d) => this.info(d)),
      audits: project.audits(),
      ui: project.doc.ui,
      refused: [...project.refused],
      readOnly: lock?.readOnly ?? false,
      lockHolder: holderForWire(lock?.holder ?? null),
      candidates,
    };
  }

  async dispose(): Promise<void> {
    await this.farm.disconnect();
    await this.#generator?.dispose();
    this.#generator = null;
  }
}
