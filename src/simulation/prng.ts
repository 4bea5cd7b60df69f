/**
 * A small seeded generator so that a simulated recording is the same on every run and machine.
 *
 * Uniform numbers: mulberry32 (a 32-bit state, one multiply-xorshift step per draw; public
 * domain, from memory). Normal numbers: the Box-Muller transform, using both outputs of a pair.
 */
export class SeededRandom {
  private state: number;
  private spare = NaN;

  constructor(seed: number) {
    this.state = seed >>> 0;
  }

  /** Uniform in [0, 1). */
  uniform(): number {
    this.state = (this.state + 0x6d2b79f5) | 0;
    let t = this.state;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  }

  /** Standard normal (mean 0, variance 1). */
  normal(): number {
    if (!Number.isNaN(this.spare)) {
      const z = this.spare;
      this.spare = NaN;
      return z;
    }
    // 1 - uniform() lies in (0, 1], so the log is finite.
    const r = Math.sqrt(-2 * Math.log(1 - this.uniform()));
    const theta = 2 * Math.PI * this.uniform();
    this.spare = r * Math.sin(theta);
    return r * Math.cos(theta);
  }
}
