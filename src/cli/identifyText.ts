/**
 * `qband identify` for people: the transients found, then one block per band measured (a
 * table row an engineer reads in a minute, and the drift advisory with the lines to change),
 * then what was swept but could not be measured, and why.
 */
import type { IdentifyOutcome } from '../identification/identifyComponents.ts';
import type { TransientRecord } from '../transients/transientRecord.ts';

const CAUTION =
  'Identification advises: confirm a measured band (another run-up, an impact test) before editing the map; a band measured on one mode shape is not a safety case. qband never stops a machine; site procedures, local codes and licensed practice apply.';

function pad(s: string, n: number): string {
  return s.length >= n ? s : s + ' '.repeat(n - s.length);
}

export function identifyText(assetId: string, recording: string, transients: TransientRecord[], outcome: IdentifyOutcome): string {
  const lines: string[] = [`identify ${assetId} from ${recording}`];
  if (transients.length === 0) lines.push('  no run-up or coast-down found (see transients.min_sweep_pct and min_rate_pct_per_s in the map)');
  for (const t of transients) {
    lines.push(
      `  ${t.direction === 'up' ? 'run-up    ' : 'coast-down'} ${t.t_start_s.toFixed(1)}-${t.t_end_s.toFixed(1)} s  ${Math.round(t.speed_from_rpm)} -> ${Math.round(t.speed_to_rpm)} rpm  (${Math.abs(t.rate_rpm_s).toFixed(0)} rpm/s, speed ${t.speed_source}${t.phase_reference ? ', phase' : ''})`,
    );
  }
  lines.push('');
  if (outcome.identified.length > 0) {
    const head = `${pad('component', 18)}${pad('order', 11)}${pad('fn Hz measured (map)', 28)}${pad('Q measured (map)', 24)}${pad('R^2', 7)}${pad('from', 24)}decay Q`;
    lines.push(head, '-'.repeat(head.length));
    for (const { record: r } of outcome.identified) {
      const fnHalf = (r.fn_bounds_hz[1] - r.fn_bounds_hz[0]) / 2;
      const qHalf = (r.q_bounds[1] - r.q_bounds[0]) / 2;
      lines.push(
        `${pad(r.component, 18)}${pad(r.order, 11)}${pad(`${r.fn_hz.toFixed(3)} +-${fnHalf.toFixed(3)} (${r.map_fn_hz})`, 28)}${pad(`${r.q.toFixed(1)} +-${qHalf < 0.1 ? qHalf.toFixed(2) : qHalf.toFixed(1)} (${r.map_q.toFixed(1)})`, 24)}${pad(r.fit_r2.toFixed(3), 7)}${pad(`${r.transients.length} sweep(s), ${r.method === 'amplitude' ? 'amp' : r.method === 'free decay' ? 'decays' : 'amp+phase'}`, 24)}${r.decay ? `${r.decay.q.toFixed(1)} (${r.decay.decays})` : '-'}`,
      );
    }
    for (const { record: r } of outcome.identified) {
      if (!r.drift) continue;
      lines.push('', `drift: ${r.drift.message}`);
      if (r.drift.yaml_now) {
        lines.push('  the map has:', ...r.drift.yaml_now.split('\n').map((l) => `    ${l}`));
        lines.push('  the measurement would have:', ...r.drift.yaml_measured.split('\n').map((l) => `    ${l}`));
      } else lines.push(`  the measurement would have: ${r.drift.yaml_measured}`);
      for (const c of r.drift.crossings) lines.push(`  ${c.order}: ${c.effect}`);
    }
  } else lines.push('no band measured');
  if (outcome.rejected.length > 0) {
    lines.push('', 'swept but not measured:');
    for (const r of outcome.rejected) lines.push(`  ${r.component} / ${r.order}: ${r.reason}`);
  }
  lines.push('', CAUTION, '');
  return lines.join('\n');
}
