/**
 * Fatigue exposure of one component: how long some order has run inside its half-power band and
 * how many response cycles that meant.
 *
 * A component forced inside its band responds at the forcing frequency, so each second there
 * adds `orderHz` stress cycles at roughly Q times the off-resonance amplitude. Two orders inside
 * the band at once add their cycles; the seconds count once. Exposure keeps counting whatever the
 * alarm's state (pending, shelved, active): it is a property of the machine, not of the alarm.
 */
export class Exposure {
  secondsInBand = 0;
  cycles = 0;

  /** Add one decision step of `stepS` seconds with the frequencies of the orders inside the band. */
  add(stepS: number, insideOrderHz: readonly number[]): void {
    if (insideOrderHz.length === 0) return;
    this.secondsInBand += stepS;
    for (const hz of insideOrderHz) this.cycles += hz * stepS;
  }
}
