/**
 * The pictures of one identification: for each transient used, the order's amplitude and (with
 * a tach) phase against shaft speed, the fitted single-degree-of-freedom curve, the map's band
 * and the measured band as strips in speed, and a polar view of the complex response when the
 * phase is known. Drawn by the one renderer (svgChart.ts).
 */
import type { IdentifyDetail } from '../identification/identifyComponents.ts';
import { renderFigure, type Chart, type Strip } from './svgChart.ts';

const CAUTION = 'Identification advises only: confirm before editing the map; qband never stops a machine. Site procedures, local codes and licensed practice apply.';

function padded(min: number, max: number, share = 0.05): [number, number] {
  const span = max - min || Math.abs(max) || 1;
  return [min - span * share, max + span * share];
}

/** A free decay: the envelope at fn against time and the fitted exponential. */
function decayChart(detail: IdentifyDetail, k: number): Chart {
  const d = detail.decays[k];
  const fitted = d.points.map(([t]): [number, number] => [t, d.startAmplitude * Math.exp(-d.sigmaPerS * (t - d.tStartS))]);
  const top = Math.max(...d.points.map((p) => p[1]), d.startAmplitude);
  return {
    title: `${detail.record.component}: free decay at ${d.ringHz.toFixed(2)} Hz, ${d.tStartS.toFixed(2)}-${d.tEndS.toFixed(2)} s`,
    x: { label: 'time', unit: 's', min: d.tStartS, max: d.tEndS },
    y: { label: 'envelope at fn, velocity RMS', unit: 'mm/s', min: 0, max: top * 1.08 || 1 },
    series: [
      { id: 'decay-measured', label: 'measured envelope', points: d.points, style: 'points', marker: 'square', tone: 'measured' },
      { id: 'decay-fitted', label: `exp(-t / ${(1 / d.sigmaPerS).toFixed(3)} s): Q ${d.q.toFixed(1)}`, points: fitted, style: 'dashed', tone: 'model' },
    ],
    notes: [`Logarithmic decrement ${((d.sigmaPerS / d.ringHz)).toFixed(4)} per cycle over ${d.cycles.toFixed(0)} cycles; Q ${d.q.toFixed(2)} (${d.qBounds[0].toFixed(1)}-${d.qBounds[1].toFixed(1)}), fn ${d.fnHz.toFixed(3)} Hz; line fit R^2 ${d.r2.toFixed(3)}.`],
  };
}

