/**
 * The operator page served by `qband run --http` as a real process (the build in dist/, made
 * once for the suite by test/support/buildOnce.ts), in Chromium: the page loads, the asset's
 * operating point and then the raised alarm appear once the short run of liveRig is published
 * into its band, and acknowledge from the page with the site token (QBAND_HTTP_TOKEN of the
 * process) reaches an MQTT subscriber on the alarm topic. Nothing here is timed: every wait is
 * for a condition, with bounds generous enough for a loaded two-core machine. Skips, saying
 * why, where Chromium is not installed.
 */
import type { MqttClient } from 'mqtt';
import type { Browser, Page } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startAgentProcess, type AgentProcess } from './support/agentProcess.ts';
import { haveChromium, launchChromium, noChromiumReason } from './support/chromium.ts';
import { collect, connectClient, type Inbox } from './support/mqttClients.ts';
import {
  eventually, publishAll, SHORT_RUN_RAISE_S, shortRunBlocks, startTestBroker, tempDir, uniquePrefix, writeTestMap,
  type BlockMessage, type TestBroker,
} from './support/liveRig.ts';

// Run inside the page by playwright; typed here (the project's lib has no DOM).
declare const document: { querySelector(selector: string): { getAttribute(name: string): string | null } | null };

const TOKEN = 'process-page-token-0123456789';
/** Bounds on waits, never expectations of speed: start-up of Node, the agent and Chromium under load. */
const START_MS = 45_000;
const WAIT_MS = 30_000;

if (!haveChromium) console.info(`operator page browser test (qband run process) skipped: ${noChromiumReason}`);

