/**
 * The `agent:` block: how the live agent paces its state messages and guards its inputs. One
 * row per key (name, field, bounds, default) so a key is added in one place. The upper bounds
 * keep what a key implies (timers, buffers, windows) within what an edge box has.
 */
import type { MapView, NumberRule, Reader } from './mapView.ts';
import type { AgentConfig } from './types.ts';

/** The reorder window the block sequencer accepts at most (QB_E_PAYLOAD_ARGUMENT beyond). */
const MAX_REORDER_WINDOW = 1024;
/** Samples of one channel in one block: 4 Mi float32 is 16 MiB per message. */
const MAX_SAMPLES_PER_BLOCK = 4_194_304;
const DAY_S = 86_400;
const YEAR_S = 365 * DAY_S;

interface AgentKey {
  key: string;
  field: keyof AgentConfig;
  rule: NumberRule;
}

const AGENT_FIELDS: readonly AgentKey[] = [
  { key: 'state_every_s', field: 'stateEveryS', rule: { ge: 0.1, le: DAY_S } },
  { key: 'stale_after_s', field: 'staleAfterS', rule: { gt: 0, le: DAY_S } },
  { key: 'max_samples_per_block', field: 'maxSamplesPerBlock', rule: { integer: true, ge: 1, le: MAX_SAMPLES_PER_BLOCK } },
  { key: 'reorder_window', field: 'reorderWindow', rule: { integer: true, ge: 0, le: MAX_REORDER_WINDOW } },
  { key: 'max_future_s', field: 'maxFutureS', rule: { gt: 0, le: DAY_S } },
  { key: 'max_past_s', field: 'maxPastS', rule: { gt: 0, le: YEAR_S } },
  { key: 'max_shelve_s', field: 'maxShelveS', rule: { gt: 0, le: YEAR_S } },
  // MQTT 5 carries the session expiry as a four-byte interval (0xFFFFFFFF = never).
  { key: 'session_expiry_s', field: 'sessionExpiryS', rule: { integer: true, ge: 0, le: 4_294_967_295 } },
  { key: 'max_command_age_s', field: 'maxCommandAgeS', rule: { gt: 0, le: DAY_S } },
];

export const AGENT_KEYS: readonly string[] = AGENT_FIELDS.map((f) => f.key);

export const DEFAULT_AGENT: AgentConfig = {
  stateEveryS: 1,
  staleAfterS: 5,
  maxSamplesPerBlock: 262_144,
  reorderWindow: 4,
  maxFutureS: 60,
  maxPastS: 7 * DAY_S,
  maxShelveS: DAY_S,
  sessionExpiryS: DAY_S,
  maxCommandAgeS: 300,
};

export function readAgent(reader: Reader, top: MapView): AgentConfig | undefined {
  const view = reader.map(top.get('agent') ?? null, 'agent', AGENT_KEYS, top.keyOffset('agent'));
  if (!view) return undefined;
  const agent: AgentConfig = { ...DEFAULT_AGENT };
  let ok = true;
  for (const { key, field, rule } of AGENT_FIELDS) {
    const value = view.number(key, rule, DEFAULT_AGENT[field]);
    if (value === undefined) ok = false;
    else agent[field] = value;
  }
  return ok ? agent : undefined;
}
