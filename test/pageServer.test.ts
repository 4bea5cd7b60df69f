/**
 * The operator page over HTTP, against the live agent on a real broker: security headers, no
 * inline script, nothing from outside; commands only with the site token and through the same
 * rules as the MQTT command topic (the acknowledge event appears on MQTT; a wrong order is
 * refused with the MQTT reason); server push; /metrics parsed by an independent parser of the
 * Prometheus text format (parse-prometheus-text-format), with the values the agent's own state
 * message carries.
 */
import parsePrometheusTextFormat from 'parse-prometheus-text-format';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { request as httpRequest } from 'node:http';
import { runPlan } from '../src/cli/plan.ts';
import { startPageServer } from '../src/page/pageServer.ts';
import { parseHttpAddress } from '../src/page/httpAddress.ts';
import { pageToken, tokenMatches } from '../src/page/pageToken.ts';
import { eventually, memoryLogger, publishAll, SHORT_RUN_RAISE_S, startTestBroker, type TestBroker } from './support/liveRig.ts';
import { pageRig, TEST_TOKEN, type PageRig } from './support/pageRig.ts';

let broker: TestBroker;
beforeAll(async () => {
  broker = await startTestBroker();
});
afterAll(async () => {
  await broker.close();
});

async function post(url: string, body: unknown, token?: string): Promise<{ status: number; body: Record<string, any> }> {
  const res = await fetch(new URL('/api/command', url), {
    method: 'POST',
    headers: { 'content-type': 'application/json', ...(token ? { authorization: `Bearer ${token}` } : {}) },
    body: JSON.stringify(body),
  });
  return { status: res.status, body: (await res.json()) as Record<string, any> };
}

