/**
 * The words and layout of the demo's terminal view, as pure functions of the agent's messages:
 * the status panel (redrawn in place on a terminal), the one-line status for logs and pipes,
 * alarm events and the closing summary. Data times are shown from the run's start ("+55.9 s")
 * because a person follows the story of the run, not the epoch.
 */
import type { IdentifiedRecord } from '../identification/identifiedRecord.ts';
import type { TransientRecord } from '../transients/transientRecord.ts';
import { wrapWords } from '../text/wrapWords.ts';
import type { AlarmMessage, LifecycleMessage, StateMessage } from '../advisory/messages.ts';
import { zoneBasisText } from '../advisory/zoneBasisText.ts';
import type { AssetConfig, ComponentConfig } from '../config/types.ts';

export interface RunInfo {
  site: string;
  asset: AssetConfig;
  /** Epoch seconds of the run's first sample. */
  startS: number;
  durationS: number;
  speed: number;
}

/** Seconds an order has been seen inside a band, per order id, as the view tracks it. */
export type InBandSince = ReadonlyMap<string, { component: string; sinceS: number }>;

const PAD = '          ';

export function relTime(tS: number, run: RunInfo): string {
  return `+${(tS - run.startS).toFixed(1)} s`;
}

function clock(tS: number): string {
  return new Date(Math.round(tS * 1000)).toISOString().slice(11, 19);
}

function bandText(c: ComponentConfig): string {
  return `${c.bandHz[0].toFixed(2)}-${c.bandHz[1].toFixed(2)} Hz`;
}

function component(run: RunInfo, id: string | null): ComponentConfig | undefined {
  return id === null ? undefined : run.asset.components.find((c) => c.id === id);
}

/** "in band", or how far from the nearest band and on which side. */
function whereText(o: StateMessage['orders'][number], c: ComponentConfig | undefined): string {
  if (o.order_hz === null) return 'speed unknown';
  if (!c) return 'no band it can excite';
  if (o.position === 'inside') return 'IN BAND';
  const side = o.order_hz < c.bandHz[0] ? 'below' : 'above';
  const gap = `${(o.separation_pct ?? 0).toFixed(1)} % ${side}`;
  return o.position === 'deadband' ? `${gap} (deadband)` : gap;
}

function speedText(s: StateMessage): string {
  if (s.speed_rpm === null) return `unknown (${s.speed_state}): no dwell decisions meanwhile`;
  return `${s.speed_rpm.toFixed(0)} rpm (${s.speed_source}${s.speed_source === 'tach' ? '' : `, confidence ${s.speed_confidence.toFixed(2)}`})`;
}

function bar(fraction: number, width: number): string {
  const filled = Math.max(0, Math.min(width, Math.round(fraction * width)));
  return `[${'#'.repeat(filled)}${'.'.repeat(width - filled)}]`;
}

/** Text width of the panel's wrapped lines after their 14-column label (the view is 100 wide by default). */
const PANEL_TEXT_WIDTH = 84;


