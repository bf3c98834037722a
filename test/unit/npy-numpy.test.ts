// Interop with NumPy itself (the machine's python3 + numpy): files we write load in NumPy with
// the same values, and NumPy-written files (several dtypes, shapes, header versions 1.0 and 2.0)
// load here. Fortran order and pickled objects written by NumPy are refused.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { spawnSync } from 'node:child_process';
import { readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { decodeNpy, encodeNpy } from '../../app/core/npy.ts';
import { tempDir } from '../helpers/models.ts';

const probe = spawnSync('python3', ['-c', 'import numpy; print(numpy.__version__)'], { encoding: 'utf8' });
const numpy = probe.status === 0 ? probe.stdout.trim() : null;
const skip = numpy ? false : `python3 with numpy is not available here (${(probe.stderr || probe.error?.message || '').trim().split('\n').pop()})`;

function py(code: string): string {
  const r = spawnSync('python3', ['-c', code], { encoding: 'utf8' });
  assert.equal(r.status, 0, r.stderr);
  return r.stdout;
}

test(`our .npy files load in NumPy ${numpy ?? ''} with identical values`, { skip }, () => {
  const dir = tempDir();
  const cases: [number[], Float32Array][] = [
    [[3], Float32Array.from([1, 2, 3])],
    [[4, 5], Float32Array.from({ length: 20 }, (_, i) => Math.fround(Math.sin(i) * 1e3))],
    [[2, 3, 4], Float32Array.from({ length: 24 }, (_, i) => (i % 2 ? -1 : 1) * Math.fround(1 / (i + 1)))],
    [[1], Float32Array.from([Math.fround(3.4e38)])],
  ];
  cases.forEach(([shape, data], k) => writeFileSync(join(dir, `ours${k}.npy`), encodeNpy(data, shape)));
  const out = JSON.parse(py(`
import numpy as np, json
res = []
for k in range(${cases.length}):
    a = np.load(${JSON.stringify(dir)} + f'/ours{k}.npy', allow_pickle=False)
    res.append({'dtype': str(a.dtype), 'shape': list(a.shape), 'values': [float(v) for v in a.ravel()]})
print(json.dumps(res))`));
  cases.forEach(([shape, data], k) => {
    assert.equal(out[k].dtype, 'float32');
    assert.deepEqual(out[k].shape, shape);
    assert.deepEqual(out[k].values, Array.from(data));
  });
});

test('NumPy-written files of several dtypes, shapes and header versions load here', { skip }, () => {
  const dir = tempDir();
  py(`
import numpy as np
from numpy.lib import format as fmt
d = ${JSON.stringify(dir)}
np.save(d + '/f4.npy', np.arange(12, dtype='<f4').reshape(3, 4) / 7)
np.save(d + '/f8.npy', np.linspace(-2, 2, 9))
np.save(d + '/be.npy', np.array([1.5, -2.25, 1e-3], dtype='>f4'))
np.save(d + '/f2.npy', np.array([0.5, -1, 65504], dtype='<f2'))
np.save(d + '/i4.npy', np.array([[1, -2], [3, -4]], dtype='<i4'))
np.save(d + '/u1.npy', np.array([0, 127, 255], dtype='u1'))
np.save(d + '/scalar.npy', np.float32(2.5))
with open(d + '/v2.npy', 'wb') as f:
    fmt.write_array(f, np.arange(5, dtype='<f4'), version=(2, 0))
np.save(d + '/fortran.npy', np.asfortranarray(np.arange(6, dtype='<f4').reshape(2, 3)))
np.save(d + '/objects.npy', np.array([{'a': 1}], dtype=object), allow_pickle=True)
`);
  const read = (f: string) => decodeNpy(new Uint8Array(readFileSync(join(dir, f))), f);
  const near = (a: ArrayLike<number>, b: number[], tol = 1e-6) => b.forEach((v, i) => assert.ok(Math.abs(a[i] - v) <= tol * Math.max(1, Math.abs(v)), `${a[i]} vs ${v}`));
  const f4 = read('f4.npy');
  assert.deepEqual(f4.shape, [3, 4]);
  near(f4.data, Array.from({ length: 12 }, (_, i) => Math.fround(i / 7)));
  near(read('f8.npy').data, Array.from({ length: 9 }, (_, i) => -2 + i * 0.5));
  near(read('be.npy').data, [1.5, -2.25, 1e-3]);
  near(read('f2.npy').data, [0.5, -1, 65504]);
  assert.deepEqual(Array.from(read('i4.npy').data), [1, -2, 3, -4]);
  assert.deepEqual(Array.from(read('u1.npy').data), [0, 127, 255]);
  const scalar = read('scalar.npy');
  assert.deepEqual(scalar.shape, []);
  assert.deepEqual(Array.from(scalar.data), [2.5]);
  assert.deepEqual(Array.from(read('v2.npy').data), [0, 1, 2, 3, 4]);
  assert.throws(() => read('fortran.npy'), /fortran\.npy: Fortran-ordered arrays are not supported/);
  assert.throws(() => read('objects.npy'), /objects\.npy: dtype \|O holds pickled Python objects/);
});
