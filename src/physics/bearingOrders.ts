/**
 * Kinematic rolling-bearing defect frequencies as multiples of shaft speed (inner ring turning
 * with the shaft, outer ring fixed, no slip). With n rolling elements, element diameter d,
 * pitch diameter D and contact angle a, and c = (d/D) cos a:
 *   FTF  = 1/2 (1 - c)           cage
 *   BPFO = n/2 (1 - c)           outer-race pass
 *   BPFI = n/2 (1 + c)           inner-race pass
 *   BSF  = D/(2d) (1 - c^2)      element spin (a defect on an element strikes twice per spin: 2 BSF)
 * Only the ratio d/D matters, so any consistent length unit serves.
 */

export interface BearingGeometry {
  rollingElements: number;
  elementDiameter: number;
  pitchDiameter: number;
  contactAngleDeg: number;
}

export type BearingTone = 'bpfo' | 'bpfi' | 'bsf' | 'ftf';

export type BearingOrderSet = Record<BearingTone, number>;

export function bearingOrders(g: BearingGeometry): BearingOrderSet {
  const ratio = g.elementDiameter / g.pitchDiameter;
  const c = ratio * Math.cos((g.contactAngleDeg * Math.PI) / 180);
  return {
    ftf: 0.5 * (1 - c),
    bpfo: (g.rollingElements / 2) * (1 - c),
    bpfi: (g.rollingElements / 2) * (1 + c),
    bsf: (1 / (2 * ratio)) * (1 - c * c),
  };
}