/** The panel redrawn in place on a terminal. */
export function panelLines(s: StateMessage | null, run: RunInfo, inBand: InBandSince, agentState: string): string[] {
  const head = `== ${run.asset.id} at ${run.site}, simulated; pace ${run.speed}x ==`;
  if (!s) return [head, `  waiting for the agent's first state message (agent ${agentState})`];
  const relS = s.t_s - run.startS;
  const lines = [
    head,
    `  data time   ${relTime(s.t_s, run)} of ${run.durationS.toFixed(1)} s ${bar(relS / run.durationS, 20)} ${clock(s.t_s)} UTC`,
    `  shaft       ${speedText(s)}`,
  ];
  const rows = s.orders.map((o) => {
    const c = component(run, o.nearest_component);
    let where = whereText(o, c);
    const seen = inBand.get(o.order);
    const active = s.active.find((a) => a.order === o.order && a.component === o.nearest_component);
    if (active) where += active.state === 'active' ? `, ALARM ${active.priority}` : `, alarm clearing`;
    else if (seen && o.position === 'inside') where += ` ~${Math.max(0, s.t_s - seen.sinceS).toFixed(0)} of ${run.asset.alarm.onDelayS} s`;
    return [o.order, o.order_hz === null ? '-' : o.order_hz.toFixed(2), c ? `${c.id} ${c.bandHz[0].toFixed(2)}-${c.bandHz[1].toFixed(2)}` : '-', where];
  });
  const widths = [0, 1, 2].map((i) => Math.max(['order', 'Hz', 'nearest band (Hz)'][i].length, ...rows.map((r) => r[i].length)));
  const row = (r: string[]) => `  ${r[0].padEnd(Math.max(widths[0], 10))}  ${r[1].padStart(widths[1])}  ${r[2].padEnd(widths[2])}  ${r[3]}`;
  lines.push(row(['order', 'Hz', 'nearest band (Hz)', 'position']), ...rows.map(row));
  lines.push(
    `  alarms      ${
      s.active.length === 0
        ? 'none active'
        : s.active.map((a) => `${a.component} / ${a.order} ${a.state}, ${a.priority}, ${a.dwell_s.toFixed(1)} s in band${a.acknowledged ? ', acknowledged' : ''}`).join('; ')
    }`,
    ...s.exposure.map((e, i) => `  ${i === 0 ? 'exposure' : ''}`.padEnd(14) + `${e.component} ${e.seconds_in_band.toFixed(1)} s in band, ${e.cycles.toFixed(0)} cycles`),
  );
  if (s.severity.length > 0) {
    lines.push(`  vibration   ${s.severity.map((v) => `${v.sensor} ${v.velocity_rms_mm_s.toFixed(2)} mm/s RMS, severity zone ${v.zone}`).join('   ')}`);
    // The basis is long and must be read whole (its caveat is the point): wrapped, not cut.
    lines.push(...wrapWords(zoneBasisText(s.severity), PANEL_TEXT_WIDTH).map((l) => `              ${l}`));
  }
  const dropped = droppedCount(s.counters);
  lines.push(`  agent       ${agentState}; ${s.counters.blocks_received ?? 0} blocks received, ${dropped} dropped${s.freshness.stale ? '; DATA STALE' : ''}`);
  return lines;
}

/**
 * One line for logs and pipes: orders grouped by their nearest band, each with its frequency
 * and IN, or its signed distance from the band in percent of fn (- below, + above).
 */
export function statusLine(s: StateMessage, run: RunInfo): string {
  const head = `${relTime(s.t_s, run).padStart(9)}  `;
  if (s.speed_rpm === null) return `${head}speed ${speedText(s)}`;
  const groups = new Map<string, string[]>();
  for (const o of s.orders) {
    const c = component(run, o.nearest_component);
    const key = c ? c.id : '(no band)';
    const freq = o.order_hz === null ? '?' : `${o.order_hz.toFixed(1)} Hz`;
    let where = '';
    if (c && o.order_hz !== null) {
      const sign = o.order_hz < c.bandHz[0] ? '-' : '+';
      where = o.position === 'inside' ? ' IN' : ` ${sign}${(o.separation_pct ?? 0).toFixed(1)} %`;
    }
    groups.set(key, [...(groups.get(key) ?? []), `${o.order} ${freq}${where}`]);
  }
  const orders = [...groups].map(([c, list]) => `${c}: ${list.join(', ')}`).join(' | ');
  const active = s.active.length === 0 ? '' : `  [alarm ${s.active.map((a) => `${a.component} / ${a.order} ${a.state} ${a.priority}`).join(', ')}]`;
  return `${head}${s.speed_rpm.toFixed(0).padStart(4)} rpm  ${orders}${active}`;
}

/** What changes the story besides orders entering and leaving bands: speed state, active alarms. */
export function storyKey(s: StateMessage): string {
  const active = s.active.map((a) => `${a.component}/${a.order}/${a.state}/${a.priority}`).join(',');
  return `${s.speed_state}|${active}`;
}

/** An order seen inside a band for the first time (state messages come every second of data). */
export function bandEntryLine(o: StateMessage['orders'][number], s: StateMessage, run: RunInfo): string {
  const c = component(run, o.nearest_component);
  const pairs = c ? ` (${bandText(c)})` : '';
  const watched = c?.orderIds.includes(o.order) ?? false;
  const then = watched ? `; an alarm follows if it stays ${run.asset.alarm.onDelayS} s` : '';
  return `${relTime(s.t_s, run).padStart(9)}  ${o.order} entered the ${o.nearest_component} band${pairs} at ${s.speed_rpm?.toFixed(0) ?? '?'} rpm${then}`;
}

