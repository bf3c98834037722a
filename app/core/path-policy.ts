// The one path policy for every file the engine reads or writes. Models, cards, packs and
// directions travel between studios, so no path in them is trusted:
//  - reads resolve real paths (symlinks included) and accept only regular files where a file is
//    expected (never a folder, FIFO, socket or device such as /dev/zero), under a size cap;
//  - paths written inside a model card are relative to the card's folder and must stay inside it;
//  - project writes stay inside the project folder, also through symlinked sub-folders;
//  - any other output goes only where the user chose: an absolute path from a dialog (desktop) or
//    an explicit output option (CLI, web shell), and an existing file is replaced only when the
//    user said so.
// Errors name the file and the rule; they never quote the file's content.
import { closeSync, constants, existsSync, fstatSync, lstatSync, mkdirSync, openSync, readSync, realpathSync, statSync, type Stats } from 'node:fs';
import { basename, dirname, isAbsolute, join, relative, resolve, sep } from 'node:path';
import { homedir, tmpdir } from 'node:os';
import { PlumblineError } from './errors.ts';

/** Size caps for reads, in bytes. Stated in docs/model-card.md; change them here. */
export const READ_LIMITS = {
  /** protobuf cannot encode a message over 2 GiB, so no single-file ONNX model is larger. */
  modelBytes: 2 ** 31 - 1,
  /** Cards, sidecars, recipes, projects, audits: hand-written JSON is kilobytes; 32 MiB is generous. */
  jsonBytes: 32 * 1024 * 1024,
  /** Direction arrays: 4,096 directions × 64 layers × 4,096 floats is 4 GiB; real sets are far smaller. */
  npyBytes: 1024 * 1024 * 1024,
  /** Packs: the archive reader's own total cap (PACK_LIMITS.totalBytes) plus headers. */
  packBytes: 600 * 1024 * 1024,
};

function kindOf(s: Stats): string {
  if (s.isDirectory()) return 'a folder';
  if (s.isFIFO()) return 'a named pipe (FIFO)';
  if (s.isSocket()) return 'a socket';
  if (s.isCharacterDevice() || s.isBlockDevice()) return 'a device';
  return 'not a regular file';
}

/** The real path of an existing regular file, or a clear error naming `path`. */
export function regularFile(path: string, what: string): { file: string; size: number } {
  const given = resolve(path);
  let real: string;
  try {
    real = realpathSync(given);
  } catch {
    throw new PlumblineError('file-missing', `${given}: ${what} not found`, { file: given });
  }
  const s = statSync(real);
  if (!s.isFile()) throw new PlumblineError('not-a-file', `${given}: ${what} is ${kindOf(s)}, not a file`, { file: given });
  return { file: real, size: s.size };
}

/**
 * Reads a whole regular file, refusing anything over `maxBytes`. The descriptor is opened
 * non-blocking and checked again after opening, so a FIFO swapped in after the first check can
 * neither hang the read nor pass as a file.
 */
export function readRegularFile(path: string, what: string, maxBytes: number): Uint8Array {
  const given = resolve(path);
  const { file, size } = regularFile(given, what);
  if (size > maxBytes) throw new PlumblineError('limit-exceeded', `${given}: ${what} is ${size} bytes, more than the ${maxBytes} allowed`, { file: given });
  const fd = openSync(file, constants.O_RDONLY | (constants.O_NONBLOCK ?? 0));
  try {
    const s = fstatSync(fd);
    if (!s.isFile()) throw new PlumblineError('not-a-file', `${given}: ${what} is ${kindOf(s)}, not a file`, { file: given });
    if (s.size > maxBytes) throw new PlumblineError('limit-exceeded', `${given}: ${what} is ${s.size} bytes, more than the ${maxBytes} allowed`, { file: given });
    const out = new Uint8Array(s.size);
    let at = 0;
    while (at < out.length) {
      const n = readSync(fd, out, at, out.length - at, at);
      if (n === 0) break;
      at += n;
    }
    return at === out.length ? out : out.subarray(0, at);
  } finally {
    closeSync(fd);
  }
}

