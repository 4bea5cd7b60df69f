import sparkplugPayload from 'sparkplug-payload';
import { TestScheduler } from 'rxjs/testing';
import { map, Subject } from 'rxjs';
import { describe, expect, it } from 'vitest';
import type { Outbound } from '../src/agent/outbound.ts';
import type { StateMessage } from '../src/advisory/messages.ts';
import { deviceMetrics, highestPriority } from '../src/sparkplug/deviceMetrics.ts';
import { deviceUpdates, observed } from '../src/sparkplug/deviceUpdates.ts';
import { encodeFrame } from '../src/sparkplug/sparkplugNode.ts';
import { SparkplugSession } from '../src/sparkplug/sparkplugSession.ts';

// The edge node's message rules as a host relies on them (Eclipse Sparkplug 3.0, from memory):
// NBIRTH seq 0, every later node message the next seq mod 256, bdSeq the same in a connection's
// NDEATH and NBIRTH, DBIRTH before DDATA and again for a metric its birth did not list.
const codec = sparkplugPayload.get('spBv1.0')!;

function state(over: Partial<StateMessage> = {}): StateMessage {
  return {
    kind: 'state',
    asset: 'pump-1',
    t_s: 100,
    time: '',
    speed_rpm: 812.5,
    speed_source: 'tach',
    speed_confidence: 1,
    speed_state: 'ok',
    orders: [{ order: '1x', order_hz: 13.5, nearest_component: 'reed', position: 'outside', separation_pct: 4.9 }],
    active: [],
    exposure: [{ component: 'reed', seconds_in_band: 12, cycles: 160 }],
    severity: [],
    freshness: { data_age_s: 0.4, stale: false },
    counters: {},
    ...over,
  } as StateMessage;
}

describe('Sparkplug session', () => {
  it('NBIRTH carries seq 0, bdSeq and the rebirth control; NDEATH the same bdSeq and no seq', () => {
    const s = new SparkplugSession('plant-a', 'edge-1', 7);
    const birth = codec.decodePayload(encodeFrame(s.nbirth(1000)));
    const death = codec.decodePayload(encodeFrame(s.ndeath(1000)));
    expect(Number(birth.seq)).toBe(0);
    const byName = (p: typeof birth) => Object.fromEntries((p.metrics ?? []).map((m) => [m.name, m]));
    expect(Number(byName(birth).bdSeq.value)).toBe(7);
    expect(byName(birth).bdSeq.type).toBe('Int64');
    expect(byName(birth)['Node Control/Rebirth']).toMatchObject({ type: 'Boolean', value: false });
    expect(Number(byName(death).bdSeq.value)).toBe(7);
    expect(death.seq ?? null).toBeNull();
    expect(s.nodeTopic('NBIRTH')).toBe('spBv1.0/plant-a/NBIRTH/edge-1');
    expect(s.deviceTopic('DDATA', 'pump-1')).toBe('spBv1.0/plant-a/DDATA/edge-1/pump-1');
  });

  it('DBIRTH first, then DDATA with only the changed metrics, nothing when none changed; seq wraps 255 -> 0', () => {
    const s = new SparkplugSession('g', 'e', 0);
    s.nbirth(0);
    const first = s.update('pump-1', deviceMetrics(state()), 1)!;
    expect(first.topic).toContain('/DBIRTH/');
    expect(first.payload.seq).toBe(1);
    expect(s.update('pump-1', deviceMetrics(state()), 2)).toBeNull();
    const next = s.update('pump-1', deviceMetrics(state({ speed_rpm: 820 })), 3)!;
    expect(next.topic).toContain('/DDATA/');
    expect(next.payload.metrics).toEqual([{ name: 'speed_rpm', type: 'Double', value: 820 }]);
    const seqs = [next.payload.seq!];
    for (let i = 0; i < 300; i++) seqs.push(s.update('pump-1', deviceMetrics(state({ speed_rpm: 821 + i })), 4 + i)!.payload.seq!);
    for (let i = 1; i < seqs.length; i++) expect(seqs[i]).toBe((seqs[i - 1] + 1) % 256);
    expect(seqs).toContain(255);
    expect(seqs[seqs.indexOf(255) + 1]).toBe(0);
  });

  it('a metric the birth did not list (an order added by a reload) brings a new DBIRTH; a rebirth starts seq at 0', () => {
    const s = new SparkplugSession('g', 'e', 0);
    s.nbirth(0);
    s.update('pump-1', deviceMetrics(state()), 1);
    const more = state({ orders: [...state().orders, { order: '2x', order_hz: 27, nearest_component: 'reed', position: 'outside', separation_pct: 90 }] });
    expect(s.update('pump-1', deviceMetrics(more), 2)!.topic).toContain('/DBIRTH/');
    expect(s.nbirth(3).payload.seq).toBe(0);
    expect(s.update('pump-1', deviceMetrics(more), 4)!.topic).toContain('/DBIRTH/');
  });

  it('device metrics: speed, separation per order, alarm count and highest priority, exposure per component, data age', () => {
    const m = Object.fromEntries(
      deviceMetrics(state({ active: [{ component: 'reed', order: '1x', priority: 'medium', dwell_s: 3, state: 'active', acknowledged: false, shelved_until: null }, { component: 'pipe', order: 'vp', priority: 'urgent', dwell_s: 1, state: 'active', acknowledged: false, shelved_until: null }] })).map((x) => [x.name, x.value]),
    );
    expect(m).toMatchObject({
      speed_rpm: 812.5,
      'orders/1x/separation_pct': 4.9,
      'alarms/active_count': 2,
      'alarms/highest_priority': 'urgent',
      'components/reed/exposure_s': 12,
      'components/reed/exposure_cycles': 160,
      data_age_s: 0.4,
      data_stale: false,
    });
    expect(highestPriority([])).toBeNull();
    expect(deviceMetrics(state({ speed_rpm: null })).find((x) => x.name === 'speed_rpm')!.value).toBeNull();
  });
});