/** An order no longer inside the band it was in; dwellS is measured on the state messages. */
export function bandExitLine(order: string, componentId: string, dwellS: number, s: StateMessage, run: RunInfo, raised: boolean): string {
  const short = dwellS < run.asset.alarm.onDelayS && !raised ? `, shorter than the ${run.asset.alarm.onDelayS} s on-delay: counted as exposure, no alarm` : '';
  const speed = s.speed_rpm === null ? '' : ` at ${s.speed_rpm.toFixed(0)} rpm`;
  return `${relTime(s.t_s, run).padStart(9)}  ${order} left the ${componentId} band${speed} after about ${dwellS.toFixed(0)} s in it${short}`;
}

const EVENT_WORD: Record<AlarmMessage['event'] | LifecycleMessage['event'], string> = {
  raise: 'RAISED',
  escalate: 'ESCALATED',
  clear: 'CLEARED',
  acknowledge: 'acknowledged',
  shelve: 'shelved',
  unshelve: 'unshelved',
};

/** An alarm event: a headline and its evidence, then the advisory line wrapped. */
export function alarmEventLines(m: AlarmMessage | LifecycleMessage, run: RunInfo, width: number): string[] {
  const head = `${relTime(m.t_s, run).padStart(9)}  ${EVENT_WORD[m.event].padEnd(10)} ${m.component} / ${m.order}`;
  const lines: string[] = [];
  if (!isAlarmEvent(m)) {
    lines.push(`${head}${m.by ? ` by ${m.by}` : ''}`);
    return lines.concat(wrap(m.advice, width, PAD));
  }
  const band = `${m.band_hz[0].toFixed(2)}-${m.band_hz[1].toFixed(2)} Hz`;
  const speed = m.speed_rpm === null ? 'speed unknown' : `${m.speed_rpm.toFixed(0)} rpm`;
  const order = m.order_hz === null ? m.order : `${m.order} at ${m.order_hz.toFixed(2)} Hz`;
  if (m.event === 'clear') {
    lines.push(`${head}   (was ${m.priority})`);
    lines.push(...wrap(`${order}, ${speed}: out of ${band} beyond the deadband for the ${run.asset.alarm.offDelayS} s off-delay. It dwelt ${m.dwell_s.toFixed(1)} s in the band, ${m.cycles.toFixed(0)} response cycles.`, width, PAD));
  } else {
    const why = m.event === 'escalate' ? (m.reason === 'growth' ? ', the response grew' : ', the dwell goes on') : '';
    lines.push(`${head}   priority ${m.priority}${why}`);
    lines.push(...wrap(`${order}, ${speed}: inside ${band} for ${m.dwell_s.toFixed(1)} s, ${m.cycles.toFixed(0)} response cycles (on-delay ${run.asset.alarm.onDelayS} s).`, width, PAD));
    if (m.amplitude) {
      const a = m.amplitude;
      let evidence = `Evidence: ${m.order} reads ${a.velocity_rms_mm_s.toFixed(2)} mm/s RMS on ${a.sensor}`;
      if (a.outside_band && a.ratio_to_outside !== null) {
        evidence += `, ${a.ratio_to_outside.toFixed(1)} times the ${a.outside_band.velocity_rms_mm_s.toFixed(2)} mm/s it read at ${a.outside_band.speed_rpm.toFixed(0)} rpm outside the band`;
      }
      lines.push(...wrap(`${evidence}.`, width, PAD));
    }
    lines.push(...wrap(`Shaft speeds ${m.speed_band_rpm[0].toFixed(0)}-${m.speed_band_rpm[1].toFixed(0)} rpm hold ${m.order} in this band.`, width, PAD));
  }
  lines.push(...wrap(m.advice, width, PAD));
  return lines;
}

export function isAlarmEvent(m: AlarmMessage | LifecycleMessage): m is AlarmMessage {
  return m.event === 'raise' || m.event === 'escalate' || m.event === 'clear';
}

export interface SummaryInput {
  run: RunInfo;
  alarms: AlarmMessage[];
  lastState: StateMessage | null;
  presence: string[];
  blocksPublished: number;
  topics: number;
  dataS: number;
  wallS: number;
  aborted: boolean;
  logPath: string;
  broker: string;
}

