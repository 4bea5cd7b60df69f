/**
 * The `agent:` block: how the live agent paces its state messages and guards its inputs. Keys,
 * bounds and descriptions are rows of AGENT_BLOCK (mapKeys.ts); this file maps each key to its
 * field. The upper bounds keep what a key implies (timers, buffers, windows) within what an
 * edge box has.
 */
import { AGENT_BLOCK, keysOf, ruleOf } from './mapKeys.ts';
import type { MapView, Reader } from './mapView.ts';
import type { AgentConfig } from './types.ts';

const DAY_S = 86_400;

/** Each key's field (MQTT 5 carries the session expiry as a four-byte interval, 0xFFFFFFFF = never). */
const AGENT_FIELDS: Readonly<Record<string, keyof AgentConfig>> = {
  state_every_s: 'stateEveryS',
  stale_after_s: 'staleAfterS',
  max_samples_per_block: 'maxSamplesPerBlock',
  reorder_window: 'reorderWindow',
  max_future_s: 'maxFutureS',
  max_past_s: 'maxPastS',
  max_shelve_s: 'maxShelveS',
  session_expiry_s: 'sessionExpiryS',
  max_command_age_s: 'maxCommandAgeS',
};

export const AGENT_KEYS: readonly string[] = keysOf(AGENT_BLOCK);

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
  for (const key of AGENT_KEYS) {
    const field = AGENT_FIELDS[key];
    const value = view.number(key, ruleOf(AGENT_BLOCK, key), DEFAULT_AGENT[field]);
    if (value === undefined) ok = false;
    else agent[field] = value;
  }
  return ok ? agent : undefined;
}