describe('device updates (RxJS, virtual time)', () => {
  const msg = (asset: string, speed: number): [string, Outbound] => [asset, { topic: `p/${asset}/state`, payload: JSON.stringify(state({ asset, speed_rpm: speed })), qos: 0, retain: true, kind: 'state' }];
  const speedOf = (u: { state: StateMessage }) => u.state.speed_rpm;

  it('per device: the first state at once, then at most one per interval, the latest of it; other kinds ignored; stops with stop$', () => {
    const scheduler = new TestScheduler((actual, expected) => expect(actual).toEqual(expected));
    scheduler.run(({ cold, hot, expectObservable }) => {
      const alarm: [string, Outbound] = ['a', { topic: 'p/a/alarm', payload: '{}', qos: 1, retain: false, kind: 'alarm' }];
      const input = cold('a b c 6ms d 20ms e 5ms f', { a: msg('a', 1), b: msg('a', 2), c: alarm, d: msg('b', 10), e: msg('a', 3), f: msg('a', 4) });
      const stop$ = hot('50ms x');
      const out = deviceUpdates(input, 10, stop$, scheduler).pipe(map((u) => `${u.asset}:${speedOf(u)}`));
      // a:1 at 0 (leading), a:2 at the interval's end (10 ms, trailing); b:10 at 9 leads its own
      // device; a:3 at 30 leads a new interval, a:4 at 36 trails at 40; stop$ at 50 completes.
      expectObservable(out).toBe('a 8ms d b 19ms e 9ms f 9ms |', { a: 'a:1', b: 'a:2', d: 'b:10', e: 'a:3', f: 'a:4' });
    });
  });

  it('observed(): subscribing adds one listener to the hook, unsubscribing removes it', () => {
    const listeners = new Set<(asset: string, m: Outbound) => void>();
    const hook = (l: (asset: string, m: Outbound) => void) => {
      listeners.add(l);
      return () => void listeners.delete(l);
    };
    const stop$ = new Subject<void>();
    const seen: string[] = [];
    const sub = deviceUpdates(observed(hook), 0, stop$).subscribe((u) => seen.push(u.asset));
    expect(listeners.size).toBe(1);
    for (const l of listeners) l(...msg('a', 1));
    expect(seen).toEqual(['a']);
    stop$.next();
    expect(listeners.size).toBe(0);
    sub.unsubscribe();
  });
});
