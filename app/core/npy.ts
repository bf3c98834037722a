// NumPy .npy reading and writing (format versions 1.0, 2.0 and 3.0; NumPy's
// `numpy/lib/format.py` docstring is the specification). The reader is strict: it trusts neither
// the header nor the file size, refuses pickled objects and says exactly what is wrong.
import { PlumblineError } from './errors.ts';

const MAGIC = [0x93, 0x4e, 0x55, 0x4d, 0x50, 0x59]; // "\x93NUMPY"
/** NumPy's own reader refuses headers longer than this by default (`max_header_size`). */
export const MAX_HEADER_CHARS = 10_000;
const ALIGN = 64;

export type NpyDtype = '<f4' | '<f8' | '>f4' | '>f8' | '<f2' | '<i4' | '<i8' | '|u1' | '<u2' | '<i2' | '|i1' | '|b1';

export interface NpyArray {
  shape: number[];
  /** Values converted to float32 in C order. */
  data: Float32Array;
  /** dtype as written in the file. */
  descr: string;
}

const ITEM_SIZE: Record<string, number> = { f4: 4, f8: 8, f2: 2, i4: 4, i8: 8, u1: 1, i1: 1, u2: 2, i2: 2, b1: 1, u4: 4 };

export function encodeNpy(data: Float32Array, shape: number[]): Uint8Array {
  const count = shape.reduce((a, b) => a * b, 1);
  if (count !== data.length) throw new PlumblineError('npy-shape', `cannot write .npy: ${data.length} values do not fill shape [${shape.join(', ')}]`);
  const shapeText = shape.length === 1 ? `(${shape[0]},)` : `(${shape.join(', ')})`;
  let header = `{'descr': '<f4', 'fortran_order': False, 'shape': ${shapeText}, }`;
  // Pad with spaces so magic + version + length field + header (ending in \n) is a multiple of 64.
  const fixed = MAGIC.length + 2 + 2;
  const pad = ALIGN - ((fixed + header.length + 1) % ALIGN);
  header = header + ' '.repeat(pad % ALIGN) + '\n';
  const out = new Uint8Array(fixed + header.length + data.byteLength);
  out.set(MAGIC, 0);
  out[6] = 1;
  out[7] = 0;
  new DataView(out.buffer).setUint16(8, header.length, true);
  for (let i = 0; i < header.length; i++) out[10 + i] = header.charCodeAt(i);
  const body = new DataView(out.buffer, fixed + header.length);
  for (let i = 0; i < data.length; i++) body.setFloat32(i * 4, data[i], true);
  return out;
}

export function decodeNpy(bytes: Uint8Array, fileName = 'the .npy file'): NpyArray {
  const fail = (problem: string): never => {
    throw new PlumblineError('npy-invalid', `${fileName}: ${problem}`, { file: fileName });
  };
  if (bytes.length < 10 || !MAGIC.every((b, i) => bytes[i] === b)) fail('not a NumPy .npy file (the magic string \\x93NUMPY is missing)');
  const major = bytes[6];
  const minor = bytes[7];
  const view = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
  let headerLength: number;
  let headerStart: number;
  if (major === 1 && minor === 0) {
    headerLength = view.getUint16(8, true);
    headerStart = 10;
  } else if ((major === 2 || major === 3) && minor === 0) {
    if (bytes.length < 12) fail('truncated before the header length');
    headerLength = view.getUint32(8, true);
    headerStart = 12;
  } else {
    return fail(`unsupported .npy format version ${major}.${minor} (expected 1.0, 2.0 or 3.0)`);
  }
  if (headerLength > MAX_HEADER_CHARS) fail(`header claims ${headerLength} bytes, more than the ${MAX_HEADER_CHARS} allowed`);
  if (headerStart + headerLength > bytes.length) fail(`header claims ${headerLength} bytes but the file ends after ${bytes.length - headerStart}`);
  const headerBytes = bytes.subarray(headerStart, headerStart + headerLength);
  const header = major === 3 ? new TextDecoder('utf-8', { fatal: true }).decode(headerBytes) : String.fromCharCode(...headerBytes);
  const dict = parseHeader(header, fail);

  const descr = dict.descr;
  if (descr === undefined || typeof descr !== 'string') return fail(`header has no string 'descr' (structured or object dtypes are not supported): ${header.trim()}`);
  if (descr.includes('O')) fail(`dtype ${descr} holds pickled Python objects, which are refused for safety`);
  if (dict.fortran_order !== false) {
    fail(dict.fortran_order === true ? 'Fortran-ordered arrays are not supported; save with np.ascontiguousarray first' : "header 'fortran_order' is not a boolean");
  }
  if (!Array.isArray(dict.shape)) return fail("header 'shape' is not a tuple");
  const shape = dict.shape as number[];
  if (shape.length > 8) fail(`shape has ${shape.length} dimensions (at most 8 supported)`);
  const m = /^([<>|=])([fiub])(\d)$/.exec(descr);
  if (!m) return fail(`unsupported dtype ${descr} (expected a float, integer or bool dtype such as '<f4')`);
  const [, order, kind, sizeText] = m;
  const itemSize = Number(sizeText);
  const key = `${kind}${itemSize}`;
  if (ITEM_SIZE[key] !== itemSize || key === 'u8') fail(`unsupported dtype ${descr}`);
  const littleEndian = order !== '>';
  const count = shape.reduce((a, b) => a * b, 1);
  const dataStart = headerStart + headerLength;
  const expectedBytes = count * itemSize;
  if (!Number.isSafeInteger(expectedBytes) || count > 268_435_456) fail(`shape [${shape.join(', ')}] is too large`);
  const available = bytes.length - dataStart;
  if (available !== expectedBytes) {
    fail(`header says shape [${shape.join(', ')}] of ${descr} (${expectedBytes} data bytes) but the file holds ${available}`);
  }
  const data = new Float32Array(count);
  const body = new DataView(bytes.buffer, bytes.byteOffset + dataStart, expectedBytes);
  for (let i = 0; i < count; i++) data[i] = readItem(body, i * itemSize, kind, itemSize, littleEndian);
  return { shape, data, descr };
}

