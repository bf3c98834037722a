// What the Electron preload exposes (window.plumbline). In the web shell it is absent and the
// interface falls back to typed paths and a WebSocket.
export interface DesktopBridge {
  platform: 'electron';
  chooseFile(kind: 'generator' | 'directions' | 'project' | 'pack' | 'pack-save' | 'folder'): Promise<string | null>;
  /** Prints a self-contained HTML report to PDF (Chromium's print-to-PDF) and saves it where the user picks; the saved path or null. */
  printPdf?(html: string, name: string): Promise<string | null>;
  pathForFile(file: File): string;
  onMenu(listener: (command: string, arg?: string) => void): () => void;
  /** Main's engine.stopped protocol event (Electron only: the MessagePort cannot say its engine died). */
  onEngineStopped?(listener: (message: unknown) => void): () => void;
  recent(): Promise<string[]>;
  addRecent(path: string): Promise<void>;
  getSetting(key: 'theme' | 'threads' | 'farmUrl'): Promise<unknown>;
  setSetting(key: 'theme' | 'threads' | 'farmUrl', value: unknown): Promise<void>;
  /** Secrets sealed with the OS keychain (Electron safeStorage); absent where it is unavailable. */
  getSecret?(key: 'farmPassword'): Promise<string | null>;
  setSecret?(key: 'farmPassword', value: string): Promise<void>;
}

export function desktop(): DesktopBridge | null {
  return (globalThis as { plumbline?: DesktopBridge }).plumbline ?? null;
}
