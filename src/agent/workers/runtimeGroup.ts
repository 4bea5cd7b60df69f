/**
 * The runtimes one thread holds (the agent's own thread, or one worker), with that thread's
 * overload rule. Both hosts run their assets through this one piece, so the in-thread path and
 * the workers do exactly the same thing with each input.
 */
import { createRealFft, type RealFft } from '../../manipulation/realFft.ts';
import { AssetRuntime, type RuntimeResult } from '../assetRuntime.ts';
import { BusyMeter } from '../busyMeter.ts';
import { attachTransientStore, type LogSink } from '../transientStore.ts';
import type { AssetSnapshot, HostResult, LoadChange, RestoreReport, RuntimeSpec } from './runtimeHost.ts';

export class RuntimeGroup {
  private readonly runtimes = new Map<string, AssetRuntime>();
  private readonly ffts = new Map<number, RealFft>();
  private readonly load = new BusyMeter();

  constructor(private readonly log: LogSink) {}

  get size(): number {
    return this.runtimes.size;
  }

  /** Builds a runtime, resuming from `spec.saved` or from `from` (the runtime it replaces). */
  async build(spec: RuntimeSpec, from?: AssetRuntime): Promise<RestoreReport | null> {
    const size = spec.asset.analysis.frameSize;
    if (!this.ffts.has(size)) this.ffts.set(size, await createRealFft(size));
    const runtime = new AssetRuntime(spec.asset, spec.agent, spec.prefix, this.ffts.get(size) as RealFft);
    attachTransientStore(runtime, spec.stateDir, spec.mapText, this.log);
    runtime.shedSpectra = this.load.shedding;
    const saved = from?.snapshot() ?? spec.saved;
    const report = saved ? { asset: spec.asset.id, ...runtime.restore(saved) } : null;
    this.runtimes.set(spec.asset.id, runtime);
    return report;
  }

  /** A reload: the new runtime takes the old one's state at this point of the input order. */
  async replace(spec: RuntimeSpec): Promise<RestoreReport | null> {
    return this.build(spec, this.runtimes.get(spec.asset.id));
  }

  remove(asset: string): void {
    this.runtimes.delete(asset);
  }

  /** One message into its asset's runtime; null when the asset is not here (it left the map). */
  message(asset: string, topic: string | null, payload: Uint8Array, nowMs: number): HostResult | null {
    const runtime = this.runtimes.get(asset);
    if (!runtime) return null;
    // null: an operator command from another view, handled as if it came on the command topic.
    topic ??= runtime.topics.command;
    const startMs = performance.now();
    let result: RuntimeResult;
    try {
      result = runtime.onMessage(topic, payload, nowMs);
    } catch (err) {
      // A bug must not take the agent down: the host says it, the agent keeps watching.
      return { asset, out: [], drops: [], failed: { stack: String((err as Error).stack), topic } };
    }
    this.load.add(performance.now() - startMs);
    return withEventSnapshot(runtime, result);
  }

  /** The overload rule's sample for this thread; the switch, when there is one, applied here. */
  sampleLoad(): LoadChange | null {
    const change = this.load.sample(performance.now());
    if (change) for (const runtime of this.runtimes.values()) runtime.shedSpectra = change.shedding;
    return change;
  }

  /** The wall-clock tick of every runtime, in map order; with `persist` each carries its state. */
  tick(nowMs: number, persist: boolean): HostResult[] {
    const out: HostResult[] = [];
    for (const [asset, runtime] of this.runtimes) {
      let r: HostResult;
      try {
        r = withEventSnapshot(runtime, runtime.tick(nowMs));
      } catch (err) {
        r = { asset, out: [], drops: [], failed: { stack: String((err as Error).stack) } };
      }
      if (persist) Object.assign(r, { snapshot: r.snapshot ?? runtime.snapshot(), persist: true });
      out.push(r);
    }
    return out;
  }

  snapshots(): AssetSnapshot[] {
    return [...this.runtimes].map(([asset, runtime]) => ({ asset, snapshot: runtime.snapshot() }));
  }
}

/** Alarm and lifecycle events travel with the state right after them (journaled together). */
function withEventSnapshot(runtime: AssetRuntime, result: RuntimeResult): HostResult {
  const r: HostResult = { asset: runtime.asset.id, out: result.out, drops: result.drops };
  for (const o of result.out) {
    if (o.kind === 'alarm' || o.kind === 'lifecycle') {
      r.snapshot = runtime.snapshot();
      break;
    }
  }
  return r;
}
