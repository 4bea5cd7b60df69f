/**
 * What the agent's thread and a runtime worker say to each other. Inputs go in batches (one
 * `postMessage` for everything routed to a worker in one turn of the event loop, the payloads'
 * bytes transferred, not copied again); a worker answers each batch with one message listing,
 * in input order, the results worth sending back (anything to publish, log or journal), the
 * replies to requests, and how many inputs it handled (the pool's flow control).
 */
import type { ForwardedLog, HostResult, LoadChange, RuntimeSpec } from './runtimeHost.ts';

export type WorkerInput =
  /** A broker message (topic null: an operator command from another view, `id` awaits its result). */
  | { op: 'message'; asset: string; topic: string | null; payload: ArrayBuffer; nowMs: number; id?: number }
  | { op: 'tick'; nowMs: number; persist: boolean }
  | { op: 'add' | 'replace'; spec: RuntimeSpec; id: number }
  | { op: 'remove'; asset: string; id: number }
  | { op: 'snapshots'; id: number };

export type AnswerEntry =
  | { kind: 'result'; result: HostResult; id?: number }
  | { kind: 'reply'; id: number; value: unknown }
  | { kind: 'load'; change: LoadChange };

export type WorkerOutput =
  | { kind: 'answers'; entries: AnswerEntry[]; handled: number }
  | { kind: 'log'; line: ForwardedLog };
