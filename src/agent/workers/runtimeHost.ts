/**
 * Where the asset runtimes live, as the agent sees it. Two hosts keep the same contract:
 * `InThreadHost` (runtimes on the agent's own thread, `--workers 0`) and `WorkerPool` (each
 * asset's runtime on one of N worker threads). The agent routes every broker message to
 * `message()` and gets every result back through the sink's `result()`, one asset's results
 * always in the order of its inputs, so the agent's wiring does not fork in two.
 *
 * Nothing an asset decides depends on another asset, and each runtime receives exactly the
 * messages, wall-clock stamps and ticks it would receive on the main thread, in the same order:
 * so the records an asset publishes are byte-identical whatever the number of workers.
 */
import type { AgentConfig, AssetConfig } from '../../config/types.ts';
import type { RuntimeResult, RuntimeSnapshot } from '../assetRuntime.ts';

/** What builds one asset's runtime, plain data (it crosses to a worker thread). */
export interface RuntimeSpec {
  asset: AssetConfig;
  agent: AgentConfig;
  prefix: string;
  /** The map's text, for the lines a drift advisory quotes (null: none). */
  mapText: string | null;
  /** The state directory, where transients are kept (null: nothing kept). */
  stateDir: string | null;
  /** State to resume from (the journal's at a start); absent: a fresh runtime. */
  saved?: RuntimeSnapshot;
}

/** What a restore kept: component/order pairs carried over and the ones started fresh. */
export interface RestoreReport {
  asset: string;
  restored: string[];
  fresh: string[];
}

/** One runtime's answer to one input (a message, a tick, a command). */
export interface HostResult extends RuntimeResult {
  asset: string;
  /**
   * The runtime's state right after this result: present when it carries alarm or lifecycle
   * events (journaled together with them), and on a tick that asked for snapshots (`persist`).
   */
  snapshot?: RuntimeSnapshot;
  /** A tick result whose snapshot is the periodic one, to be written to the journal. */
  persist?: boolean;
  /** The input failed inside the runtime (a bug): the stack, and the topic when a message. */
  failed?: { stack: string; topic?: string };
}

/** An overload rule switch (busyMeter.ts), from the whole thread or from one worker. */
export interface LoadChange {
  shedding: boolean;
  busy: number;
  /** The worker whose assets switched; absent in the thread of the agent. */
  worker?: number;
}

/** A log line written inside a worker, to go out through the agent's logger with its code. */
export interface ForwardedLog {
  level: 'info' | 'warn' | 'error';
  fields: Record<string, unknown>;
  msg: string;
}

/** Where a host delivers what its runtimes produce (the agent). */
export interface HostSink {
  result(r: HostResult): void;
  load(change: LoadChange): void;
  log(line: ForwardedLog): void;
}

export interface AssetSnapshot {
  asset: string;
  snapshot: RuntimeSnapshot;
}

export interface RuntimeHost {
  /** Worker threads in use (0: the runtimes run in the agent's thread). */
  readonly workerCount: number;
  /** Builds runtimes for new assets (restored from `saved` when given). */
  add(specs: RuntimeSpec[]): Promise<RestoreReport[]>;
  /**
   * Rebuilds changed assets (a map reload): each new runtime resumes from its old runtime's
   * state, taken after every input handed over before this call and before any after it.
   */
  replace(specs: RuntimeSpec[]): Promise<RestoreReport[]>;
  remove(assets: string[]): Promise<void>;
  /** One broker message for an asset, stamped with the wall-clock time of its arrival. */
  message(asset: string, topic: string, payload: Uint8Array, nowMs: number): void;
  /** The wall-clock tick for every asset (and the overload rule); `persist` asks for snapshots. */
  tick(nowMs: number, persist: boolean): void;
  /** An operator command from another view; resolves once its result has gone to the sink. */
  command(asset: string, payload: Uint8Array, nowMs: number): Promise<HostResult>;
  /** Every runtime's state, after every input handed over so far. */
  snapshots(): Promise<AssetSnapshot[]>;
  /** True while too many inputs wait to be handled: the agent stops reading the broker. */
  readonly saturated: boolean;
  /** Calls `resume` once the host is no longer saturated (at once when it is not). */
  whenReady(resume: () => void): void;
  /** Handles everything handed over, then releases the runtimes; returns their last states. */
  stop(): Promise<AssetSnapshot[]>;
}