/** One SVG per transient of the detail, and one for its free decays. */
export function identificationFigures(detail: IdentifyDetail): Array<{ name: string; svg: string }> {
  const r = detail.record;
  const decays =
    detail.decays.length === 0
      ? []
      : [
          {
            name: `${r.asset}-${r.component}-${r.order}-decays.svg`,
            svg: renderFigure(`${r.asset} / ${r.component}: free decays`, detail.decays.map((_, k) => decayChart(detail, k)), [CAUTION]),
          },
        ];
  return [...decays, ...detail.tracks.map((t, k) => {
    const multiple = t.track.multiple;
    const rows = t.rows.map((i) => t.track.points[i]);
    const speed = rows.map((p) => p[1]);
    const [x0, x1] = padded(Math.min(...speed), Math.max(...speed), 0.02);
    const toRpm = (hz: number): number => (hz * 60) / multiple;
    const strips: Strip[] = [
      { id: 'map-band', label: `map band ${r.map_band_hz[0].toFixed(2)}-${r.map_band_hz[1].toFixed(2)} Hz`, from: toRpm(r.map_band_hz[0]), to: toRpm(r.map_band_hz[1]), along: 'x', pattern: 'hatch-up' },
      { id: 'measured-band', label: `measured band ${r.band_hz[0].toFixed(2)}-${r.band_hz[1].toFixed(2)} Hz`, from: toRpm(r.band_hz[0]), to: toRpm(r.band_hz[1]), along: 'x', pattern: 'hatch-down' },
    ];
    const amplitude = rows.map((p, i): [number, number] => [p[1], p[2]]);
    const model = rows.map((p, i): [number, number] => [p[1], t.model.amplitude[i]]);
    const top = Math.max(...amplitude.map((p) => p[1]), ...model.map((p) => p[1]));
    const charts: Chart[] = [
      {
        title: `${r.order} amplitude against speed, ${t.transient.direction === 'up' ? 'run-up' : 'coast-down'} at ${t.transient.t_start_s.toFixed(1)}-${t.transient.t_end_s.toFixed(1)} s`,
        x: { label: 'shaft speed', unit: 'rpm', min: x0, max: x1 },
        y: { label: `${r.order} velocity RMS`, unit: 'mm/s', min: 0, max: top * 1.08 || 1 },
        strips,
        series: [
          { id: 'measured', label: `measured (${r.sensor})`, points: amplitude, style: 'points', marker: 'circle', tone: 'reference' },
          { id: 'fitted', label: `fitted: fn ${r.fn_hz.toFixed(2)} Hz, Q ${r.q.toFixed(1)}`, points: model, style: 'dashed', tone: 'model' },
        ],
        notes: [
          `Measured fn ${r.fn_hz.toFixed(3)} Hz (${r.fn_bounds_hz[0].toFixed(3)}-${r.fn_bounds_hz[1].toFixed(3)}), Q ${r.q.toFixed(2)} (${r.q_bounds[0].toFixed(2)}-${r.q_bounds[1].toFixed(2)}), +-2 sigma; map fn ${r.map_fn_hz} Hz, Q ${r.map_q.toFixed(2)}; fit R^2 ${r.fit_r2.toFixed(3)}, ${r.method}.`,
        ],
      },
    ];
    const phased = rows.every((p) => p[3] !== null);
    if (phased) {
      charts.push({
        title: `${r.order} phase lag against speed (against the once-per-rev mark)`,
        x: { label: 'shaft speed', unit: 'rpm', min: x0, max: x1 },
        y: { label: 'phase lag', unit: 'degrees', min: 0, max: 360 },
        strips,
        series: [
          { id: 'measured-phase', label: 'measured', points: rows.map((p): [number, number] => [p[1], p[3] as number]), style: 'points', marker: 'square', tone: 'measured' },
          { id: 'fitted-phase', label: 'fitted', points: rows.map((p, i): [number, number] => [p[1], t.model.phaseDeg[i]]), style: 'points', marker: 'triangle', tone: 'model' },
        ],
      });
      const polar = (amp: number, lagDeg: number): [number, number] => [amp * Math.cos((-lagDeg * Math.PI) / 180), amp * Math.sin((-lagDeg * Math.PI) / 180)];
      const measuredPolar = rows.map((p) => polar(p[2], p[3] as number));
      const modelPolar = rows.map((p, i) => polar(t.model.amplitude[i], t.model.phaseDeg[i]));
      const lim = Math.max(...measuredPolar.flat().map(Math.abs), ...modelPolar.flat().map(Math.abs)) * 1.08 || 1;
      charts.push({
        title: `${r.order} response in the complex plane (polar view)`,
        x: { label: 'in phase with the mark', unit: 'mm/s', min: -lim, max: lim },
        y: { label: 'quadrature', unit: 'mm/s', min: -lim, max: lim },
        equalAspect: true,
        series: [
          { id: 'measured-polar', label: 'measured', points: measuredPolar, style: 'points', marker: 'circle', tone: 'measured' },
          { id: 'fitted-polar', label: 'fitted', points: modelPolar, style: 'solid', tone: 'model' },
        ],
      });
    }
    const decay = r.decay ? [`Free decays: Q ${r.decay.q.toFixed(1)} from ${r.decay.decays} decay(s), ${r.decay.cycles.toFixed(0)} cycles of ringing.`] : [];
    const drift = r.drift ? [r.drift.message] : ['Within the drift tolerances of the map.'];
    const svg = renderFigure(`${r.asset} / ${r.component}: band measured from ${r.order}`, charts, [...drift, ...decay, CAUTION]);
    return { name: `${r.asset}-${r.component}-${r.order}-${k + 1}.svg`, svg };
  })];
}