describe.skipIf(!haveChromium)('operator page of qband run --http (process) in Chromium', () => {
  const clientId = `qband-page-proc-${process.pid}`;
  const cleanup: Array<() => void> = [];
  const problems: string[] = [];
  let broker: TestBroker;
  let prefix: string;
  let client: MqttClient;
  let inbox: Inbox;
  let agent: AgentProcess;
  let pageUrl: string;
  let browser: Browser;
  let page: Page;
  let t0S: number;
  let blocks: BlockMessage[];
  const alarms = () => inbox.messages.filter((m) => m.topic === `${prefix}/cw-pump-2/alarm`).map((m) => JSON.parse(m.payload) as Record<string, any>);

  beforeAll(async () => {
    broker = await startTestBroker();
    prefix = uniquePrefix();
    const mapPath = writeTestMap(tempDir(), prefix, broker.url);
    client = await connectClient({ url: broker.url, protocolVersion: broker.protocolVersion });
    inbox = collect(client);
    await client.subscribeAsync([`${prefix}/cw-pump-2/alarm`, `${prefix}/cw-pump-2/command/rejected`], { qos: 1 });
    agent = startAgentProcess(
      mapPath,
      tempDir(),
      clientId,
      (stop) => cleanup.push(stop),
      ['--mqtt-version', broker.protocolVersion === 5 ? '5' : '3.1.1', '--http', '127.0.0.1:0'],
      { QBAND_HTTP_TOKEN: TOKEN },
    );
    const http = await eventually('the page address in the process log (QB_I_HTTP)', () => agent.lines().find((l) => l.code === 'QB_I_HTTP'), START_MS);
    expect(http.url).toMatch(/^http:\/\/127\.0\.0\.1:\d+\/$/);
    expect(http.commands).toBe(true);
    pageUrl = http.url;
    // The agent announces itself before its subscriptions are granted; blocks sent before then
    // would be lost. A command it cannot apply (no alarm for order 9x) is answered on
    // command/rejected once its topics, inputs and commands in one request, are subscribed.
    let probedAt = 0;
    await eventually(
      'the agent answering a probe command (subscribed)',
      () => {
        if (Date.now() - probedAt > 1000) {
          probedAt = Date.now();
          client.publish(`${prefix}/cw-pump-2/command`, JSON.stringify({ action: 'shelve', component: 'motor-reed', order: '9x', duration_s: 60, by: 'probe' }), { qos: 1 });
        }
        return inbox.messages.find((m) => m.topic === `${prefix}/cw-pump-2/command/rejected`);
      },
      START_MS,
    );
    t0S = Date.now() / 1000 - 80;
    blocks = shortRunBlocks(mapPath, prefix, t0S);
    browser = await launchChromium();
    page = await browser.newPage({ viewport: { width: 1280, height: 1500 } });
    page.setDefaultTimeout(WAIT_MS);
    page.on('console', (m) => {
      if (m.type() === 'error') problems.push(m.text());
    });
    page.on('pageerror', (e) => problems.push(e.message));
    page.on('requestfailed', (req) => {
      // The event stream is cut when the process stops at the end; anything else is a fault.
      if (!req.url().endsWith('/events')) problems.push(`request failed: ${req.url()}`);
    });
  }, 2 * START_MS + 30_000);

  afterAll(async () => {
    await browser?.close();
    if (agent && agent.child.exitCode === null) {
      agent.child.kill('SIGTERM');
      await agent.exit;
    }
    for (const stop of cleanup) stop();
    if (client) {
      // Retained state and presence of this run's prefix are emptied (for a shared broker).
      await Promise.all([`${prefix}/cw-pump-2/state`, `${prefix}/agent/${clientId}/status`].map((t) => client.publishAsync(t, '', { qos: 1, retain: true })));
      await client.endAsync();
    }
    await broker?.close();
  }, 60_000);

  it('loads the page, then shows the asset at its operating point and the raised alarm', async () => {
    await page.goto(pageUrl);
    await page.waitForSelector('#link:has-text("Live")');
    await page.waitForSelector('#asset-cw-pump-2');
    // Up to a second past the raise: 1X held at 852 rpm inside the reed band (times in liveRig).
    const raiseAt = blocks.findIndex((m) => m.tS - t0S > SHORT_RUN_RAISE_S + 1);
    await publishAll(client, blocks.slice(0, raiseAt));
    const raise = await eventually('the raise on the alarm topic', () => alarms().find((a) => a.event === 'raise'), WAIT_MS);
    expect([raise.component, raise.order]).toEqual(['motor-reed', '1x']);
    await page.waitForFunction(() => Number(document.querySelector('#asset-cw-pump-2 .cursor[data-id="now"]')?.getAttribute('data-x')) > 840);
    const rpm = await page.evaluate(() => Number(document.querySelector('#asset-cw-pump-2 .cursor[data-id="now"]')?.getAttribute('data-x')));
    expect(rpm).toBeCloseTo(852, -1);
    await page.waitForSelector('#asset-cw-pump-2 .alarm');
    const text = await page.textContent('#asset-cw-pump-2 .alarm');
    expect(text).toContain('HIGH: 1x dwelling in motor-reed');
    expect(text).toContain('NOT acknowledged');
    expect(text).toContain('North basin procedure RM-12');
  });

  it('acknowledges from the page with the token, and the acknowledgement reaches the alarm topic', async () => {
    const button = page.locator('#asset-cw-pump-2 button[data-action="acknowledge"]');
    expect(await button.isDisabled(), 'read-only until a token is entered').toBe(true);
    expect(alarms().filter((a) => a.event === 'acknowledge')).toHaveLength(0);
    await page.fill('#token', TOKEN);
    await page.fill('#by', 'process page operator');
    await button.click();
    const ack = await eventually('the acknowledge on the alarm topic', () => alarms().find((a) => a.event === 'acknowledge'), WAIT_MS);
    expect([ack.component, ack.order, ack.by]).toEqual(['motor-reed', '1x', 'process page operator']);
    await page.waitForSelector('#command-result:has-text("applied")');
    // "), acknowledged." and not "NOT acknowledged.", which also ends in "acknowledged.".
    await page.locator('#asset-cw-pump-2 .alarm', { hasText: /\), acknowledged\./ }).waitFor();
    expect(agent.lines().some((l) => l.code === 'QB_I_PAGE_COMMAND' && l.action === 'acknowledge')).toBe(true);
    expect(problems).toEqual([]);
  });
});
