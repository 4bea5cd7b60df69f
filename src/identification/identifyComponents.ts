/**
 * Identification: for every (component, order) whose band an order swept through in the
 * transients given, fit the single-degree-of-freedom response to the captured tracks (all
 * transients together: the mode is shared, each sweep keeps its own gain and background) and
 * read Q again from any free decays. Results that would not stand up are not reported:
 *   - the sweep must cover the measured half-power band with room either side;
 *   - the fit must explain the curve (R^2 >= MIN_R2) and a resonance must explain it far better
 *     than a smooth curve (resonance_gain >= MIN_RESONANCE_GAIN), so a sweep past no band or
 *     pure noise yields nothing;
 *   - fn must be known to MAX_FN_SPREAD and Q to MAX_Q_SPREAD (the +-2 sigma bounds).
 */
import type { AssetConfig, ComponentConfig, OrderConfig } from '../config/types.ts';
import { velocityHalfPowerBand } from '../physics/halfPowerBand.ts';
import type { OrderTrack, TransientRecord } from '../transients/transientRecord.ts';
import { fitSweep, type MeasuredTrack, type SweepFit } from './fitSweep.ts';
import { findFreeDecays, type DecayFit } from './freeDecay.ts';
import { adviseDrift, type ComponentLines } from './driftAdvisory.ts';
import type { DecayEstimate, IdentifiedRecord } from './identifiedRecord.ts';

const MIN_R2 = 0.9;
const MIN_RESONANCE_GAIN = 4;
const MAX_FN_SPREAD = 0.02;
const MAX_Q_SPREAD = 0.5;
/** Orders are searched for a peak within fn_map / SEARCH_SPAN .. fn_map x SEARCH_SPAN. */
const SEARCH_SPAN = 1.3;
/** Fewest points of a track inside the fitted window. */
const MIN_WINDOW_POINTS = 12;
/**
 * Most rows fitted together: beyond it rows are thinned evenly (neighbours a quarter window
 * apart say nearly the same), so a joint fit of many kept transients stays a second or two.
 */
const MAX_FIT_ROWS = 1500;

export interface IdentifyDetail {
  record: IdentifiedRecord;
  /** The tracks fitted (one per transient used) and the fitted model along each, for pictures. */
  tracks: Array<{ transient: TransientRecord; track: OrderTrack; rows: number[]; model: { amplitude: number[]; phaseDeg: number[] } }>;
  decays: DecayFit[];
}

export interface IdentifyOutcome {
  identified: IdentifyDetail[];
  /** Why each swept (component, order) gave no result, for the text report. */
  rejected: Array<{ component: string; order: string; reason: string }>;
}

export interface IdentifyOptions {
  /** Where each component's fn and damping are written in the map, for the drift advisory. */
  linesOf?: (componentId: string) => ComponentLines | null;
  /** Only the (component, order) pairs whose band this transient swept (the live agent's refits). */
  sweptBy?: TransientRecord;
}

export function identifyComponents(asset: AssetConfig, transients: TransientRecord[], options: IdentifyOptions = {}): IdentifyOutcome {
  const outcome: IdentifyOutcome = { identified: [], rejected: [] };
  const mine = transients.filter((t) => t.asset === asset.id);
  for (const component of asset.components) {
    for (const orderId of component.orderIds) {
      const order = asset.orders.find((o) => o.id === orderId) as OrderConfig;
      if (options.sweptBy && sweptTracks(component, order, [options.sweptBy]).length === 0) continue;
      const result = identifyPair(asset, component, order, mine);
      if ('reason' in result) {
        if (result.reason) outcome.rejected.push({ component: component.id, order: order.id, reason: result.reason });
        continue;
      }
      result.record = adviseDrift(result.record, asset, component, options.linesOf?.(component.id) ?? null);
      outcome.identified.push(result);
    }
  }
  return outcome;
}

interface Candidate {
  transient: TransientRecord;
  track: OrderTrack;
  rows: number[];
  peak: number;
}

