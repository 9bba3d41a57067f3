/**
 * A seeded pseudo-random generator, so the random test matrix of the truncated SVD, and with it the vectors,
 * are the same on every run with the same seed.
 */

/** The 32-bit finalizer of MurmurHash3 (Appleby 2008, public domain): spreads the bits of a seed. */
function mix32(h: number): number {
  h ^= h >>> 16;
  h = Math.imul(h, 0x85ebca6b);
  h ^= h >>> 13;
  h = Math.imul(h, 0xc2b2ae35);
  h ^= h >>> 16;
  return h >>> 0;
}

/** xoshiro128** (Blackman & Vigna 2018, "Scrambled linear pseudorandom number generators"). */
export class SeededRandom {
  private s0: number;
  private s1: number;
  private s2: number;
  private s3: number;
  private spare = 0;
  private hasSpare = false;

  constructor(seed: number) {
    if (!Number.isInteger(seed) || seed < 0 || seed > 0xffffffff) throw new RangeError(`seed must be an integer in [0, 2^32), got ${seed}`);
    // four distinct words from one seed; never all zero (the one state xoshiro must avoid)
    this.s0 = mix32(seed ^ 0x9e3779b9);
    this.s1 = mix32(seed + 0x632be5ab);
    this.s2 = mix32(seed ^ 0x85a308d3);
    this.s3 = mix32(seed + 0x3c6ef372) | 1;
  }

  /** A uniform 32-bit unsigned integer. */
  nextUint32(): number {
    const s0 = this.s0, s1 = this.s1, s2 = this.s2, s3 = this.s3;
    // result = rotl(s1 * 5, 7) * 9
    const m = Math.imul(s1, 5);
    const result = Math.imul((m << 7) | (m >>> 25), 9) >>> 0;
    const t = s1 << 9;
    this.s2 = s2 ^ s0;
    this.s3 = s3 ^ s1;
    this.s1 = s1 ^ this.s2;
    this.s0 = s0 ^ this.s3;
    this.s2 ^= t;
    this.s3 = (this.s3 << 11) | (this.s3 >>> 21);
    return result;
  }

  /** A uniform number in (0, 1]: never 0, so its logarithm is finite. */
  nextOpenUnit(): number {
    return (this.nextUint32() + 1) / 4294967296;
  }

  /** A standard normal deviate. */
  nextGaussian(): number {
    if (this.hasSpare) {
      this.hasSpare = false;
      return this.spare;
    }
    const u1 = this.nextOpenUnit();
    const u2 = this.nextOpenUnit();
    // two independent N(0,1) from two uniforms: Box & Muller 1958, "A note on the generation of random normal deviates"
    const r = Math.sqrt(-2 * Math.log(u1));
    const a = 2 * Math.PI * u2;
    this.spare = r * Math.sin(a);
    this.hasSpare = true;
    return r * Math.cos(a);
  }

  /** Fills `out` with standard normal deviates, in index order. */
  fillGaussian(out: Float64Array): void {
    for (let i = 0; i < out.length; i++) out[i] = this.nextGaussian();
  }
}
