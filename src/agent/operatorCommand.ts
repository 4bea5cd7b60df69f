/**
 * Operator commands on `<prefix>/<asset>/command`, JSON:
 *   {"action": "acknowledge", "component": "motor-reed", "order": "1x", "by": "J. Rivera"}
 *   {"action": "shelve", "component": "motor-reed", "order": "1x", "duration_s": 3600, "by": "...", "note": "..."}
 *   {"action": "unshelve", "component": "motor-reed", "order": "1x", "by": "..."}
 * `by` and `note` are optional free text (at most 200 characters each). `issued_t_s` (optional,
 * wall-clock seconds since the Unix epoch) says when the operator gave the command: the agent's
 * session keeps commands for it while it is away, so one may arrive long after it was meant;
 * an acknowledge or shelve older than the map's agent.max_command_age_s is refused
 * (`stale_command`), not applied.
 * Anything else is refused with a reason; nothing in a command can reach the machine.
 */
import { quote } from '../acquisition/dropReason.ts';
import { isPrintable } from '../text/printable.ts';
import type { AssetConfig } from '../config/types.ts';

export type OperatorCommand =
  | { action: 'acknowledge' | 'unshelve'; component: string; order: string; by: string | null }
  | { action: 'shelve'; component: string; order: string; by: string | null; durationS: number };

export type ParsedCommand = { ok: true; command: OperatorCommand } | { ok: false; reason: string; detail: string };

const MAX_COMMAND_BYTES = 4096;
const MAX_TEXT = 200;
const KEYS = new Set(['action', 'component', 'order', 'duration_s', 'by', 'note', 'issued_t_s']);

/** The agent's limits a command is checked against, and the wall clock at its arrival. */
export interface CommandLimits {
  maxShelveS: number;
  /** Oldest issue time accepted, s before arrival. */
  maxCommandAgeS: number;
  /** Furthest issue time accepted ahead of the agent's clock, s (a sender's clock error). */
  maxFutureS: number;
  nowS: number;
}

function refuse(reason: string, detail: string): ParsedCommand {
  return { ok: false, reason, detail };
}

export function parseOperatorCommand(payload: Uint8Array, asset: AssetConfig, limits: CommandLimits): ParsedCommand {
  const { maxShelveS } = limits;
  if (payload.length > MAX_COMMAND_BYTES) return refuse('bad_command', `command of ${payload.length} bytes exceeds ${MAX_COMMAND_BYTES}`);
  let body: unknown;
  try {
    body = JSON.parse(Buffer.from(payload.buffer, payload.byteOffset, payload.length).toString('utf8'));
  } catch {
    return refuse('bad_command', 'command is not valid JSON');
  }
  if (typeof body !== 'object' || body === null || Array.isArray(body)) return refuse('bad_command', 'command must be a JSON object');
  const b = body as Record<string, unknown>;
  const unknown = Object.keys(b).filter((k) => !KEYS.has(k));
  if (unknown.length > 0) return refuse('bad_command', `unknown key(s) ${unknown.map((k) => quote(k)).join(', ')}; expected ${[...KEYS].join(', ')}`);
  const { action, component, order } = b;
  if (action !== 'acknowledge' && action !== 'shelve' && action !== 'unshelve') {
    return refuse('bad_command', `action must be acknowledge, shelve or unshelve, got ${quote(action)}`);
  }
  if (typeof component !== 'string' || !asset.components.some((c) => c.id === component)) {
    return refuse('unknown_alarm', `component ${quote(component)} is not one of ${asset.components.map((c) => c.id).join(', ')}`);
  }
  const comp = asset.components.find((c) => c.id === component)!;
  if (typeof order !== 'string' || !comp.orderIds.includes(order)) {
    return refuse('unknown_alarm', `order ${quote(order)} does not excite ${component} (its orders: ${comp.orderIds.join(', ')})`);
  }
  for (const key of ['by', 'note'] as const) {
    // Shown to operators and written to logs: no control or bidirectional characters.
    if (b[key] !== undefined && (typeof b[key] !== 'string' || (b[key] as string).length > MAX_TEXT || !isPrintable(b[key] as string))) {
      return refuse('bad_command', `${key} must be text of at most ${MAX_TEXT} characters, without control or bidirectional characters`);
    }
  }
  const issued = b.issued_t_s;
  if (issued !== undefined) {
    if (typeof issued !== 'number' || !Number.isFinite(issued)) return refuse('bad_command', `issued_t_s must be seconds since the Unix epoch, got ${JSON.stringify(issued)}`);
    const ageS = limits.nowS - issued;
    // Acknowledge and shelve quieten an alarm, so a late one could quieten an alarm the operator
    // never saw; a late unshelve only makes alarms visible again and is applied.
    if (ageS > limits.maxCommandAgeS && action !== 'unshelve') {
      return refuse('stale_command', `${action} issued ${ageS.toFixed(0)} s ago, older than the map's agent.max_command_age_s (${limits.maxCommandAgeS} s); send it again if it still holds`);
    }
    if (-ageS > limits.maxFutureS) {
      return refuse('bad_command', `issued_t_s is ${(-ageS).toFixed(0)} s ahead of this agent's clock (limit ${limits.maxFutureS} s): check the sender's clock`);
    }
  }
  const by = typeof b.by === 'string' ? b.by : null;
  if (action === 'shelve') {
    const d = b.duration_s;
    if (typeof d !== 'number' || !Number.isFinite(d) || d <= 0 || d > maxShelveS) {
      return refuse('bad_command', `shelve needs duration_s in (0, ${maxShelveS}] s (the map's agent.max_shelve_s), got ${quote(d)}`);
    }
    return { ok: true, command: { action, component, order, by, durationS: d } };
  }
  if (b.duration_s !== undefined) return refuse('bad_command', `duration_s goes with shelve only`);
  return { ok: true, command: { action, component, order, by } };
}
