/**
 * Seeded pseudo-random numbers for the Monte-Carlo tests and the benchmark.
 * xoshiro128** (Blackman & Vigna, "Scrambled linear pseudorandom number
 * generators", ACM TOMS 47, 2021), seeded through splitmix32; doubles from two
 * 32-bit outputs (53 bits); normals by the Box–Muller transform (Box & Muller,
 * Ann. Math. Statist. 29, 1958).
 */
// Bound once: looking up the global `Math` per call is slow inside jest's vm contexts (nodejs/node#49283).
const { imul, sqrt, log, sin, cos, PI } = Math;

export class Random {
  // state in a typed array: 32-bit unsigned values above 2³¹ would otherwise be
  // boxed as heap numbers in object fields on every update
  private readonly s = new Uint32Array(4);
  private spare = 0;
  private hasSpare = false;

  constructor(seed: number) {
    let x = seed >>> 0;
    for (let i = 0; i < 4; i++) {
      // splitmix32
      x = (x + 0x9e3779b9) >>> 0;
      let z = x;
      z = imul(z ^ (z >>> 16), 0x85ebca6b) >>> 0;
      z = imul(z ^ (z >>> 13), 0xc2b2ae35) >>> 0;
      this.s[i] = z ^ (z >>> 16);
    }
  }

  /** Next 32-bit unsigned integer (xoshiro128**). */
  nextUint32(): number {
    const s = this.s;
    const result = imul(rotl(imul(s[1], 5), 7), 9) >>> 0;
    const t = s[1] << 9;
    s[2] ^= s[0];
    s[3] ^= s[1];
    s[1] ^= s[2];
    s[0] ^= s[3];
    s[2] ^= t;
    s[3] = rotl(s[3], 11);
    return result;
  }

  /** Uniform in [0, 1) with 53 random bits. */
  uniform(): number {
    const a = this.nextUint32() >>> 5; // 27 bits
    const b = this.nextUint32() >>> 6; // 26 bits
    return (a * 67108864 + b) / 9007199254740992;
  }

  /** Standard normal. */
  normal(): number {
    if (this.hasSpare) {
      this.hasSpare = false;
      return this.spare;
    }
    let u = this.uniform();
    while (u === 0) u = this.uniform();
    const v = this.uniform();
    const r = sqrt(-2 * log(u));
    this.spare = r * sin(2 * PI * v);
    this.hasSpare = true;
    return r * cos(2 * PI * v);
  }

  /** χ²_k with integer k, as a sum of squared normals. */
  chiSquare(k: number): number {
    let s = 0;
    for (let i = 0; i < k; i++) {
      const z = this.normal();
      s += z * z;
    }
    return s;
  }
}

function rotl(x: number, k: number): number {
  return (x << k) | (x >>> (32 - k));
}
