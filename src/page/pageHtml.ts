/**
 * The operator page as HTML: the shell (no inline script or style: /page.js and /page.css) and
 * its sections, each an element with an id that the server pushes again when it changes. Every
 * value is escaped; the diagram is the interference diagram of `qband plan` with the current
 * speed on it, drawn by the one renderer.
 *
 * The look is plain: grey on a light background, the alert colour only for what is abnormal
 * (an active alarm, an order inside a band, stale data, a lost broker), which also says so in
 * words and carries a shape (the ! badge).
 */
import type { AssetConfig } from '../config/types.ts';
import type { AssetPlan } from '../physics/assetPlan.ts';
import { interferenceChart } from '../render/interferenceDiagram.ts';
import { escapeXml as esc, renderFigure } from '../render/svgChart.ts';
import type { AssetView } from './siteModel.ts';

export interface Health {
  site: string;
  connected: boolean;
  journalPending: number;
  /** Whether acknowledge and shelve are possible here (a token is configured). */
  commandsEnabled: boolean;
  nowMs: number;
}

const n = (v: number | null | undefined, digits = 1): string => (v === null || v === undefined || !Number.isFinite(v) ? '-' : v.toFixed(digits));
const time = (tS: number): string => (Number.isFinite(tS) ? new Date(tS * 1000).toISOString().slice(11, 19) : '-');
const bad = (text: string): string => `<strong class="abnormal"><span class="badge" aria-hidden="true">!</span> ${text}</strong>`;

export function sectionId(asset: string): string {
  return `asset-${asset.replace(/[^A-Za-z0-9_-]/g, '_')}`;
}

export function pageShell(health: Health, healthHtml: string, sections: string[]): string {
  return `<!doctype html>
<html lang="en"><head><meta charset="utf-8"><meta name="viewport" content="width=device-width, initial-scale=1">
<title>qband - ${esc(health.site)}</title><link rel="icon" href="data:,"><link rel="stylesheet" href="/page.css"><script src="/page.js" defer></script></head>
<body data-commands="${health.commandsEnabled ? 'on' : 'off'}">
<header><h1>qband <span class="site">${esc(health.site)}</span></h1>
<p class="notice">Advisory only: qband never stops or controls a machine. Respond under the site procedure named with each alarm, local codes and licensed practice.</p>
<div id="link" class="link" role="status">Connecting to the agent...</div>
${operatorBox(health.commandsEnabled)}
</header>
${healthHtml}
<main>${sections.join('\n')}</main>
</body></html>
`;
}

function operatorBox(enabled: boolean): string {
  if (!enabled) return `<p id="operator" class="readonly">Read-only: this agent has no operator token configured, so acknowledge and shelve are not offered here (use the MQTT command topic).</p>`;
  return `<form id="operator" class="operator" autocomplete="off"><label>Site token <input id="token" type="password" size="24"></label>
<label>Your name <input id="by" type="text" size="16" maxlength="200"></label>
<span id="token-state">Read-only until a token is entered.</span> <span id="command-result" role="status"></span></form>`;
}

export function healthSection(h: Health, views: Map<string, { view: AssetView; silenceS: number | null }>): string {
  const rows = [...views].map(([id, { view, silenceS }]) => {
    const s = view.state;
    const fresh = s?.freshness;
    const drops = s ? Object.entries(s.counters).filter(([k, v]) => (k.startsWith('drop_') || k.startsWith('reset_') || k === 'seq_gap') && v > 0) : [];
    const stale = !s || fresh?.stale || (silenceS !== null && silenceS > 10);
    const age = !s ? 'no state yet' : fresh?.data_age_s === null ? 'no data received yet' : `data ${n(fresh?.data_age_s)} s old`;
    return `<tr><th scope="row">${esc(id)}</th><td>${stale ? bad(`STALE: ${esc(age)}`) : esc(age)}</td><td>${s ? esc(String(s.counters.blocks_received ?? 0)) : '-'}</td><td>${drops.length ? esc(drops.map(([k, v]) => `${k.replace(/^drop_/, '')} ${v}`).join(', ')) : 'none'}</td></tr>`;
  });
  return `<section id="health" class="health"><h2>Agent health</h2>
<p>Broker: ${h.connected ? 'connected' : bad('NOT CONNECTED (alarm events wait in the journal)')}. Journal: ${h.journalPending} alarm event${h.journalPending === 1 ? '' : 's'} waiting for the broker. Page time ${esc(new Date(h.nowMs).toISOString().slice(11, 19))} UTC.</p>
<table><thead><tr><th>asset</th><th>data freshness</th><th>blocks received</th><th>dropped or reset</th></tr></thead><tbody>${rows.join('')}</tbody></table></section>`;
}

