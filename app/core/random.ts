// Seeded pseudo-random numbers for latent codes, bootstrap resampling and authored weights.
// xoshiro128** (Blackman & Vigna 2018) seeded through splitmix32, normals by the polar
// Box–Muller method. Everything here is integer or IEEE-exact arithmetic except Math.log and
// Math.sqrt, so a seed gives the same numbers on every machine running the same V8.

function splitmix32(state: number): () => number {
  let s = state >>> 0;
  return () => {
    s = (s + 0x9e3779b9) >>> 0;
    let z = s;
    z = Math.imul(z ^ (z >>> 16), 0x85ebca6b) >>> 0;
    z = Math.imul(z ^ (z >>> 13), 0xc2b2ae35) >>> 0;
    return (z ^ (z >>> 16)) >>> 0;
  };
}

export class Random {
  #s = new Uint32Array(4);
  #spare: number | null = null;

  constructor(seed: number, stream = 0) {
    const mix = splitmix32((seed >>> 0) ^ Math.imul(stream >>> 0, 0x632be5ab));
    for (let i = 0; i < 4; i++) this.#s[i] = mix();
    if ((this.#s[0] | this.#s[1] | this.#s[2] | this.#s[3]) === 0) this.#s[0] = 1;
  }

  /** Next unsigned 32-bit integer. */
  nextUint32(): number {
    const s = this.#s;
    const result = Math.imul(rotl(Math.imul(s[1], 5), 7), 9) >>> 0;
    const t = (s[1] << 9) >>> 0;
    s[2] ^= s[0];
    s[3] ^= s[1];
    s[1] ^= s[2];
    s[0] ^= s[3];
    s[2] ^= t;
    s[3] = rotl(s[3], 11);
    return result;
  }

  /** Uniform in [0, 1) with 32 bits of resolution. */
  uniform(): number {
    return this.nextUint32() / 4294967296;
  }

  /** Uniform integer in [0, n). */
  int(n: number): number {
    return Math.floor(this.uniform() * n);
  }

  /** Standard normal deviate (polar Box–Muller). */
  normal(): number {
    if (this.#spare !== null) {
      const v = this.#spare;
      this.#spare = null;
      return v;
    }
    for (;;) {
      const u = 2 * this.uniform() - 1;
      const v = 2 * this.uniform() - 1;
      const s = u * u + v * v;
      if (s > 0 && s < 1) {
        const f = Math.sqrt((-2 * Math.log(s)) / s);
        this.#spare = v * f;
        return u * f;
      }
    }
  }

  normals(n: number): Float32Array {
    const out = new Float32Array(n);
    for (let i = 0; i < n; i++) out[i] = this.normal();
    return out;
  }
}

function rotl(x: number, k: number): number {
  return ((x << k) | (x >>> (32 - k))) >>> 0;
}

/** The latent code for a seed: the project's own convention, stable across releases. */
export function latentForSeed(seed: number, size: number): Float32Array {
  if (!Number.isInteger(seed) || seed < 0 || seed > 0xffffffff) {
    throw new RangeError(`seed must be an integer in 0..4294967295, got ${seed}`);
  }
  return new Random(seed, 0x5eed).normals(size);
}
