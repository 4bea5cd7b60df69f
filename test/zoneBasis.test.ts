import { resolve } from 'node:path';
import { describe, expect, it } from 'vitest';
import type { StateMessage } from '../src/advisory/messages.ts';
import { main } from '../src/cli/main.ts';
import type { CliIo } from '../src/cli/io.ts';
import { parseAssetMap } from '../src/config/parseAssetMap.ts';
import { panelLines, type RunInfo } from '../src/demo/demoText.ts';
import { readFileSync, writeFileSync, mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';

// A severity zone letter never reaches an operator without where its boundaries come from:
// the default boundaries are recalled from memory, and a letter alone would read as a verdict.
const ROOT = resolve(new URL('..', import.meta.url).pathname);
const DEMO_MAP = 'config/demo-map.yaml';

async function run(args: string[]): Promise<string> {
  let out = '';
  const io: CliIo = { stdout: { write: (s: string) => (out += s) }, stderr: { write: () => undefined, isTTY: false }, cwd: ROOT };
  expect(await main(args, io)).toBe(0);
  return out;
}

const demoAsset = parseAssetMap(readFileSync(join(ROOT, DEMO_MAP), 'utf8'), DEMO_MAP).map!.assets[0];

describe('severity zones carry their basis', () => {
  it('the default basis says it is recalled from memory, names the standard and its current edition, and asks for the site’s own values', () => {
    // The demo map has no severity block, so it runs on the defaults.
    const basis = demoAsset.severity.basis;
    expect(basis).toMatch(/recalled from memory/);
    expect(basis).toMatch(/ISO 10816-3/);
    expect(basis).toMatch(/ISO 20816-3:2022/);
    expect(basis).toMatch(/replace with the site/);
  });

  it('replay JSON: every severity entry of every status record and of the summary has zone_basis', async () => {
    const records = (await run(['replay', '--map', DEMO_MAP, '--status-every', '10', 'demo/north-basin-runup.wav'])).trim().split('\n').map((l) => JSON.parse(l));
    const entries = [...records.filter((r) => r.kind === 'status').flatMap((r) => r.severity), ...records.at(-1).severity_max];
    expect(entries.length).toBeGreaterThan(10);
    for (const e of entries) expect(e.zone_basis, JSON.stringify(e)).toBe(demoAsset.severity.basis);
  });

  it('replay text: every line that shows a zone shows the basis; a site’s own basis replaces the default', async () => {
    const text = await run(['replay', '--map', DEMO_MAP, '--format', 'text', '--status-every', '10', 'demo/north-basin-runup.wav']);
    const zoned = text.split('\n').filter((l) => /zone [ABCD]\b/.test(l));
    expect(zoned.length).toBeGreaterThan(10);
    for (const l of zoned) expect(l).toContain(`zones: ${demoAsset.severity.basis}`);

    const dir = mkdtempSync(join(tmpdir(), 'qband-zone-'));
    const own = join(dir, 'map.yaml');
    const mapText = readFileSync(join(ROOT, DEMO_MAP), 'utf8').replace(
      'alarm: { on_delay_s: 30',
      'severity: { zone_boundaries_mm_s: [2.3, 4.5, 7.1], basis: "site standard VS-4, pumps on rigid bases" }\n    alarm: { on_delay_s: 30',
    );
    writeFileSync(own, mapText);
    const ownText = await run(['replay', '--map', own, '--format', 'text', '--status-every', '10', join(ROOT, 'demo/north-basin-runup.wav')]);
    const ownZoned = ownText.split('\n').filter((l) => /zone [ABCD]\b/.test(l));
    expect(ownZoned.length).toBeGreaterThan(10);
    for (const l of ownZoned) {
      expect(l).toContain('zones: site standard VS-4, pumps on rigid bases');
      expect(l).not.toContain('recalled from memory');
    }
  });

  it('demo screen: the zone line is followed by the whole basis, wrapped within the panel; the deadband is called deadband', async () => {
    const records = (await run(['replay', '--map', DEMO_MAP, '--status-every', '0.5', 'demo/north-basin-runup.wav'])).trim().split('\n').map((l) => JSON.parse(l));
    const status = records.filter((r) => r.kind === 'status');
    const asState = (r: any): StateMessage => ({ ...r, kind: 'state', time: '', active: [], freshness: { data_age_s: 0, stale: false }, counters: {} });
    const runInfo: RunInfo = { site: 'north-basin', asset: demoAsset, startS: status[0].t_s - 0.5, durationS: 181, speed: 3 };
    const zoned = asState(status.find((r) => r.severity.length > 0));
    const panel = panelLines(zoned, runInfo, new Map(), 'online');
    const at = panel.findIndex((l) => /severity zone [ABCD]/.test(l));
    expect(at, panel.join('\n')).toBeGreaterThan(0);
    const basisText = panel.slice(at + 1).join(' ').replace(/\s+/g, ' ');
    expect(basisText).toContain(`zones: ${demoAsset.severity.basis}`);
    // demoView cuts lines at its width (100 by default) with '~': the basis must fit, not be cut.
    for (const l of panel.slice(at + 1)) expect(l.length, l).toBeLessThan(100);

    const inDeadband = status.find((r) => r.orders.some((o: any) => o.position === 'deadband'));
    expect(inDeadband, 'a status with an order in the deadband (1x leaving the reed band, about 95 s)').toBeTruthy();
    const deadbandPanel = panelLines(asState(inDeadband), runInfo, new Map(), 'online').join('\n');
    expect(deadbandPanel).toContain('(deadband)');
    expect(deadbandPanel).not.toContain('edge zone');
  });
});
