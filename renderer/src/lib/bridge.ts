// What the Electron preload exposes (window.plumbline). In the web shell it is absent and the
// interface falls back to typed paths and a WebSocket.
export interface DesktopBridge {
  platform: 'electron';
  chooseFile(kind: 'generator' | 'directions' | 'project'): Promise<string | null>;
  pathForFile(file: File): string;
  onMenu(listener: (command: string, arg?: string) => void): () => void;
  onEngineStopped?(listener: (reason: string) => void): () => void;
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
