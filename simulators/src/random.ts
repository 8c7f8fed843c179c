/**
 * A small seeded pseudo-random source for the simulators: reproducible, fast, no I/O.
 *
 * Method: xoshiro128** (Blackman & Vigna, "Scrambled linear pseudorandom number
 * generators", ACM Transactions on Mathematical Software 47(4), 2021), its 128-bit
 * state filled from the seed by splitmix32; standard normal variates by the Box–Muller
 * transform (Box & Muller, "A note on the generation of random normal deviates",
 * Annals of Mathematical Statistics 29(2), 1958), both variates of a pair used.
 */

/** A 32-bit seed from any mix of strings and numbers (FNV-1a, then the murmur3 finaliser). */
export function seedOf(...parts: (string | number)[]): number {
  let h = 0x811c9dc5;
  for (const part of parts) {
    const s = `${String(part)}\u0000`;
    for (let i = 0; i < s.length; i++) {
      h ^= s.charCodeAt(i);
      h = Math.imul(h, 0x01000193);
    }
  }
  // fmix32: every input bit affects every output bit
  h ^= h >>> 16;
  h = Math.imul(h, 0x85ebca6b);
  h ^= h >>> 13;
  h = Math.imul(h, 0xc2b2ae35);
  h ^= h >>> 16;
  return h >>> 0;
}

const TWO_POW_32 = 4294967296;

export class SeededRandom {
  private s0 = 0;
  private s1 = 0;
  private s2 = 0;
  private s3 = 0;
  private spare = 0;
  private hasSpare = false;

  constructor(seed: number) {
    if (!Number.isFinite(seed)) throw new RangeError(`seed must be a finite number, got ${seed}`);
    // splitmix32 fills the state; it never yields four zero words
    let z = seed >>> 0;
    const next = (): number => {
      z = (z + 0x9e3779b9) | 0;
      let r = z;
      r = Math.imul(r ^ (r >>> 16), 0x21f0aaad);
      r = Math.imul(r ^ (r >>> 15), 0x735a2d97);
      return (r ^ (r >>> 15)) >>> 0;
    };
    this.s0 = next();
    this.s1 = next();
    this.s2 = next();
    this.s3 = next();
  }

  /** The next 32-bit unsigned integer. */
  nextUint32(): number {
    // result = rotl(s1·5, 7)·9
    const r = Math.imul(rotl(Math.imul(this.s1, 5), 7), 9);
    const t = this.s1 << 9;
    this.s2 ^= this.s0;
    this.s3 ^= this.s1;
    this.s1 ^= this.s2;
    this.s0 ^= this.s3;
    this.s2 ^= t;
    this.s3 = rotl(this.s3, 11);
    return r >>> 0;
  }

  /** Uniform on the open interval (0, 1). */
  uniform(): number {
    return (this.nextUint32() + 0.5) / TWO_POW_32;
  }

  /** An integer uniform on 0 … n−1. */
  integer(n: number): number {
    return Math.floor(this.uniform() * n);
  }

  /** True with probability p. */
  chance(p: number): boolean {
    return p > 0 && this.uniform() < p;
  }

  /** A standard normal variate. */
  gaussian(): number {
    if (this.hasSpare) {
      this.hasSpare = false;
      return this.spare;
    }
    // Box–Muller: ρ = √(−2 ln u₁), θ = 2π u₂; ρ cos θ and ρ sin θ are independent N(0, 1)
    const rho = Math.sqrt(-2 * Math.log(this.uniform()));
    const theta = 2 * Math.PI * this.uniform();
    this.spare = rho * Math.sin(theta);
    this.hasSpare = true;
    return rho * Math.cos(theta);
  }
}

function rotl(x: number, k: number): number {
  return (x << k) | (x >>> (32 - k));
}
