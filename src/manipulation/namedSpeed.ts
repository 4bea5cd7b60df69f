/**
 * A speed the tachless estimate named (speedFromSpectrum.ts), with its reason written only when
 * read: the tracker makes dozens of estimates a second and reads none. A class, so that building
 * one is a plain allocation (an object literal with a getter is built the slow way).
 */
/** A tachless speed estimate: the speed named (or none), how sure, and why. */
export interface SpectralSpeed {
  rpm: number | null;
  /** 0..1; 0 when rpm is null. */
  confidence: number;
  /** Harmonics 1..H of the answer that show a line above the support ratio times their floor (speedFromSpectrum.ts). */
  supportingHarmonics: number;
  reason: string;
}

export class NamedSpeed implements SpectralSpeed {
  readonly rpm: number;
  readonly confidence: number;
  readonly supportingHarmonics: number;
  private readonly f1Hz: number;
  private readonly harmonics: number;
  private readonly strength: number;
  private readonly uniqueness: number;
  private readonly note: string;

  constructor(rpm: number, confidence: number, supporting: number, f1Hz: number, harmonics: number, strength: number, uniqueness: number, note: string) {
    this.rpm = rpm;
    this.confidence = confidence;
    this.supportingHarmonics = supporting;
    this.f1Hz = f1Hz;
    this.harmonics = harmonics;
    this.strength = strength;
    this.uniqueness = uniqueness;
    this.note = note;
  }

  get reason(): string {
    return (
      `1X at ${this.f1Hz.toFixed(3)} Hz from ${this.supportingHarmonics} of ${this.harmonics} harmonics; strength ${this.strength.toFixed(2)}, ` +
      `uniqueness ${this.uniqueness.toFixed(2)}` + this.note
    );
  }

  /** The same answer at another speed (moved along a ramp); its reason is still the spectrum's. */
  atRpm(rpm: number): NamedSpeed {
    return new NamedSpeed(rpm, this.confidence, this.supportingHarmonics, this.f1Hz, this.harmonics, this.strength, this.uniqueness, this.note);
  }
}

/** `e` at another speed, its reason unchanged. */
export function speedMovedTo(e: SpectralSpeed, rpm: number): SpectralSpeed {
  return e instanceof NamedSpeed ? e.atRpm(rpm) : { rpm, confidence: e.confidence, supportingHarmonics: e.supportingHarmonics, reason: e.reason };
}