/** The tracks of this order that swept across the map's band on a sensor of the component. */
function sweptTracks(c: ComponentConfig, order: OrderConfig, transients: TransientRecord[]): Candidate[] {
  const lo = c.fnHz / SEARCH_SPAN;
  const hi = c.fnHz * SEARCH_SPAN;
  const swept: Candidate[] = [];
  for (const t of transients) {
    for (const track of t.orders) {
      if (track.order !== order.id || !c.sensorIds.includes(track.sensor)) continue;
      const rows: number[] = [];
      let fMin = Infinity;
      let fMax = -Infinity;
      let peak = 0;
      let peakHz = 0;
      track.points.forEach((p, i) => {
        const f = (order.multiple * p[1]) / 60;
        if (f < lo || f > hi) return;
        rows.push(i);
        fMin = Math.min(fMin, f);
        fMax = Math.max(fMax, f);
        if (p[2] > peak) {
          peak = p[2];
          peakHz = f;
        }
      });
      if (fMin <= c.bandHz[0] && fMax >= c.bandHz[1] && peakHz > 0) swept.push({ transient: t, track, rows, peak });
    }
  }
  return swept;
}

function identifyPair(asset: AssetConfig, c: ComponentConfig, order: OrderConfig, transients: TransientRecord[]): IdentifyDetail | { reason: string | null } {
  const swept = sweptTracks(c, order, transients);
  if (swept.length === 0) return { reason: null };
  // One sensor: the one where the order's peak is largest.
  const best = swept.reduce((a, b) => (b.peak > a.peak ? b : a));
  const chosen = swept.filter((s) => s.track.sensor === best.track.sensor);
  const startFn = peakFrequency(chosen, order.multiple);
  const startQ = halfPowerQ(best, order.multiple, startFn) ?? c.q;
  // Fit window: +-5 half-bandwidths of the starting guess, within 5 % .. 45 % of fn.
  const halfSpan = Math.min(0.45, Math.max(0.05, 5 / Math.max(startQ, 1)));
  const measured: MeasuredTrack[] = [];
  const used: Candidate[] = [];
  const inWindow = chosen.map((s) =>
    s.rows.filter((i) => {
      const f = (order.multiple * s.track.points[i][1]) / 60;
      return f >= startFn * (1 - halfSpan) && f <= startFn * (1 + halfSpan);
    }),
  );
  const totalRows = inWindow.reduce((n, r) => n + r.length, 0);
  const stride = Math.max(1, Math.ceil(totalRows / MAX_FIT_ROWS));
  for (const [k, s] of chosen.entries()) {
    const rows = inWindow[k].filter((_, j) => j % stride === 0);
    if (rows.length < MIN_WINDOW_POINTS) continue;
    const pts = rows.map((i) => s.track.points[i]);
    measured.push({
      points: pts.map((p) => ({ tS: p[0], speedRpm: p[1] })),
      amplitude: pts.map((p) => p[2]),
      phaseDeg: pts.map((p) => p[3]),
      multiple: order.multiple,
      windowS: s.transient.window_s,
    });
    used.push({ ...s, rows });
  }
  // Free decays in every sweep of this sensor, whatever the sweep fit gives: a trip too fast
  // for the sweep fit can still leave the component ringing on its own.
  const decaysOf = (s: Candidate): DecayFit[] =>
    s.transient.decays
      .filter((d) => d.component === c.id && d.sensor === s.track.sensor)
      .flatMap((d) => findFreeDecays(d, s.transient.orders.filter((o) => o.sensor === d.sensor && c.orderIds.includes(o.order))));
  const fit = measured.length === 0 ? null : fitSweep(measured, { fnHz: startFn, q: startQ }, [{ fnHz: c.fnHz, q: c.q }]);
  const verdict = measured.length === 0 ? `fewer than ${MIN_WINDOW_POINTS} points of ${order.id} near ${startFn.toFixed(2)} Hz in any sweep` : !fit ? 'the fit did not converge' : judge(fit, measured, order.multiple);
  if (verdict || !fit) {
    const decayOnly = decayRecord(asset, c, order, best.track.sensor, chosen, decaysOf);
    return decayOnly ?? { reason: verdict };
  }
  const decays = used.flatMap(decaysOf);
  const band = velocityHalfPowerBand(fit.fnHz, fit.q);
  const record: IdentifiedRecord = {
    kind: 'identified',
    asset: asset.id,
    component: c.id,
    order: order.id,
    sensor: best.track.sensor,
    fn_hz: fit.fnHz,
    q: fit.q,
    zeta: fit.zeta,
    fn_bounds_hz: fit.fnBoundsHz,
    q_bounds: fit.qBounds,
    map_fn_hz: c.fnHz,
    map_q: c.q,
    band_hz: band,
    map_band_hz: [c.bandHz[0], c.bandHz[1]],
    method: fit.usedPhase ? 'amplitude and phase' : 'amplitude',
    fit_r2: fit.r2,
    resonance_gain: fit.resonanceGain,
    force_exponent: fit.forceExponent,
    transients: used.map((s, i) => ({ t_start_s: s.transient.t_start_s, t_end_s: s.transient.t_end_s, direction: s.transient.direction, points: measured[i].points.length })),
    decay: decayEstimate(decays),
    drift: null,
    advice: '',
  };
  return {
    record,
    tracks: used.map((s, i) => ({ transient: s.transient, track: s.track, rows: s.rows, model: fit.modelTracks[i] })),
    decays,
  };
}