describe('operator page over HTTP', () => {
  let r: PageRig;
  beforeAll(async () => {
    r = await pageRig(broker);
  });
  afterAll(async () => {
    await r.stop();
  });

  it('serves the page with a Content-Security-Policy, no inline script and nothing from outside', async () => {
    const res = await fetch(r.page.url);
    expect(res.status).toBe(200);
    const csp = res.headers.get('content-security-policy')!;
    expect(csp).toContain("default-src 'none'");
    expect(csp).toContain("script-src 'self'");
    expect(csp).not.toContain('unsafe-inline');
    expect(res.headers.get('x-content-type-options')).toBe('nosniff');
    const html = await res.text();
    const scripts = [...html.matchAll(/<script([^>]*)>/g)].map((m) => m[1]);
    expect(scripts.length).toBeGreaterThan(0);
    for (const attrs of scripts) expect(attrs).toMatch(/src="\/page\.js"/);
    expect(html).not.toMatch(/\sstyle=|\son[a-z]+=|(src|href)="(https?:)?\/\//);
    expect(html).toContain('cw-pump-2');
    // The page's diagram is the plan's: every crossing mark where \`qband plan --json\` puts it.
    const io = { cwd: process.cwd(), out: '', stdout: { write: (t: string) => (io.out += t) }, stderr: { write: () => true } };
    expect(await runPlan(['--map', 'config/demo-map.yaml', '--json'], io)).toBe(0);
    const crossings = JSON.parse(io.out).assets[0].crossings as Array<{ order: string; component: string; speed_rpm: number }>;
    let shown = 0;
    for (const c of crossings.filter((x) => x.speed_rpm < 1500)) {
      const mark = new RegExp(`<g class="mark" data-id="crossing-${c.order}-${c.component}" data-x="([\\d.e+-]+)"`).exec(html);
      expect(Number(mark![1])).toBeCloseTo(c.speed_rpm, 9);
      shown++;
    }
    expect(shown).toBe(3);
    expect((await fetch(new URL('/page.js', r.page.url))).headers.get('content-type')).toMatch(/javascript/);
    expect((await fetch(new URL('/nope', r.page.url))).status).toBe(404);
    // A name that is not loopback's (DNS rebinding) gets nothing.
    const port = new URL(r.page.url).port;
    expect((await fetch(`http://localhost:${port}/`)).status).toBe(200);
    const rebound = await new Promise<number>((resolve, reject) => {
      const req = httpRequest({ host: '127.0.0.1', port, path: '/api/state', headers: { host: `attacker.example:${port}` } }, (res) => {
        res.resume();
        resolve(res.statusCode ?? 0);
      });
      req.on('error', reject);
      req.end();
    });
    expect(rebound).toBe(421);
    // A port already taken is refused with its code.
    await expect(startPageServer(r.agent, { host: '127.0.0.1', port: Number(port) }, { logger: memoryLogger().logger, token: null })).rejects.toMatchObject({ code: 'QB_E_HTTP_ADDRESS' });
  });

  it('takes commands only with the token, through the MQTT command rules', async () => {
    const raiseAt = r.messages.findIndex((m) => m.tS - r.t0S > SHORT_RUN_RAISE_S + 1);
    await publishAll(r.client, r.messages.slice(0, raiseAt));
    await eventually('the raise', () => r.alarms().find((a) => a.event === 'raise'));
    const ack = { asset: 'cw-pump-2', action: 'acknowledge', component: 'motor-reed', order: '1x', by: 'page operator' };

    const none = await post(r.page.url, ack);
    expect(none.status).toBe(401);
    const wrong = await post(r.page.url, ack, 'not-the-token-at-all');
    expect(wrong.status).toBe(401);
    expect(r.logs().filter((l) => l.code === 'QB_E_HTTP_FORBIDDEN')).toHaveLength(2);

    // Refused by the runtime's own rules, with the reason MQTT commands get.
    const bad = await post(r.page.url, { ...ack, order: '9x' }, TEST_TOKEN);
    expect(bad.status).toBe(409);
    expect(bad.body.reason).toBe('unknown_alarm');
    await r.inbox.waitFor(`${r.prefix}/cw-pump-2/command/rejected`);

    const ok = await post(r.page.url, ack, TEST_TOKEN);
    expect(ok.status).toBe(200);
    expect(ok.body.events[0].event).toBe('acknowledge');
    const event = await eventually('the acknowledge on MQTT', () => r.alarms().find((a) => a.event === 'acknowledge'));
    // Nothing was acknowledged by the refused attempts: the only acknowledge is the token's.
    expect(r.alarms().filter((a) => a.event === 'acknowledge')).toHaveLength(1);
    expect(event.by).toBe('page operator');
    const state = (await (await fetch(new URL('/api/state', r.page.url))).json()) as Record<string, any>;
    expect(state.assets['cw-pump-2'].alarms[0].event).toBe('raise');

    // Shelving follows the map's agent.max_shelve_s like the command topic; then unshelve.
    const tooLong = await post(r.page.url, { ...ack, action: 'shelve', duration_s: 86_400 * 2 }, TEST_TOKEN);
    expect(tooLong.status).toBe(409);
    expect(tooLong.body.reason).toBe('bad_command');
    expect(tooLong.body.detail).toContain('max_shelve_s');
    expect((await post(r.page.url, { ...ack, action: 'shelve', duration_s: 3600 }, TEST_TOKEN)).status).toBe(200);
    const shelve = await eventually('the shelve on MQTT', () => r.alarms().find((a) => a.event === 'shelve'));
    expect(shelve.duration_s).toBe(3600);
    const html = await (await fetch(r.page.url)).text();
    expect(html).toContain('data-action="unshelve"');
    expect((await post(r.page.url, { ...ack, action: 'unshelve' }, TEST_TOKEN)).status).toBe(200);
    await eventually('the unshelve on MQTT', () => r.alarms().find((a) => a.event === 'unshelve'));
  });

  it('pushes sections by Server-Sent Events', async () => {
    const ac = new AbortController();
    const res = await fetch(new URL('/events', r.page.url), { signal: ac.signal });
    expect(res.headers.get('content-type')).toMatch(/text\/event-stream/);
    const reader = res.body!.getReader();
    let text = '';
    while (!text.includes('"id":"asset-cw-pump-2"')) text += new TextDecoder().decode((await reader.read()).value);
    ac.abort();
    expect(text).toMatch(/event: section\ndata: \{"id":"health"/);
    expect(text).toContain('ACTIVE ALARM');
  });

  it('serves /metrics in the Prometheus text format with the values of the state', async () => {
    const res = await fetch(new URL('/metrics', r.page.url));
    expect(res.headers.get('content-type')).toMatch(/^text\/plain; version=0\.0\.4/);
    const families = parsePrometheusTextFormat(await res.text());
    const byName = new Map(families.map((f) => [f.name, f]));
    for (const f of families) {
      expect(f.name).toMatch(/^qband_[a-z_]+$/);
      if (f.type === 'COUNTER') expect(f.name).toMatch(/_total$/);
    }
    const states = r.inbox.messages.filter((m) => m.topic === `${r.prefix}/cw-pump-2/state`).map((m) => JSON.parse(m.payload));
    const last = states.at(-1);
    const value = (name: string, labels: Record<string, string> = {}) =>
      Number(byName.get(name)!.metrics.find((m) => Object.entries(labels).every(([k, v]) => m.labels?.[k] === v))!.value);
    expect(value('qband_alarms_active', { asset: 'cw-pump-2', priority: 'high' })).toBe(1);
    expect(value('qband_broker_connected')).toBe(1);
    expect(value('qband_speed_rpm', { asset: 'cw-pump-2' })).toBeCloseTo(852, -1);
    expect(value('qband_blocks_received_total', { asset: 'cw-pump-2' })).toBeGreaterThan(0);
    expect(value('qband_exposure_seconds_total', { asset: 'cw-pump-2', component: 'motor-reed' })).toBeGreaterThan(3);
    expect(value('qband_order_separation_ratio', { asset: 'cw-pump-2', order: '1x' })).toBe(0);
    const vane = last.orders.find((o: { order: string }) => o.order === 'vane-pass');
    expect(value('qband_order_separation_ratio', { asset: 'cw-pump-2', order: 'vane-pass' })).toBeCloseTo(vane.separation_pct / 100, 3);
    expect(byName.has('qband_journal_pending_events')).toBe(true);
    expect(byName.has('qband_data_age_seconds')).toBe(true);
  });
});

describe('a page without a token', () => {
  it('is read-only: no buttons, and commands are refused', async () => {
    const r = await pageRig(broker, null);
    try {
      const html = await (await fetch(r.page.url)).text();
      expect(html).toContain('Read-only');
      expect(html).not.toContain('data-action=');
      const res = await post(r.page.url, { asset: 'cw-pump-2', action: 'acknowledge', component: 'motor-reed', order: '1x' }, TEST_TOKEN);
      expect(res.status).toBe(403);
    } finally {
      await r.stop();
    }
  });
});

describe('address and token', () => {
  it('binds loopback unless the site names a host', () => {
    expect(parseHttpAddress('8080')).toEqual({ host: '127.0.0.1', port: 8080 });
    expect(parseHttpAddress(':8080')).toEqual({ host: '127.0.0.1', port: 8080 });
    expect(parseHttpAddress('0.0.0.0:9000')).toEqual({ host: '0.0.0.0', port: 9000 });
    expect(parseHttpAddress('[::1]:9000')).toEqual({ host: '::1', port: 9000 });
    expect(parseHttpAddress('host:99999')).toMatch(/--http must be host:port/);
    expect(parseHttpAddress('a b:1')).toMatch(/--http must be host:port/);
  });

  it('takes the token from the environment or a file, never short, compared whole', async () => {
    expect(await pageToken({}, '/')).toBeNull();
    expect(await pageToken({ QBAND_HTTP_TOKEN: TEST_TOKEN }, '/')).toBe(TEST_TOKEN);
    await expect(pageToken({ QBAND_HTTP_TOKEN: 'short' }, '/')).rejects.toThrow(/at least 16/);
    await expect(pageToken({ QBAND_HTTP_TOKEN_FILE: '/nonexistent/token' }, '/')).rejects.toThrow(/QBAND_HTTP_TOKEN_FILE/);
    expect(tokenMatches(TEST_TOKEN, `Bearer ${TEST_TOKEN}`)).toBe(true);
    expect(tokenMatches(TEST_TOKEN, `Bearer ${TEST_TOKEN}x`)).toBe(false);
    expect(tokenMatches(TEST_TOKEN, TEST_TOKEN)).toBe(false);
    expect(tokenMatches(null, `Bearer ${TEST_TOKEN}`)).toBe(false);
  });
});
