// The web shell's folder browser: lists one folder at a time for the Open and New dialogs, so
// paths on the workstation need not be typed by hand. Only inside the user's home and the roots
// chosen when the shell was started (PLUMBLINE_BROWSE_ROOTS, separated by the platform's path
// delimiter); symbolic links are resolved first, so a link cannot lead out of them. Lists names
// only: it never reads or writes a file.
import { readdirSync, realpathSync, statSync } from 'node:fs';
import { homedir } from 'node:os';
import { delimiter, dirname, join, resolve, sep } from 'node:path';

export interface Listing {
  path: string;
  /** The folder above, or null at a root. */
  parent: string | null;
  roots: string[];
  entries: { name: string; folder: boolean }[];
}

/** Entries listed per folder at most: enough for any project tree, bounded for huge folders. */
export const MAX_ENTRIES = 2000;

export function browseRoots(env: NodeJS.ProcessEnv = process.env): string[] {
  const chosen = (env.PLUMBLINE_BROWSE_ROOTS ?? '').split(delimiter).filter(Boolean);
  const out: string[] = [];
  for (const r of [homedir(), ...chosen]) {
    try {
      const real = realpathSync(resolve(r));
      if (!out.includes(real)) out.push(real);
    } catch {
      // A root that does not exist is left out.
    }
  }
  return out;
}

const inside = (path: string, root: string) => path === root || path.startsWith(root.endsWith(sep) ? root : root + sep);

export function listFolder(path: string | null, roots: string[]): Listing {
  const target = path ? resolve(path) : roots[0];
  let real: string;
  try {
    real = realpathSync(target);
  } catch {
    throw new Error(`${target}: no such folder`);
  }
  const root = roots.find((r) => inside(real, r));
  if (!root) throw new Error(`${target} is outside the folders this web shell may show (${roots.join(', ')})`);
  if (!statSync(real).isDirectory()) throw new Error(`${target} is not a folder`);
  const entries = readdirSync(real, { withFileTypes: true })
    .filter((e) => !e.name.startsWith('.'))
    .slice(0, MAX_ENTRIES)
    .map((e) => {
      let folder = e.isDirectory();
      if (e.isSymbolicLink()) {
        try {
          folder = statSync(join(real, e.name)).isDirectory();
        } catch {
          folder = false;
        }
      }
      return { name: e.name, folder };
    })
    .sort((a, b) => Number(b.folder) - Number(a.folder) || a.name.localeCompare(b.name));
  return { path: real, parent: real === root ? null : dirname(real), roots, entries };
}