export function assetSection(asset: AssetConfig, plan: AssetPlan, view: AssetView, commandsEnabled: boolean): string {
  const s = view.state;
  const alarmed = new Set((s?.active ?? []).map((a) => `${a.component}/${a.order}`));
  const speedRpm = s && s.speed_state === 'ok' ? s.speed_rpm : null;
  const chart = interferenceChart(plan, s ? { speedRpm, orders: s.orders, alarmed } : undefined);
  const svg = renderFigure(`${asset.id}${asset.description ? `: ${asset.description}` : ''}`, [chart], [], { idPrefix: asset.id });
  const speed = !s ? 'waiting for the agent\'s first state' : s.speed_state === 'ok' ? `${n(s.speed_rpm, 0)} rpm (${esc(s.speed_source ?? '?')}, confidence ${n(s.speed_confidence, 2)}), at ${time(s.t_s)}` : bad(`speed unknown (${esc(s.speed_state)}): no dwell decisions`);
  return `<section id="${sectionId(asset.id)}" class="asset${alarmed.size ? ' alarmed' : ''}" data-asset="${esc(asset.id)}">
<h2>${esc(asset.id)} ${alarmed.size ? bad(`${alarmed.size} ACTIVE ALARM${alarmed.size === 1 ? '' : 'S'}`) : '<span class="normal">no active alarm</span>'}</h2>
<p class="speed">Shaft speed: <span class="speed-value" data-rpm="${speedRpm ?? ''}">${speed}</span>. Operating range ${asset.speed.rangeRpm[0]}-${asset.speed.rangeRpm[1]} rpm.</p>
${alarmsBlock(asset, view, commandsEnabled)}
<div class="diagram">${svg}</div>
<div class="columns">
${ordersTable(view)}
${exposureTable(view)}
</div>
${skipBlock(plan)}
${learningBlock(view)}
</section>`;
}

function alarmsBlock(asset: AssetConfig, view: AssetView, commandsEnabled: boolean): string {
  const active = view.state?.active ?? [];
  if (active.length === 0) return '<div class="alarms"><h3>Active alarms</h3><p>None.</p></div>';
  const items = active.map((a) => {
    const key = `${a.component}/${a.order}`;
    const button = (action: string, text: string, durationS?: number) =>
      `<button type="button" data-action="${action}"${durationS ? ` data-duration="${durationS}"` : ''} data-asset="${esc(asset.id)}" data-component="${esc(a.component)}" data-order="${esc(a.order)}">${text}</button>`;
    const m = view.alarms.get(key);
    const ev = m?.amplitude;
    const evidence = ev
      ? `${n(ev.velocity_rms_mm_s, 2)} mm/s at ${n(ev.line_hz, 2)} Hz on ${esc(ev.sensor)}${ev.ratio_to_outside !== null ? `, ${n(ev.ratio_to_outside, 1)} x its level outside the band` : ''}`
      : 'no amplitude evidence (speed-based)';
    const shelved = a.shelved_until ? ` Shelved until ${esc(a.shelved_until)}.` : '';
    const buttons = commandsEnabled
      ? `<div class="actions">${a.acknowledged ? '' : button('acknowledge', 'Acknowledge')}${a.shelved_until ? button('unshelve', 'Unshelve') : button('shelve', 'Shelve 1 h', 3600)}</div>`
      : '';
    return `<li class="alarm" data-key="${esc(key)}">${bad(`${esc(a.priority.toUpperCase())}: ${esc(a.order)} dwelling in ${esc(a.component)}`)} for ${n(a.dwell_s, 0)} s (${esc(a.state)}), ${a.acknowledged ? 'acknowledged' : 'NOT acknowledged'}.${shelved}
<br>Band ${m ? `${n(m.band_hz[0], 2)}-${n(m.band_hz[1], 2)} Hz, speed band ${n(m.speed_band_rpm[0], 0)}-${n(m.speed_band_rpm[1], 0)} rpm` : '-'}; evidence: ${evidence}${m ? `; raised ${esc(m.time)}` : ''}.
<br>Advice: ${esc(m?.advice ?? 'see the alarm event')}
<br>Site procedure: <em>${esc(asset.procedure || 'none named in the map')}</em>${buttons}</li>`;
  });
  return `<div class="alarms"><h3>Active alarms</h3><ul>${items.join('')}</ul></div>`;
}