export function readTextFile(path: string, what: string, maxBytes = READ_LIMITS.jsonBytes): string {
  return new TextDecoder().decode(readRegularFile(path, what, maxBytes));
}

/** True when `child` is `folder` itself or lies below it (both already resolved). */
export function isInside(folder: string, child: string): boolean {
  const rel = relative(folder, child);
  return rel === '' || (!rel.startsWith('..' + sep) && rel !== '..' && !isAbsolute(rel));
}

/** The deepest existing ancestor of `p` (or `p`), as a real path, plus the part that does not exist yet. */
function realExisting(p: string): string {
  let at = p;
  const rest: string[] = [];
  for (;;) {
    try {
      const real = realpathSync(at);
      return rest.length ? resolve(real, ...rest.reverse()) : real;
    } catch {
      const up = dirname(at);
      if (up === at) return p;
      rest.push(at.slice(up.length).replace(/^[\\/]+/, ''));
      at = up;
    }
  }
}

/**
 * A path written in a file (a card's `synthesis.file`, say) resolved against that file's folder.
 * It must be relative and must stay inside the folder, also after following symlinks.
 */
export function resolveInside(folder: string, written: string, what: string, declaredIn: string): string {
  if (written.includes('\0')) throw new PlumblineError('path-refused', `${declaredIn}: ${what} contains a NUL character`, { file: declaredIn });
  if (isAbsolute(written) || /^[A-Za-z]:[\\/]/.test(written) || written.startsWith('\\\\')) {
    throw new PlumblineError('path-refused', `${declaredIn}: ${what} '${written}' is an absolute path; paths in this file must be relative to its folder`, { file: declaredIn });
  }
  const base = resolve(folder);
  const target = resolve(base, written);
  if (!isInside(base, target) || !isInside(realExisting(base), realExisting(target))) {
    throw new PlumblineError('path-refused', `${declaredIn}: ${what} '${written}' leads outside the folder ${base}`, { file: declaredIn });
  }
  return target;
}

/**
 * A file inside a project folder, for reading or writing: `rel` must stay inside the project
 * lexically and after following symlinks of every existing part, and an existing target must be
 * a regular file (not a link to one elsewhere).
 */
export function projectFile(projectDir: string, rel: string): string {
  const base = resolve(projectDir);
  const target = resolveInside(base, rel, `file '${rel}'`, resolve(base, 'project.json'));
  try {
    const s = lstatSync(target);
    if (s.isSymbolicLink() || !s.isFile()) throw new PlumblineError('path-refused', `${target}: a project file must be a regular file inside the project, found ${s.isSymbolicLink() ? 'a symbolic link' : kindOf(s)}`, { file: target });
  } catch (err) {
    if (err instanceof PlumblineError) throw err;
  }
  return target;
}

/**
 * An output file the user chose (dialog or explicit option). Relative paths are refused in the
 * engine, which has no meaningful working folder; an existing file is replaced only with
 * `overwrite`, and never when it is a folder, link or device.
 */
export function chosenOutputFile(path: string, what: string, options: { overwrite?: boolean; relativeTo?: string } = {}): string {
  if (!isAbsolute(path) && !options.relativeTo) throw new PlumblineError('path-refused', `${path}: ${what} must be an absolute path chosen by the user (a dialog or an explicit output option)`, { file: path });
  const target = resolve(options.relativeTo ?? '/', path);
  const system = systemFolderProblem(target);
  if (system) throw new PlumblineError('path-refused', `${system}: ${what} is not written into the operating system's folders; choose a folder in your home or on a project drive`, { file: target });
  const parent = dirname(target);
  let ps: Stats;
  try {
    ps = statSync(parent);
  } catch {
    throw new PlumblineError('file-missing', `${parent}: the folder for ${what} does not exist`, { file: parent });
  }
  if (!ps.isDirectory()) throw new PlumblineError('not-a-file', `${parent}: the folder for ${what} is ${kindOf(ps)}`, { file: parent });
  let s: Stats | null = null;
  try {
    s = lstatSync(target);
  } catch {
    s = null;
  }
  if (s) {
    if (!s.isFile()) throw new PlumblineError('would-overwrite', `${target}: ${what} would replace ${s.isSymbolicLink() ? 'a symbolic link' : kindOf(s)}; choose another name`, { file: target });
    if (!options.overwrite) throw new PlumblineError('would-overwrite', `${target}: a file with this name exists; confirm replacing it (overwrite) or choose another name`, { file: target });
  }
  return target;
}

