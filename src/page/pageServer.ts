/**
 * The operator page and the metrics endpoint: one small HTTP server beside the agent (`qband run
 * --http`, the demo). It shows only what the agent says (Agent.observe, `connected`, the map in
 * force) and sends commands only through the agent's own command handling, so the page obeys
 * exactly the rules of the MQTT command topic.
 *
 *   GET  /            the page (sections rendered here; no inline script or style)
 *   GET  /page.js, /page.css
 *   GET  /events      Server-Sent Events: a section's HTML whenever it changes
 *   GET  /metrics     Prometheus text exposition
 *   GET  /api/state   the model as JSON (last state per asset, active alarm events)
 *   POST /api/command acknowledge / shelve / unshelve with `Authorization: Bearer <token>`
 */
import { readFileSync } from 'node:fs';
import { createServer, type IncomingMessage, type Server, type ServerResponse } from 'node:http';
import type { AddressInfo } from 'node:net';
import type { Outbound } from '../agent/outbound.ts';
import type { Logger } from '../agent/logger.ts';
import type { SiteMap } from '../config/types.ts';
import { QbandError } from '../errors.ts';
import { assetPlan, type AssetPlan } from '../physics/assetPlan.ts';
import type { HttpAddress } from './httpAddress.ts';
import { assetSection, healthSection, pageShell, sectionId, type Health } from './pageHtml.ts';
import { tokenMatches } from './pageToken.ts';
import { SiteModel } from './siteModel.ts';
import { siteMetrics } from './siteMetrics.ts';

/** What the page needs of the agent. */
export interface PageAgent {
  readonly map: SiteMap;
  readonly connected: boolean;
  readonly journalPending: number;
  observe(listener: (asset: string, message: Outbound) => void): () => void;
  /** Resolves with what the command produced, once journaled and published (null: no such asset). */
  command(asset: string, payload: Uint8Array): Promise<Outbound[] | null>;
}

export interface PageServer {
  url: string;
  close(): Promise<void>;
}

const MAX_BODY_BYTES = 4096;
const MAX_EVENT_CLIENTS = 32;
/** Sections are pushed at most this often (ms); alarm events go at once. */
const PUSH_EVERY_MS = 250;
const HEALTH_EVERY_MS = 1000;

const CSP = "default-src 'none'; script-src 'self'; style-src 'self'; img-src 'self' data:; connect-src 'self'; form-action 'none'; frame-ancestors 'none'; base-uri 'none'";
const SECURITY_HEADERS = {
  'content-security-policy': CSP,
  'x-content-type-options': 'nosniff',
  'referrer-policy': 'no-referrer',
  'x-frame-options': 'DENY',
  'cache-control': 'no-store',
};

const STATIC: Record<string, { type: string; body: string }> = {
  '/page.js': { type: 'text/javascript; charset=utf-8', body: readFileSync(new URL('./static/page.js', import.meta.url), 'utf8') },
  '/page.css': { type: 'text/css; charset=utf-8', body: readFileSync(new URL('./static/page.css', import.meta.url), 'utf8') },
};