export function summaryLines(x: SummaryInput, width: number): string[] {
  const { run } = x;
  const count = (e: AlarmMessage['event']) => x.alarms.filter((a) => a.event === e).length;
  const lines = [`Summary${x.aborted ? ' (stopped early)' : ''}`];
  const row = (label: string, text: string) => {
    const wrapped = wrap(text, width, ' '.repeat(14));
    wrapped[0] = `  ${label.padEnd(12)}${wrapped[0].slice(14)}`;
    lines.push(...wrapped);
  };
  const dropped = x.lastState ? droppedCount(x.lastState.counters) : 0;
  row('data', `${x.dataS.toFixed(1)} s of the ${run.durationS.toFixed(1)} s run in ${x.wallS.toFixed(1)} s; ${x.blocksPublished} blocks on ${x.topics} topics, ${dropped === 0 ? 'none' : dropped} dropped by the agent`);
  const active = x.lastState && x.lastState.active.length > 0 ? `${x.lastState.active.length} still active` : 'none active at the end';
  row('alarms', `${count('raise')} raised, ${count('escalate')} escalated, ${count('clear')} cleared; ${active}`);
  for (const pair of pairsOf(x.alarms)) {
    const events = x.alarms.filter((a) => `${a.component} / ${a.order}` === pair);
    row('', `${pair}: ${events.map((a) => `${EVENT_WORD[a.event].toLowerCase()} at ${relTime(a.t_s, run)}`).join(', ')}`);
  }
  const raised = new Set(x.alarms.map((a) => a.component));
  for (const [i, e] of (x.lastState?.exposure ?? []).entries()) {
    const quiet = e.seconds_in_band > 0 && !raised.has(e.component) ? `; no alarm: no stay in the band reached the ${run.asset.alarm.onDelayS} s on-delay` : '';
    row(i === 0 ? 'exposure' : '', `${e.component}: ${e.seconds_in_band.toFixed(1)} s in band, ${e.cycles.toFixed(0)} response cycles${quiet}`);
  }
  row('agent', `presence ${x.presence.join(' -> ') || 'never seen'}; its log: ${x.logPath}`);
  row('broker', x.broker);
  lines.push(...wrap('qband advises only and never stops a machine. The machine and the site are fictional.', width, '  '));
  return lines;
}

function pairsOf(alarms: AlarmMessage[]): string[] {
  return [...new Set(alarms.map((a) => `${a.component} / ${a.order}`))];
}

function droppedCount(counters: Record<string, number>): number {
  let n = 0;
  // Every input the agent did not use is counted once under drop_<reason> (sequencer drops too).
  for (const [k, v] of Object.entries(counters)) if (k.startsWith('drop_')) n += v;
  return n;
}

/** A transient the agent recorded, or a band it measured: one line, and the advice wrapped. */
export function learningLines(m: TransientRecord | IdentifiedRecord, run: RunInfo, width: number): string[] {
  if (m.kind === 'transient') {
    const what = m.direction === 'up' ? 'run-up' : 'coast-down';
    const [first, ...rest] = wrap(
      `${what} recorded: ${Math.round(m.speed_from_rpm)} -> ${Math.round(m.speed_to_rpm)} rpm over ${(m.t_end_s - m.t_start_s).toFixed(1)} s; the agent fits the bands it swept`,
      width,
      ' '.repeat(11),
    );
    return [`${relTime(m.t_end_s, run).padStart(9)}  ${first.trimStart()}`, ...rest];
  }
  const text = `band measured: ${m.component} fn ${m.fn_hz.toFixed(2)} Hz (map ${m.map_fn_hz}), Q ${m.q.toFixed(1)} (map ${m.map_q.toFixed(1)}) from ${m.order}, ${m.method}; ${m.drift ? m.drift.message : "within the map's tolerances: nothing to change"}`;
  return wrap(text, width, ' '.repeat(11));
}

/** Word-wraps text to `width` columns, every line starting with `indent`. */
export function wrap(text: string, width: number, indent: string): string[] {
  // Leave the last column free: some terminals wrap a line that fills it.
  const room = Math.max(20, width - 1 - indent.length);
  return wrapWords(text.split(/\s+/).filter(Boolean).join(' '), room).map((l) => indent + l);
}