/** An output folder the user chose: absolute (or relative to the CLI's working folder), created if missing, never a file. */
export function chosenOutputFolder(path: string, what: string, options: { relativeTo?: string } = {}): string {
  if (!isAbsolute(path) && !options.relativeTo) throw new PlumblineError('path-refused', `${path}: ${what} must be an absolute path chosen by the user`, { file: path });
  const target = resolve(options.relativeTo ?? '/', path);
  const system = systemFolderProblem(target);
  if (system) throw new PlumblineError('path-refused', `${system}: ${what} is not written into the operating system's folders; choose a folder in your home or on a project drive`, { file: target });
  try {
    const s = statSync(target);
    if (!s.isDirectory()) throw new PlumblineError('not-a-file', `${target}: ${what} is ${s.isFile() ? 'a file' : kindOf(s)}, not a folder`, { file: target });
  } catch (err) {
    if (err instanceof PlumblineError) throw err;
    mkdirSync(target, { recursive: true });
  }
  return realpathSync(target);
}

/**
 * Folders no project may be made in, and no output written to, in or under: the operating system's own. Paths inside the
 * user's home or the temporary folder are allowed even where those live under one of these (macOS
 * keeps temporary folders under /var). From the Filesystem Hierarchy Standard 3.0 (Linux), Apple's
 * "File System Programming Guide" (macOS) and Windows' known folders.
 */
export const SYSTEM_FOLDERS = [
  '/', '/bin', '/boot', '/dev', '/etc', '/lib', '/lib32', '/lib64', '/libx32', '/opt', '/proc', '/root', '/run', '/sbin', '/srv', '/sys', '/usr', '/var', '/snap',
  '/System', '/Library', '/Applications', '/private', '/cores', '/Volumes',
  'C:\\Windows', 'C:\\Program Files', 'C:\\Program Files (x86)', 'C:\\ProgramData',
];

/** Whether `path` is `root` or lies under it; a filesystem root ('/', 'C:\\') matches only itself. */
const within = (path: string, root: string) => path === root || (dirname(root) !== root && path.startsWith(root + sep));

/** The real path of `path`'s nearest existing ancestor joined with the rest (symlinks resolved). */
function realish(path: string): string {
  let head = path;
  const rest: string[] = [];
  while (!existsSync(head) && dirname(head) !== head) {
    rest.unshift(basename(head));
    head = dirname(head);
  }
  try {
    return join(realpathSync(head), ...rest);
  } catch {
    return path;
  }
}

const safeRoots = () => [homedir(), tmpdir()].map((r) => realish(resolve(r)));

/** Whether `path` (resolved, links followed) is the user's home or temporary folder itself. */
export function isHomeOrTemp(path: string): boolean {
  return safeRoots().includes(realish(resolve(path)));
}

/**
 * Why nothing may be written at `path` because it is in or under a system folder, or null. Paths
 * inside the user's home or the temporary folder are allowed even where those live under a system
 * folder (macOS keeps temporary folders under /var; root's home is /root).
 */
export function systemFolderProblem(path: string): string | null {
  const dir = resolve(path);
  const real = realish(dir);
  if (safeRoots().some((r) => within(real, r) && real !== r)) return null;
  const system = SYSTEM_FOLDERS.find((f) => within(real, f) || within(dir, f));
  return system ? `${dir} is ${real === system || dir === system ? 'a system folder' : `inside the system folder ${system}`}` : null;
}
