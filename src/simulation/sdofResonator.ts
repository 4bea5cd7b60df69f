/**
 * A single-degree-of-freedom resonance as a digital filter, run sample by sample in double
 * precision, so that build-up, ringing and phase through a ramp come out of the dynamics
 * rather than a steady-state formula.
 *
 * Analogue prototype (dynamic amplification of an SDOF system, gain 1 at rest, Q at fn):
 *   H(s) = w0^2 / (s^2 + 2 zeta w0 s + w0^2),   w0 = 2 pi fn
 *   |H(j w)| = 1 / sqrt((1 - r^2)^2 + (2 zeta r)^2),  phase lag atan2(2 zeta r, 1 - r^2), r = w/w0.
 *
 * Discretised with the bilinear transform prewarped at fn: s = K (1 - z^-1)/(1 + z^-1) with
 * K = w0 / tan(w0 T / 2). Why this one rather than impulse invariance: it maps fn exactly (so
 * the peak gain is exactly Q where the band says it is), it keeps the DC gain exactly 1, and it
 * cannot alias, because the whole j-axis maps onto the unit circle. Impulse invariance keeps the
 * pole decay rate exactly but aliases the response and needs a separate zero fit to get the
 * gain right. Away from fn the bilinear map warps frequency by
 * tan(pi f/fs)/(pi f/fs) relative to tan(pi fn/fs)/(pi fn/fs), which is under 0.1 % for
 * f, fn < fs/20; its pole decay differs from the analogue one by a similar amount.
 *
 * With t = tan(w0 T / 2), dividing through by w0^2 (so K/w0 = 1/t):
 *   b = [1, 2, 1] / a0,  a1 = 2 (1 - 1/t^2) / a0,  a2 = (1/t^2 - 2 zeta/t + 1) / a0,
 *   a0 = 1/t^2 + 2 zeta/t + 1.
 */
export class SdofResonator {
  readonly b0: number;
  readonly b1: number;
  readonly b2: number;
  readonly a1: number;
  readonly a2: number;
  private x1 = 0;
  private x2 = 0;
  private y1 = 0;
  private y2 = 0;

  constructor(
    readonly fnHz: number,
    readonly zeta: number,
    readonly sampleRateHz: number,
  ) {
    if (!(fnHz > 0 && fnHz < sampleRateHz / 2)) {
      throw new RangeError(`resonator fn must lie in (0, ${sampleRateHz / 2}) Hz for fs ${sampleRateHz} Hz, got ${fnHz}`);
    }
    if (!(zeta > 0 && zeta < 1)) throw new RangeError(`resonator damping ratio must lie in (0, 1), got ${zeta}`);
    const t = Math.tan((Math.PI * fnHz) / sampleRateHz);
    const k2 = 1 / (t * t);
    const k1 = (2 * zeta) / t;
    const a0 = k2 + k1 + 1;
    this.b0 = 1 / a0;
    this.b1 = 2 / a0;
    this.b2 = 1 / a0;
    this.a1 = (2 * (1 - k2)) / a0;
    this.a2 = (k2 - k1 + 1) / a0;
  }

  /** One input sample in, one output sample out (direct form I). */
  step(x: number): number {
    const y = this.b0 * x + this.b1 * this.x1 + this.b2 * this.x2 - this.a1 * this.y1 - this.a2 * this.y2;
    this.x2 = this.x1;
    this.x1 = x;
    this.y2 = this.y1;
    this.y1 = y;
    return y;
  }

  /** Back to rest. */
  reset(): void {
    this.x1 = this.x2 = this.y1 = this.y2 = 0;
  }
}
