// .npy reader and writer. External reference: the byte layout NumPy 2.4.6 writes for
// np.save(np.array([1,2,3], dtype='<f4')) (METHODS §7.1, recorded from NumPy), and the format
// rules of numpy/lib/format.py.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { decodeNpy, encodeNpy } from '../../app/core/npy.ts';

const NUMPY_F32_123_HEX =
  '934e554d5059' + '0100' + '7600' +
  Buffer.from("{'descr': '<f4', 'fortran_order': False, 'shape': (3,), }").toString('hex') +
  '20'.repeat(60) + '0a' + '0000803f' + '00000040' + '00004040';

function header(dict: string, major = 1): Uint8Array {
  const pre = major === 1 ? 10 : 12;
  let h = dict;
  h += ' '.repeat((64 - ((pre + h.length + 1) % 64)) % 64) + '\n';
  const out = new Uint8Array(pre + h.length);
  out.set([0x93, 0x4e, 0x55, 0x4d, 0x50, 0x59, major, 0]);
  const v = new DataView(out.buffer);
  if (major === 1) v.setUint16(8, h.length, true);
  else v.setUint32(8, h.length, true);
  for (let i = 0; i < h.length; i++) out[pre + i] = h.charCodeAt(i);
  return out;
}
const concat = (a: Uint8Array, b: Uint8Array) => {
  const o = new Uint8Array(a.length + b.length);
  o.set(a);
  o.set(b, a.length);
  return o;
};

test('float32 [1,2,3] is written byte for byte as NumPy 2.4.6 writes it (140 bytes, data at 128)', () => {
  const bytes = encodeNpy(Float32Array.from([1, 2, 3]), [3]);
  assert.equal(bytes.length, 140);
  assert.equal(Buffer.from(bytes).toString('hex'), NUMPY_F32_123_HEX);
});

test('sizes NumPy reports for (512,) and (18,512) float32 arrays', () => {
  assert.equal(encodeNpy(new Float32Array(512), [512]).length, 2176);
  assert.equal(encodeNpy(new Float32Array(18 * 512), [18, 512]).length, 36992);
});

test('round trip of a 2-D array', () => {
  const data = Float32Array.from({ length: 12 }, (_, i) => i * 0.5 - 2);
  const back = decodeNpy(encodeNpy(data, [3, 4]));
  assert.deepEqual(back.shape, [3, 4]);
  assert.deepEqual(Array.from(back.data), Array.from(data));
});

test('reads float64, big-endian float32, int32, float16 and version 2.0 headers', () => {
  const f8 = concat(header("{'descr': '<f8', 'fortran_order': False, 'shape': (2,), }"), new Uint8Array(new Float64Array([0.25, -3]).buffer));
  assert.deepEqual(Array.from(decodeNpy(f8).data), [0.25, -3]);
  const be = new Uint8Array(8);
  new DataView(be.buffer).setFloat32(0, 1.5, false);
  new DataView(be.buffer).setFloat32(4, -2, false);
  assert.deepEqual(Array.from(decodeNpy(concat(header("{'descr': '>f4', 'fortran_order': False, 'shape': (2,), }"), be)).data), [1.5, -2]);
  const i4 = concat(header("{'descr': '<i4', 'fortran_order': False, 'shape': (1, 2), }"), new Uint8Array(new Int32Array([7, -9]).buffer));
  assert.deepEqual(decodeNpy(i4).shape, [1, 2]);
  assert.deepEqual(Array.from(decodeNpy(i4).data), [7, -9]);
  // IEEE half: 0x3c00 = 1, 0xc000 = −2 (IEEE 754-2008 binary16).
  const f2 = concat(header("{'descr': '<f2', 'fortran_order': False, 'shape': (2,), }"), new Uint8Array(new Uint16Array([0x3c00, 0xc000]).buffer));
  assert.deepEqual(Array.from(decodeNpy(f2).data), [1, -2]);
  const v2 = concat(header("{'descr': '<f4', 'fortran_order': False, 'shape': (1,), }", 2), new Uint8Array(new Float32Array([4]).buffer));
  assert.deepEqual(Array.from(decodeNpy(v2).data), [4]);
});

test('refuses hostile or unsupported files with a message naming the file and the problem', () => {
  const cases: [string, Uint8Array, RegExp][] = [
    ['not npy', new TextEncoder().encode('hello world, not numpy'), /magic/],
    ['pickle', concat(header("{'descr': '|O', 'fortran_order': False, 'shape': (1,), }"), new Uint8Array(8)), /pickled/],
    ['fortran', concat(header("{'descr': '<f4', 'fortran_order': True, 'shape': (2, 2), }"), new Uint8Array(16)), /Fortran/],
    ['lying size', concat(header("{'descr': '<f4', 'fortran_order': False, 'shape': (1000,), }"), new Uint8Array(16)), /file holds 16/],
    ['structured', concat(header("{'descr': [('a', '<f4')], 'fortran_order': False, 'shape': (1,), }"), new Uint8Array(4)), /descr|structured/],
    ['extra key', concat(header("{'descr': '<f4', 'fortran_order': False, 'shape': (1,), 'x': 1, }"), new Uint8Array(4)), /header/],
    ['version 9', (() => { const b = header("{'descr': '<f4', 'fortran_order': False, 'shape': (1,), }"); b[6] = 9; return concat(b, new Uint8Array(4)); })(), /version 9/],
    ['header too long', (() => { const b = header("{'descr': '<f4', 'fortran_order': False, 'shape': (1,), }"); new DataView(b.buffer).setUint16(8, 60000, true); return b; })(), /header claims/],
  ];
  for (const [name, bytes, pattern] of cases) {
    assert.throws(() => decodeNpy(bytes, `case-${name}.npy`), (err: Error) => {
      assert.match(err.message, /case-.*\.npy/, `${name}: message names the file`);
      assert.match(err.message, pattern, `${name}: ${err.message}`);
      return true;
    });
  }
});