/**
 * A band from free decays alone, where the sweep itself could not be fitted (a trip too fast
 * for it): fn from the ringing frequency, Q from the logarithmic decrement.
 */
function decayRecord(
  asset: AssetConfig,
  c: ComponentConfig,
  order: OrderConfig,
  sensor: string,
  candidates: Candidate[],
  decaysOf: (s: Candidate) => DecayFit[],
): IdentifyDetail | null {
  const withDecays = candidates.map((s) => ({ s, fits: decaysOf(s) })).filter((x) => x.fits.length > 0);
  const fits = withDecays.flatMap((x) => x.fits);
  const estimate = decayEstimate(fits);
  if (!estimate) return null;
  const fnSpread = Math.max(...fits.map((f) => (f.fnBoundsHz[1] - f.fnBoundsHz[0]) / 2));
  if (!(fnSpread / estimate.fn_hz <= MAX_FN_SPREAD) || !((estimate.q_bounds[1] - estimate.q_bounds[0]) / 2 / estimate.q <= MAX_Q_SPREAD)) return null;
  const record: IdentifiedRecord = {
    kind: 'identified',
    asset: asset.id,
    component: c.id,
    order: order.id,
    sensor,
    fn_hz: estimate.fn_hz,
    q: estimate.q,
    zeta: estimate.zeta,
    fn_bounds_hz: [estimate.fn_hz - fnSpread, estimate.fn_hz + fnSpread],
    q_bounds: estimate.q_bounds,
    map_fn_hz: c.fnHz,
    map_q: c.q,
    band_hz: velocityHalfPowerBand(estimate.fn_hz, estimate.q),
    map_band_hz: [c.bandHz[0], c.bandHz[1]],
    method: 'free decay',
    fit_r2: Math.min(...fits.map((f) => f.r2)),
    resonance_gain: null,
    force_exponent: null,
    transients: withDecays.map(({ s, fits: f }) => ({ t_start_s: s.transient.t_start_s, t_end_s: s.transient.t_end_s, direction: s.transient.direction, points: f.length })),
    decay: estimate,
    drift: null,
    advice: '',
  };
  return { record, tracks: [], decays: fits };
}

