/**
 * The operator page in a real browser: Debian's Chromium driven by playwright-core, against the
 * live agent on a real broker fed the short run of liveRig. From the page itself: the operating
 * point moves, the alarm appears within a second of its MQTT event, acknowledge without the
 * token is refused and with it sends the acknowledge event on MQTT, the page says when it has
 * lost the agent and comes back, no console errors (a CSP violation would be one). Saves a
 * screenshot to out/operator-page.png. Skips, saying why, where Chromium is not installed.
 */
import { mkdirSync } from 'node:fs';
import type { Browser, Page } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { eventually, publishAll, SHORT_RUN_RAISE_S, startTestBroker, type TestBroker } from './support/liveRig.ts';
import { pageRig, TEST_TOKEN, type PageRig } from './support/pageRig.ts';
import { haveChromium, launchChromium, noChromiumReason } from './support/chromium.ts';
import { startPageServer } from '../src/page/pageServer.ts';

// Run inside the page by playwright; typed here (the project's lib has no DOM).
declare const document: { querySelector(selector: string): { getAttribute(name: string): string | null } | null };

if (!haveChromium) console.info(`operator page browser test skipped: ${noChromiumReason}`);

describe.skipIf(!haveChromium)('operator page in Chromium', () => {
  let broker: TestBroker;
  let browser: Browser;
  let r: PageRig;
  let page: Page;
  const problems: string[] = [];

  beforeAll(async () => {
    broker = await startTestBroker();
    r = await pageRig(broker);
    browser = await launchChromium();
    page = await browser.newPage({ viewport: { width: 1280, height: 1500 } });
    page.on('console', (m) => {
      if (m.type() === 'error') problems.push(m.text());
    });
    page.on('pageerror', (e) => problems.push(e.message));
    page.on('requestfailed', (req) => {
      // The event stream is cut on purpose when the server stops; anything else is a fault.
      if (!req.url().endsWith('/events')) problems.push(`request failed: ${req.url()}`);
    });
  }, 60_000);
  afterAll(async () => {
    await browser?.close();
    await r?.stop();
    await broker?.close();
  });

  const cursorRpm = () => page.evaluate(() => Number(document.querySelector('#asset-cw-pump-2 .cursor[data-id="now"]')?.getAttribute('data-x') ?? NaN));

  it('shows the operating point moving, then the alarm within a second of its MQTT event', async () => {
    await page.goto(r.page.url);
    await page.waitForSelector('#link:has-text("Live")');
    // First 2.5 s of data: 700 rpm; then into the ramp and the hold at 852 rpm.
    const holdAt = r.messages.findIndex((m) => m.tS - r.t0S > 2.5);
    await publishAll(r.client, r.messages.slice(0, holdAt));
    await page.waitForFunction(() => Number(document.querySelector('#asset-cw-pump-2 .cursor[data-id="now"]')?.getAttribute('data-x')) > 0);
    const early = await cursorRpm();
    expect(early).toBeCloseTo(700, -1);
    const beforeRaise = r.messages.findIndex((m) => m.tS - r.t0S > SHORT_RUN_RAISE_S - 1.5);
    await publishAll(r.client, r.messages.slice(holdAt, beforeRaise));
    await page.waitForFunction(() => Number(document.querySelector('#asset-cw-pump-2 .cursor[data-id="now"]')?.getAttribute('data-x')) > 840);
    expect(await cursorRpm()).toBeCloseTo(852, -1);
    // The marker of 1X now sits on its line at the current speed, inside the reed band, in words.
    expect(await page.textContent('#asset-cw-pump-2 .diagram')).toContain('1x now: inside motor-reed');
    expect(await page.locator('#asset-cw-pump-2 .alarm').count()).toBe(0);

    const raiseAt = r.messages.findIndex((m) => m.tS - r.t0S > SHORT_RUN_RAISE_S + 1);
    await publishAll(r.client, r.messages.slice(beforeRaise, raiseAt));
    await eventually('the raise on MQTT', () => r.alarms().find((a) => a.event === 'raise'));
    const index = r.inbox.messages.findIndex((m) => m.topic.endsWith('/alarm') && JSON.parse(m.payload).event === 'raise');
    const mqttAt = r.arrivals[index];
    await page.waitForSelector('#asset-cw-pump-2 .alarm', { timeout: 5000 });
    const shownAt = Date.now();
    expect(shownAt - mqttAt, 'the alarm shows on the page within a second of its MQTT event').toBeLessThan(1000);
    const text = await page.textContent('#asset-cw-pump-2 .alarm');
    expect(text).toContain('HIGH: 1x dwelling in motor-reed');
    expect(text).toContain('NOT acknowledged');
    expect(text).toContain('North basin procedure RM-12');
    expect(text).toMatch(/evidence: [\d.]+ mm\/s at [\d.]+ Hz on motor-top-x/);
  });

  it('refuses acknowledge without the token and sends it on MQTT with the token', async () => {
    const button = page.locator('#asset-cw-pump-2 button[data-action="acknowledge"]');
    expect(await button.isDisabled()).toBe(true);
    // Past the disabled button: the server itself refuses a command without the token.
    const status = await page.evaluate(async () => {
      const res = await fetch('/api/command', { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify({ asset: 'cw-pump-2', action: 'acknowledge', component: 'motor-reed', order: '1x' }) });
      return res.status;
    });
    expect(status).toBe(401);
    // The browser reports the refused request as a console error: that one is expected.
    const refused = problems.findIndex((p) => p.includes('401'));
    expect(refused).toBeGreaterThanOrEqual(0);
    problems.splice(refused, 1);
    expect(r.alarms().filter((a) => a.event === 'acknowledge')).toHaveLength(0);

    await page.fill('#token', TEST_TOKEN);
    await page.fill('#by', 'browser operator');
    await page.click('#asset-cw-pump-2 button[data-action="acknowledge"]');
    const ack = await eventually('the acknowledge event on MQTT', () => r.alarms().find((a) => a.event === 'acknowledge'));
    expect(ack.by).toBe('browser operator');
    await page.waitForSelector('#command-result:has-text("applied")');
    await page.waitForSelector('#asset-cw-pump-2 .alarm:has-text("acknowledged.")');
    mkdirSync(new URL('../out/', import.meta.url), { recursive: true });
    await page.screenshot({ path: new URL('../out/operator-page.png', import.meta.url).pathname, fullPage: true });
  });

  it('says when it has lost the agent, and comes back when it returns', async () => {
    const port = Number(new URL(r.page.url).port);
    await r.page.close();
    await page.waitForSelector('#link:has-text("NOT LIVE")');
    expect(await page.getAttribute('body', 'class')).toContain('stale');
    r.page = await startPageServer(r.agent, { host: '127.0.0.1', port }, { logger: (await import('./support/liveRig.ts')).memoryLogger().logger, token: TEST_TOKEN });
    await page.waitForSelector('#link:has-text("Live")', { timeout: 10_000 });
    expect(problems).toEqual([]);
  });
});
