/**
 * Chromium for the operator page's browser tests: Debian's build driven by playwright-core
 * (which downloads no browser), or the one QBAND_CHROMIUM names. Without one the tests skip and
 * print why.
 */
import { existsSync } from 'node:fs';
import { chromium, type Browser } from 'playwright-core';

export const CHROMIUM = process.env.QBAND_CHROMIUM ?? '/usr/bin/chromium';
export const haveChromium = existsSync(CHROMIUM);
export const noChromiumReason = `no Chromium at ${CHROMIUM} (apt-get install chromium, or set QBAND_CHROMIUM)`;

export function launchChromium(): Promise<Browser> {
  return chromium.launch({
    executablePath: CHROMIUM,
    args: ['--headless', '--no-sandbox', '--disable-gpu', '--disable-background-networking', '--disable-component-update', '--disable-sync'],
  });
}
