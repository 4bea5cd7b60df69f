/**
 * Metrics for plant IT, in the Prometheus text exposition (prom-client), read from the same
 * SiteModel as the page at every scrape: base units, `_total` for what only grows.
 */
import { Counter, Gauge, Registry } from 'prom-client';
import type { SiteModel } from './siteModel.ts';

export interface MetricsSource {
  model: SiteModel;
  connected: () => boolean;
  journalPending: () => number;
  nowMs: () => number;
}

export function siteMetrics(src: MetricsSource): Registry {
  const registry = new Registry();
  const states = () => [...src.model.assets].flatMap(([id, v]) => (v.state ? [[id, v.state] as const] : []));
  new Gauge({
    name: 'qband_speed_rpm',
    help: 'Shaft speed of the asset, revolutions per minute (absent while unknown).',
    labelNames: ['asset'],
    registers: [registry],
    collect() {
      this.reset();
      for (const [asset, s] of states()) if (s.speed_state === 'ok' && s.speed_rpm !== null) this.set({ asset }, s.speed_rpm);
    },
  });
  new Gauge({
    name: 'qband_order_separation_ratio',
    help: "Distance of each order from its nearest component band, as a fraction of that component's fn (0 inside the band).",
    labelNames: ['asset', 'order', 'component', 'position'],
    registers: [registry],
    collect() {
      this.reset();
      for (const [asset, s] of states()) {
        for (const o of s.orders) {
          if (o.separation_pct === null || o.nearest_component === null) continue;
          this.set({ asset, order: o.order, component: o.nearest_component, position: o.position }, o.separation_pct / 100);
        }
      }
    },
  });
  new Gauge({
    name: 'qband_alarms_active',
    help: 'Active dwell alarms by priority.',
    labelNames: ['asset', 'priority'],
    registers: [registry],
    collect() {
      this.reset();
      for (const [asset, s] of states()) {
        for (const priority of ['low', 'medium', 'high', 'urgent']) this.set({ asset, priority }, s.active.filter((a) => a.priority === priority).length);
      }
    },
  });
  const exposure = (name: string, help: string, field: 'seconds_in_band' | 'cycles') =>
    new Counter({
      name,
      help,
      labelNames: ['asset', 'component'],
      registers: [registry],
      collect() {
        this.reset();
        for (const [asset, s] of states()) for (const e of s.exposure) this.inc({ asset, component: e.component }, e[field]);
      },
    });
  exposure('qband_exposure_seconds_total', 'Seconds an order of the asset has spent inside the component band.', 'seconds_in_band');
  exposure('qband_exposure_cycles_total', 'Response cycles accumulated inside the component band.', 'cycles');
  new Counter({
    name: 'qband_blocks_received_total',
    help: 'Sample blocks received for the asset.',
    labelNames: ['asset'],
    registers: [registry],
    collect() {
      this.reset();
      for (const [asset, s] of states()) this.inc({ asset }, s.counters.blocks_received ?? 0);
    },
  });
  new Counter({
    name: 'qband_blocks_dropped_total',
    help: 'Input blocks, speed records and commands dropped, by reason (docs/errors.md).',
    labelNames: ['asset', 'reason'],
    registers: [registry],
    collect() {
      this.reset();
      for (const [asset, s] of states()) {
        for (const [k, v] of Object.entries(s.counters)) if (k.startsWith('drop_')) this.inc({ asset, reason: k.slice(5) }, v);
      }
    },
  });
  new Gauge({
    name: 'qband_data_age_seconds',
    help: 'Wall-clock seconds since data last arrived for the asset, as of its last state.',
    labelNames: ['asset'],
    registers: [registry],
    collect() {
      this.reset();
      for (const [asset, s] of states()) if (s.freshness.data_age_s !== null) this.set({ asset }, s.freshness.data_age_s);
    },
  });
  new Gauge({
    name: 'qband_state_age_seconds',
    help: 'Wall-clock seconds since the agent last published a state of the asset.',
    labelNames: ['asset'],
    registers: [registry],
    collect() {
      this.reset();
      for (const asset of src.model.assets.keys()) {
        const age = src.model.silenceS(asset, src.nowMs());
        if (age !== null) this.set({ asset }, age);
      }
    },
  });
  new Gauge({
    name: 'qband_journal_pending_events',
    help: 'Alarm events journaled and not yet acknowledged by the broker.',
    registers: [registry],
    collect() {
      this.set(src.journalPending());
    },
  });
  new Gauge({
    name: 'qband_broker_connected',
    help: '1 while the connection to the MQTT broker is up, else 0.',
    registers: [registry],
    collect() {
      this.set(src.connected() ? 1 : 0);
    },
  });
  return registry;
}
