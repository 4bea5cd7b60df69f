/**
 * What the agent's thread and a runtime worker say to each other. Inputs go in batches (one
 * `postMessage` for everything routed to a worker in one turn of the event loop, the messages
 * packed by messagePacker.ts); a worker answers each batch with one message listing,
 * in input order, the results worth sending back (anything to publish, log or journal), the
 * replies to requests, and how many inputs it handled (the pool's flow control).
 */
import type { PackedMessages } from './messagePacker.ts';
import type { ForwardedLog, HostResult, LoadChange, RuntimeSpec } from './runtimeHost.ts';

export type WorkerInput =
  /** Broker messages, packed (messagePacker.ts); each counts as one input. */
  | PackedMessages
  /** The ring the packed messages' bytes lie in (sent first). */
  | { op: 'ring'; ring: SharedArrayBuffer }
  /** What a route number of packed messages stands for (sent before its first use). */
  | { op: 'route'; route: number; asset: string; topic: string }
  /** An operator command from another view, as if on the asset's command topic; `id` awaits its result. */
  | { op: 'command'; asset: string; payload: ArrayBuffer; nowMs: number; id: number }
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