function readItem(v: DataView, at: number, kind: string, size: number, le: boolean): number {
  if (kind === 'f') {
    if (size === 4) return v.getFloat32(at, le);
    if (size === 8) return v.getFloat64(at, le);
    return halfToFloat(v.getUint16(at, le));
  }
  if (kind === 'b') return v.getUint8(at) ? 1 : 0;
  if (kind === 'u') return size === 1 ? v.getUint8(at) : size === 2 ? v.getUint16(at, le) : v.getUint32(at, le);
  if (size === 1) return v.getInt8(at);
  if (size === 2) return v.getInt16(at, le);
  if (size === 4) return v.getInt32(at, le);
  return Number(v.getBigInt64(at, le));
}

function halfToFloat(h: number): number {
  const s = h & 0x8000 ? -1 : 1;
  const e = (h >> 10) & 0x1f;
  const f = h & 0x3ff;
  if (e === 0) return s * 2 ** -14 * (f / 1024);
  if (e === 31) return f ? NaN : s * Infinity;
  return s * 2 ** (e - 15) * (1 + f / 1024);
}

type HeaderValue = string | boolean | number[];

/** Parses the restricted Python-literal dict NumPy writes; anything else is refused. */
function parseHeader(text: string, fail: (p: string) => never): Record<string, HeaderValue> {
  const src = text.trim();
  let i = 0;
  const ws = () => {
    while (i < src.length && /\s/.test(src[i])) i++;
  };
  const expect = (ch: string) => {
    ws();
    if (src[i] !== ch) fail(`malformed header near character ${i}: expected '${ch}' in ${JSON.stringify(src.slice(0, 120))}`);
    i++;
  };
  const str = (): string => {
    ws();
    const q = src[i];
    if (q !== "'" && q !== '"') fail(`malformed header: expected a quoted string at ${i}`);
    const end = src.indexOf(q, i + 1);
    if (end < 0) fail('malformed header: unterminated string');
    const s = src.slice(i + 1, end);
    i = end + 1;
    return s;
  };
  const value = (): HeaderValue => {
    ws();
    if (src[i] === "'" || src[i] === '"') return str();
    if (src.startsWith('True', i)) { i += 4; return true; }
    if (src.startsWith('False', i)) { i += 5; return false; }
    if (src[i] === '(') {
      i++;
      const dims: number[] = [];
      for (;;) {
        ws();
        if (src[i] === ')') { i++; return dims; }
        const m = /^\d+/.exec(src.slice(i));
        if (!m) fail(`malformed shape in header at ${i}`);
        const n = Number(m![0]);
        if (!Number.isSafeInteger(n)) fail('shape dimension too large');
        dims.push(n);
        i += m![0].length;
        ws();
        if (src[i] === ',') i++;
        else if (src[i] !== ')') fail(`malformed shape in header at ${i}`);
      }
    }
    if (src[i] === '[') fail("structured dtypes (a list in 'descr') are not supported");
    return fail(`unsupported value in header at ${i}`);
  };
  expect('{');
  const out: Record<string, HeaderValue> = {};
  for (;;) {
    ws();
    if (src[i] === '}') { i++; break; }
    const key = str();
    expect(':');
    if (key in out) fail(`header repeats key '${key}'`);
    out[key] = value();
    ws();
    if (src[i] === ',') i++;
    else if (src[i] !== '}') fail(`malformed header at ${i}`);
  }
  ws();
  if (i !== src.length) fail('trailing characters after the header dict');
  const keys = Object.keys(out).sort().join(',');
  if (keys !== 'descr,fortran_order,shape') fail(`header keys must be exactly descr, fortran_order, shape; found ${Object.keys(out).join(', ') || 'none'}`);
  return out;
}