/** Why a fit is not reported, or null when it stands. */
function judge(fit: SweepFit, measured: MeasuredTrack[], multiple: number): string | null {
  if (fit.r2 < MIN_R2) return `the single-mode fit explains too little of the curve (R^2 ${fit.r2.toFixed(2)} < ${MIN_R2})`;
  if (fit.resonanceGain < MIN_RESONANCE_GAIN) return `a resonance explains the curve little better than a smooth curve (gain ${fit.resonanceGain.toFixed(1)} < ${MIN_RESONANCE_GAIN})`;
  const [lo, hi] = velocityHalfPowerBand(fit.fnHz, fit.q);
  let fMin = Infinity;
  let fMax = -Infinity;
  for (const m of measured) for (const p of m.points) {
    fMin = Math.min(fMin, (multiple * p.speedRpm) / 60);
    fMax = Math.max(fMax, (multiple * p.speedRpm) / 60);
  }
  const width = hi - lo;
  if (lo - width / 2 < fMin || hi + width / 2 > fMax) return `the sweep does not cover the measured band ${lo.toFixed(2)}-${hi.toFixed(2)} Hz with room either side (swept ${fMin.toFixed(2)}-${fMax.toFixed(2)} Hz)`;
  const fnSpread = (fit.fnBoundsHz[1] - fit.fnBoundsHz[0]) / 2 / fit.fnHz;
  const qSpread = (fit.qBounds[1] - fit.qBounds[0]) / 2 / fit.q;
  if (!(fnSpread <= MAX_FN_SPREAD)) return `fn is too uncertain (+-${(fnSpread * 100).toFixed(1)} %)`;
  if (!(qSpread <= MAX_Q_SPREAD)) return `Q is too uncertain (+-${(qSpread * 100).toFixed(0)} %)`;
  return null;
}

/** The order frequency where the largest amplitude was seen, over the candidates. */
function peakFrequency(candidates: Candidate[], multiple: number): number {
  let best = 0;
  let fHz = 0;
  for (const s of candidates) for (const i of s.rows) {
    const p = s.track.points[i];
    if (p[2] > best) {
      best = p[2];
      fHz = (multiple * p[1]) / 60;
    }
  }
  return fHz;
}

/** Q from the half-power width of a track around its peak; null when a side is missing. */
function halfPowerQ(s: Candidate, multiple: number, peakHz: number): number | null {
  const pts = s.rows.map((i) => s.track.points[i]).sort((a, b) => a[1] - b[1]);
  const k = pts.reduce((bi, p, i) => (p[2] > pts[bi][2] ? i : bi), 0);
  const half = pts[k][2] / Math.SQRT2;
  let loHz: number | null = null;
  let hiHz: number | null = null;
  for (let i = k; i > 0; i--) if (pts[i - 1][2] < half) { loHz = (multiple * pts[i - 1][1]) / 60; break; }
  for (let i = k; i < pts.length - 1; i++) if (pts[i + 1][2] < half) { hiHz = (multiple * pts[i + 1][1]) / 60; break; }
  if (loHz === null || hiHz === null || hiHz <= loHz) return null;
  return Math.min(200, Math.max(1, peakHz / (hiHz - loHz)));
}

function decayEstimate(fits: DecayFit[]): DecayEstimate | null {
  if (fits.length === 0) return null;
  const qs = fits.map((f) => f.q);
  const mean = qs.reduce((s, v) => s + v, 0) / qs.length;
  // One decay: its own fit's bounds; several: +-2 standard errors of their mean.
  const sd = qs.length > 1 ? Math.sqrt(qs.reduce((s, v) => s + (v - mean) ** 2, 0) / (qs.length - 1) / qs.length) : null;
  const zeta = 1 / (2 * mean);
  return {
    q: mean,
    zeta,
    fn_hz: fits.reduce((s, f) => s + f.fnHz, 0) / fits.length,
    q_bounds: sd === null ? fits[0].qBounds : [mean - 2 * sd, mean + 2 * sd],
    decays: fits.length,
    cycles: fits.reduce((s, f) => s + f.cycles, 0),
  };
}
