import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { parseOperatorCommand, type CommandLimits } from '../src/agent/operatorCommand.ts';
import { parseAssetMap } from '../src/config/parseAssetMap.ts';

// Commands carry their issue time (`issued_t_s`): the agent's persistent session hands it the
// commands published while it was away, and an acknowledge or shelve meant for the alarm of
// an hour ago must not quieten the alarm of now.
const asset = parseAssetMap(readFileSync(new URL('../config/demo-map.yaml', import.meta.url), 'utf8'), 'demo-map.yaml').map!.assets[0];
const NOW_S = 1_790_000_000;
const limits: CommandLimits = { maxShelveS: 86_400, maxCommandAgeS: 300, maxFutureS: 60, nowS: NOW_S };
const parse = (body: object, l: Partial<CommandLimits> = {}) => parseOperatorCommand(Buffer.from(JSON.stringify(body)), asset, { ...limits, ...l });
const ack = { action: 'acknowledge', component: 'motor-reed', order: '1x', by: 'J. Rivera' };
const shelve = { action: 'shelve', component: 'motor-reed', order: '1x', duration_s: 600 };

describe('operator command age', () => {
  it('applies an acknowledge or shelve issued within agent.max_command_age_s', () => {
    expect(parse({ ...ack, issued_t_s: NOW_S - 299 })).toMatchObject({ ok: true, command: { action: 'acknowledge' } });
    expect(parse({ ...shelve, issued_t_s: NOW_S - 10 })).toMatchObject({ ok: true, command: { action: 'shelve', durationS: 600 } });
  });

  it('refuses an acknowledge or shelve older than the limit, saying how old it is and which key sets the limit', () => {
    for (const body of [ack, shelve]) {
      const r = parse({ ...body, issued_t_s: NOW_S - 301 });
      expect(r.ok).toBe(false);
      if (r.ok) continue;
      expect(r.reason).toBe('stale_command');
      expect(r.detail).toContain('301 s ago');
      expect(r.detail).toContain('agent.max_command_age_s (300 s)');
    }
    expect(parse({ ...ack, issued_t_s: NOW_S - 3600 }, { maxCommandAgeS: 7200 }).ok).toBe(true);
  });

  it('applies a late unshelve (it only makes alarms visible again)', () => {
    expect(parse({ action: 'unshelve', component: 'motor-reed', order: '1x', issued_t_s: NOW_S - 86_400 }).ok).toBe(true);
  });

  it('refuses an issue time from the future beyond max_future_s, or one that is not a number', () => {
    expect(parse({ ...ack, issued_t_s: NOW_S + 61 })).toMatchObject({ ok: false, reason: 'bad_command' });
    expect(parse({ ...ack, issued_t_s: NOW_S + 59 }).ok).toBe(true);
    expect(parse({ ...ack, issued_t_s: '2026-12-02T09:00:00Z' })).toMatchObject({ ok: false, reason: 'bad_command' });
  });

  it('takes an unstamped command as current (older consoles), as documented', () => {
    expect(parse(ack).ok).toBe(true);
  });
});