function ordersTable(view: AssetView): string {
  const orders = view.state?.orders ?? [];
  const rows = orders.map((o) => {
    const inside = o.position === 'inside';
    const where = o.position === 'unknown' ? 'unknown' : o.position === 'outside' ? `outside, ${n(o.separation_pct)} % of fn from it` : o.position === 'deadband' ? 'in the deadband' : 'INSIDE the band';
    return `<tr${inside ? ' class="abnormal-row"' : ''}><th scope="row">${esc(o.order)}</th><td>${n(o.order_hz, 2)}</td><td>${esc(o.nearest_component ?? '-')}</td><td>${inside ? bad(where) : esc(where)}</td></tr>`;
  });
  return `<div><h3>Orders against their nearest band</h3><table><thead><tr><th>order</th><th>Hz now</th><th>nearest band</th><th>position</th></tr></thead><tbody>${rows.join('') || '<tr><td colspan="4">no state yet</td></tr>'}</tbody></table></div>`;
}

function exposureTable(view: AssetView): string {
  const rows = (view.state?.exposure ?? []).map((e) => `<tr><th scope="row">${esc(e.component)}</th><td>${n(e.seconds_in_band, 0)}</td><td>${n(e.cycles, 0)}</td></tr>`);
  return `<div><h3>Exposure per component</h3><table><thead><tr><th>component</th><th>s in band</th><th>cycles</th></tr></thead><tbody>${rows.join('') || '<tr><td colspan="3">no state yet</td></tr>'}</tbody></table></div>`;
}

function skipBlock(plan: AssetPlan): string {
  const bands = plan.skipBands.map((b) => `${Math.floor(b.loRpm)}-${Math.ceil(b.hiRpm)} rpm (${esc(b.crossings.join(', '))})`);
  return `<p class="skip">Skip bands for the drive (qband plan): ${bands.length ? bands.join('; ') : 'none'}. Usable ${n(plan.usablePct)} % of the range.</p>`;
}

function learningBlock(view: AssetView): string {
  const parts: string[] = [];
  if (view.transients.length) {
    parts.push(`<h3>Recent transients</h3><ul>${view.transients
      .slice()
      .reverse()
      .map((t) => `<li>${t.direction === 'up' ? 'run-up' : 'coast-down'} ${time(t.t_start_s)}-${time(t.t_end_s)}: ${n(t.speed_from_rpm, 0)} to ${n(t.speed_to_rpm, 0)} rpm at ${n(t.rate_rpm_s)} rpm/s (${esc(t.ended_by)})</li>`)
      .join('')}</ul>`);
  }
  if (view.identified.size) {
    parts.push(`<h3>Identified bands</h3><ul>${[...view.identified.values()]
      .map((r) => `<li>${esc(r.component)} from ${esc(r.order)}: fn ${n(r.fn_hz, 2)} Hz (map ${n(r.map_fn_hz, 2)}), Q ${n(r.q)} (map ${n(r.map_q)})${r.drift ? ` ${bad('DRIFT')} ${esc(r.drift.message)}` : ', within tolerance'}</li>`)
      .join('')}</ul>`);
  }
  if (view.rejected.length) parts.push(`<h3>Refused commands</h3><ul>${view.rejected.map((r) => `<li>${esc(r.reason)}: ${esc(r.detail)}</li>`).join('')}</ul>`);
  return parts.length ? `<div class="learning">${parts.join('')}</div>` : '';
}