export async function startPageServer(
  agent: PageAgent,
  address: HttpAddress,
  deps: { logger: Logger; token: string | null; now?: () => number },
): Promise<PageServer> {
  const now = deps.now ?? Date.now;
  const log = deps.logger;
  const model = new SiteModel(agent.map.assets.map((a) => a.id));
  const registry = siteMetrics({ model, connected: () => agent.connected, journalPending: () => agent.journalPending, nowMs: now });
  const loopback = LOOPBACK_NAMES.has(address.host);
  const clients = new Set<ServerResponse>();
  const dirty = new Set<string>();
  let pushTimer: NodeJS.Timeout | null = null;
  let plans: { map: SiteMap; byId: Map<string, AssetPlan> } | null = null;

  const planOf = (id: string): AssetPlan | undefined => {
    if (plans?.map !== agent.map) plans = { map: agent.map, byId: new Map(agent.map.assets.map((a) => [a.id, assetPlan(a)])) };
    return plans.byId.get(id);
  };
  const health = (): Health => ({ site: agent.map.site, connected: agent.connected, journalPending: agent.journalPending, commandsEnabled: deps.token !== null, nowMs: now() });
  const healthHtml = () => healthSection(health(), new Map(agent.map.assets.map((a) => [a.id, { view: model.view(a.id), silenceS: model.silenceS(a.id, now()) }])));
  const sectionHtml = (id: string): string | null => {
    const asset = agent.map.assets.find((a) => a.id === id);
    const plan = planOf(id);
    return asset && plan ? assetSection(asset, plan, model.view(id), deps.token !== null) : null;
  };
  const send = (res: ServerResponse, id: string, html: string) => res.write(`event: section\ndata: ${JSON.stringify({ id, html })}\n\n`);
  const flush = () => {
    pushTimer = null;
    for (const asset of dirty) {
      const html = sectionHtml(asset);
      if (html !== null) for (const c of clients) send(c, sectionId(asset), html);
    }
    dirty.clear();
  };
  const stopObserving = agent.observe((asset, message) => {
    const urgent = model.onMessage(asset, message, now());
    dirty.add(asset);
    if (urgent) {
      if (pushTimer) clearTimeout(pushTimer);
      pushTimer = setTimeout(flush, 0);
    } else pushTimer ??= setTimeout(flush, PUSH_EVERY_MS);
  });
  const healthTimer = setInterval(() => {
    const html = healthHtml();
    for (const c of clients) send(c, 'health', html);
  }, HEALTH_EVERY_MS);

  const server: Server = createServer((req, res) => {
    void handle(req, res).catch((err: unknown) => {
      log.error({ stage: 'agent', code: 'QB_E_INTERNAL', err: (err as Error).message, path: req.url }, 'operator page request failed');
      if (!res.headersSent) reply(res, 500, 'text/plain; charset=utf-8', 'internal error');
      else res.end();
    });
  });

  async function handle(req: IncomingMessage, res: ServerResponse): Promise<void> {
    const path = new URL(req.url ?? '/', 'http://page').pathname;
    // Bound to loopback, the page answers only to loopback names: a page elsewhere cannot
    // reach it by pointing a name of its own at 127.0.0.1 (DNS rebinding).
    if (loopback && !LOOPBACK_NAMES.has(hostName(req.headers.host))) return reply(res, 421, 'text/plain; charset=utf-8', 'this page answers to localhost only');
    if (req.method === 'POST' && path === '/api/command') return command(req, res);
    if (req.method !== 'GET' && req.method !== 'HEAD') return reply(res, 405, 'text/plain; charset=utf-8', 'method not allowed');
    if (path === '/') {
      const sections = agent.map.assets.map((a) => sectionHtml(a.id) ?? '');
      return reply(res, 200, 'text/html; charset=utf-8', pageShell(health(), healthHtml(), sections));
    }
    if (STATIC[path]) return reply(res, 200, STATIC[path].type, STATIC[path].body);
    if (path === '/metrics') return reply(res, 200, registry.contentType, await registry.metrics());
    if (path === '/api/state') {
      const body = Object.fromEntries([...model.assets].map(([id, v]) => [id, { state: v.state, alarms: [...v.alarms.values()], lifecycle: [...v.lifecycle.values()] }]));
      return reply(res, 200, 'application/json', JSON.stringify({ site: agent.map.site, connected: agent.connected, assets: body }));
    }
    if (path === '/events') {
      if (clients.size >= MAX_EVENT_CLIENTS) return reply(res, 503, 'text/plain; charset=utf-8', 'too many open pages');
      res.writeHead(200, { ...SECURITY_HEADERS, 'content-type': 'text/event-stream; charset=utf-8', connection: 'keep-alive' });
      res.write('retry: 2000\n\n');
      clients.add(res);
      req.on('close', () => clients.delete(res));
      send(res, 'health', healthHtml());
      for (const a of agent.map.assets) send(res, sectionId(a.id), sectionHtml(a.id) ?? '');
      return;
    }
    reply(res, 404, 'text/plain; charset=utf-8', 'not found');
  }

  async function command(req: IncomingMessage, res: ServerResponse): Promise<void> {
    const json = (status: number, body: unknown) => reply(res, status, 'application/json', JSON.stringify(body));
    if (!tokenMatches(deps.token, req.headers.authorization)) {
      log.warn({ stage: 'agent', code: 'QB_E_HTTP_FORBIDDEN', remote: req.socket.remoteAddress, token_configured: deps.token !== null }, 'operator page command refused: no valid token');
      req.resume();
      return json(deps.token === null ? 403 : 401, { ok: false, reason: 'forbidden', detail: deps.token === null ? 'this page is read-only: the agent has no operator token' : 'the site token is missing or wrong' });
    }
    if (!/^application\/json\b/.test(req.headers['content-type'] ?? '')) return json(415, { ok: false, reason: 'bad_command', detail: 'send JSON' });
    const body = await readBody(req);
    if (body === null) return json(413, { ok: false, reason: 'bad_command', detail: `body over ${MAX_BODY_BYTES} bytes` });
    let parsed: Record<string, unknown>;
    try {
      parsed = JSON.parse(body) as Record<string, unknown>;
      if (typeof parsed !== 'object' || parsed === null || Array.isArray(parsed)) throw new Error('not an object');
    } catch {
      return json(400, { ok: false, reason: 'bad_command', detail: 'the body is not a JSON object' });
    }
    const { asset, ...rest } = parsed;
    if (typeof asset !== 'string') return json(404, { ok: false, reason: 'unknown_asset', detail: 'name the asset' });
    // The command as it would arrive on MQTT, stamped now: the runtime applies its own rules.
    const payload = Buffer.from(JSON.stringify({ ...rest, issued_t_s: now() / 1000 }));
    const out = await agent.command(asset, payload);
    if (out === null) return json(404, { ok: false, reason: 'unknown_asset', detail: `no asset ${JSON.stringify(asset).slice(0, 80)}` });
    const refused = out.find((o) => o.kind === 'rejected');
    if (refused) {
      const r = JSON.parse(refused.payload) as { reason: string; detail: string };
      return json(409, { ok: false, reason: r.reason, detail: r.detail });
    }
    log.info({ stage: 'agent', code: 'QB_I_PAGE_COMMAND', asset, action: rest.action, component: rest.component, order: rest.order }, 'operator command from the page applied');
    return json(200, { ok: true, events: out.filter((o) => o.kind === 'lifecycle').map((o) => JSON.parse(o.payload) as unknown) });
  }

  await new Promise<void>((resolve, reject) => {
    server.once('error', (err: NodeJS.ErrnoException) => reject(new QbandError('QB_E_HTTP_ADDRESS', `cannot serve the operator page on ${address.host}:${address.port}: ${err.code ?? err.message}`)));
    server.listen(address.port, address.host, () => resolve());
  }).catch((err) => {
    stopObserving();
    clearInterval(healthTimer);
    throw err;
  });
  const bound = server.address() as AddressInfo;
  const host = bound.family === 'IPv6' ? `[${bound.address}]` : bound.address;
  const url = `http://${host}:${bound.port}/`;
  log.info({ stage: 'agent', code: 'QB_I_HTTP', url, commands: deps.token !== null }, 'operator page and /metrics served');
  return {
    url,
    close: async () => {
      stopObserving();
      clearInterval(healthTimer);
      if (pushTimer) clearTimeout(pushTimer);
      for (const c of clients) c.end();
      clients.clear();
      await new Promise<void>((resolve) => server.close(() => resolve()));
    },
  };
}

const LOOPBACK_NAMES = new Set(['127.0.0.1', 'localhost', '::1']);

/** The host name of a Host header, without port or IPv6 brackets. */
function hostName(header: string | undefined): string {
  if (!header) return '';
  const m = /^\[([^\]]+)\]|^([^:]+)/.exec(header);
  return (m?.[1] ?? m?.[2] ?? '').toLowerCase();
}

function reply(res: ServerResponse, status: number, type: string, body: string): void {
  res.writeHead(status, { ...SECURITY_HEADERS, 'content-type': type, 'content-length': Buffer.byteLength(body) });
  res.end(res.req.method === 'HEAD' ? undefined : body);
}

function readBody(req: IncomingMessage): Promise<string | null> {
  return new Promise((resolve, reject) => {
    const chunks: Buffer[] = [];
    let size = 0;
    req.on('data', (c: Buffer) => {
      size += c.length;
      if (size > MAX_BODY_BYTES) {
        resolve(null);
        req.destroy();
      } else chunks.push(c);
    });
    req.on('end', () => resolve(Buffer.concat(chunks).toString('utf8')));
    req.on('error', reject);
  });
}
