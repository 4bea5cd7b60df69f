/**
 * `--workers 0`: every runtime in the agent's own thread, each input handled to completion
 * before the call returns (the agent's behaviour before worker threads, kept exact). Nothing
 * ever waits here, so it is never saturated: what the agent cannot take waits in TCP.
 */
import type { LogSink } from '../transientStore.ts';
import { RuntimeGroup } from './runtimeGroup.ts';
import type { AssetSnapshot, HostResult, HostSink, RestoreReport, RuntimeHost, RuntimeSpec } from './runtimeHost.ts';

export class InThreadHost implements RuntimeHost {
  readonly workerCount = 0;
  readonly saturated = false;
  private readonly group: RuntimeGroup;

  constructor(private readonly sink: HostSink, log: LogSink) {
    this.group = new RuntimeGroup(log);
  }

  async add(specs: RuntimeSpec[]): Promise<RestoreReport[]> {
    const reports: RestoreReport[] = [];
    for (const spec of specs) {
      const r = await this.group.build(spec);
      if (r) reports.push(r);
    }
    return reports;
  }

  async replace(specs: RuntimeSpec[]): Promise<RestoreReport[]> {
    const reports: RestoreReport[] = [];
    for (const spec of specs) {
      const r = await this.group.replace(spec);
      if (r) reports.push(r);
    }
    return reports;
  }

  async remove(assets: string[]): Promise<void> {
    for (const a of assets) this.group.remove(a);
  }

  message(asset: string, topic: string, payload: Uint8Array, nowMs: number): void {
    const r = this.group.message(asset, topic, payload, nowMs);
    if (r) this.sink.result(r);
  }

  tick(nowMs: number, persist: boolean): void {
    const change = this.group.sampleLoad();
    if (change) this.sink.load(change);
    for (const r of this.group.tick(nowMs, persist)) this.sink.result(r);
  }

  async command(asset: string, payload: Uint8Array, nowMs: number): Promise<HostResult> {
    const r = this.group.message(asset, null, payload, nowMs);
    if (!r) throw new Error(`no runtime for asset ${asset}`);
    this.sink.result(r);
    return r;
  }

  async snapshots(): Promise<AssetSnapshot[]> {
    return this.group.snapshots();
  }

  whenReady(resume: () => void): void {
    resume();
  }

  async stop(): Promise<AssetSnapshot[]> {
    return this.group.snapshots();
  }
}
