/**
 * `--workers N` (N >= 1): each asset's runtime on one of N worker threads. The agent's thread
 * keeps the MQTT connection, the journal and the publishing; it routes each message to the
 * worker that holds its asset and gets each result back with the snapshot taken right after
 * it when it carries events (so the journal still writes an event with its state before it is
 * published).
 *
 * Assignment: each new asset goes to the worker with the fewest sensors so far (ties: the
 * lowest number), in map order; an asset keeps its worker while it stays in the map, so a
 * reload's replacement is one more input in that worker's order and the new runtime resumes
 * from the old one's state with nothing to hold back or forward.
 *
 * Flow control: inputs wait in the pool (queued or with a worker) up to MAX_IN_FLIGHT per
 * worker; past that `saturated` is true and the agent stops taking messages from its socket
 * (mqtt.js `handleMessage`), so the rest wait in TCP and at the broker as before and memory
 * stays flat. It stays true until every worker is down to half the bound, so the agent then
 * takes a burst of messages (their PUBACKs in one write) rather than one per answer, which
 * measured as one `writev` per block again (`npm run bench:live`). A busy worker is handed its
 * next batch before it has finished the one in hand (up to POST_AHEAD inputs posted), so it does
 * not wait for the agent's thread between batches; while it has some in hand, what gathers is
 * posted only once it makes a batch of MIN_BATCH (fewer, larger posts and wake-ups of either
 * thread). An idle worker is handed whatever waits at once.
 *
 * A worker that ends unasked (an uncaught failure outside the runtimes' own error handling) is
 * started again with its assets, each resumed from the last state the pool saw of it (the
 * periodic snapshot or the one with its last event), so an asset is not left unwatched; inputs
 * it had in hand are lost and said so. At most MAX_RESTARTS a worker within RESTART_WINDOW_MS:
 * past that its assets stay unwatched and the log says to restart the agent.
 */
import type { Worker } from 'node:worker_threads';
import type { LogSink } from '../transientStore.ts';
import { MessagePacker } from './messagePacker.ts';
import type { AnswerEntry, WorkerInput, WorkerOutput } from './protocol.ts';
import type { AssetSnapshot, HostResult, HostSink, RestoreReport, RuntimeHost, RuntimeSpec } from './runtimeHost.ts';
import { startRuntimeWorker } from './workerScript.ts';

/** Inputs a worker may have waiting or in hand before the agent stops reading its socket. */
export const MAX_IN_FLIGHT = 192;
/** Once saturated, the agent reads on when every worker is down to this many (a burst, not one at a time). */
const RESUME_AT = MAX_IN_FLIGHT / 2;
/** A worker with this many inputs in hand (posted, not yet answered) is handed no more until it answers. */
const POST_AHEAD = 128;
/** A worker with inputs in hand is handed more only once this many wait for it. */
const MIN_BATCH = 64;
/** Restarts of one worker allowed within the window before its assets are given up. */
const MAX_RESTARTS = 3;
const RESTART_WINDOW_MS = 10 * 60_000;

interface Slot {
  index: number;
  worker: Worker;
  queue: WorkerInput[];
  transfer: ArrayBuffer[];
  /** Broker messages since the last input of another kind, packed. */
  packer: MessagePacker;
  /** Route numbers this worker knows: `asset \n topic`. */
  routes: Map<string, number>;
  /** Per post not yet answered: how many packed batches it carried (their ring space to give back). */
  packsPosted: number[];
  /** Inputs routed here and not yet answered (packed, queued or posted). */
  inFlight: number;
  /** Of those, the ones posted to the worker. */
  posted: number;
  sensors: number;
  failed: boolean;
  /** Wall times (ms) this worker index was restarted. */
  restarts: number[];
  /** The uncaught error that ended it, when there was one. */
  error: Error | null;
}

interface Pending {
  slot: Slot;
  resolve: (value: unknown) => void;
  reject: (err: Error) => void;
}

export class WorkerPool implements RuntimeHost {
  private readonly slots: Slot[];
  private readonly owner = new Map<string, Slot>();
  private readonly pending = new Map<number, Pending>();
  private readonly waiters: Array<() => void> = [];
  private nextId = 1;
  private flushScheduled = false;
  /** Saturated, until every worker is down to RESUME_AT. */
  private holding = false;
  /** What each asset's runtime was built from, and the latest state seen of it (for a restart). */
  private readonly specs = new Map<string, RuntimeSpec>();
  private readonly lastState = new Map<string, RuntimeSpec['saved']>();
  private stopping = false;

  constructor(
    count: number,
    private readonly sink: HostSink,
    private readonly log: LogSink,
  ) {
    this.slots = Array.from({ length: count }, (_, index) => this.startSlot(index));
  }

  get workerCount(): number {
    return this.slots.length;
  }

  get saturated(): boolean {
    if (this.holding) this.holding = this.slots.some((s) => s.inFlight > RESUME_AT);
    else this.holding = this.slots.some((s) => s.inFlight >= MAX_IN_FLIGHT);
    return this.holding;
  }

  whenReady(resume: () => void): void {
    if (this.saturated) this.waiters.push(resume);
    else resume();
  }

  async add(specs: RuntimeSpec[]): Promise<RestoreReport[]> {
    const asked = specs.map((spec) => {
      const slot = this.slots.reduce((best, s) => (s.sensors < best.sensors ? s : best));
      slot.sensors += spec.asset.sensors.length;
      this.owner.set(spec.asset.id, slot);
      this.specs.set(spec.asset.id, spec);
      return this.request(slot, (id) => ({ op: 'add', spec, id }));
    });
    return reports(await Promise.all(asked));
  }

  async replace(specs: RuntimeSpec[]): Promise<RestoreReport[]> {
    const asked = specs.map((spec) => {
      const slot = this.slotOf(spec.asset.id);
      this.specs.set(spec.asset.id, spec);
      return this.request(slot, (id) => ({ op: 'replace', spec, id }));
    });
    return reports(await Promise.all(asked));
  }

  async remove(assets: string[]): Promise<void> {
    await Promise.all(
      assets.map((asset) => {
        const slot = this.slotOf(asset);
        this.owner.delete(asset);
        this.specs.delete(asset);
        this.lastState.delete(asset);
        return this.request(slot, (id) => ({ op: 'remove', asset, id }));
      }),
    );
  }

  message(asset: string, topic: string, payload: Uint8Array, nowMs: number): void {
    const slot = this.owner.get(asset);
    if (!slot || slot.failed) return;
    const key = `${asset}\n${topic}`;
    let route = slot.routes.get(key);
    if (route === undefined) {
      route = slot.routes.size;
      slot.routes.set(key, route);
      this.push(slot, { op: 'route', route, asset, topic });
    }
    slot.packer.add(route, payload, nowMs);
    slot.inFlight++;
    this.scheduleFlush();
  }

  tick(nowMs: number, persist: boolean): void {
    for (const slot of this.slots) this.push(slot, { op: 'tick', nowMs, persist });
  }

  async command(asset: string, payload: Uint8Array, nowMs: number): Promise<HostResult> {
    const slot = this.slotOf(asset);
    const r = await this.request(slot, (id) => ({ op: 'command', asset, payload: ownBytes(payload, slot), nowMs, id }));
    if (!r) throw new Error(`no runtime for asset ${asset}`);
    return r as HostResult;
  }

  async snapshots(): Promise<AssetSnapshot[]> {
    const all = await Promise.all(this.slots.filter((s) => !s.failed).map((slot) => this.request(slot, (id) => ({ op: 'snapshots', id }))));
    return (all as AssetSnapshot[][]).flat();
  }

  async stop(): Promise<AssetSnapshot[]> {
    const last = await this.snapshots();
    this.stopping = true;
    await Promise.all(this.slots.map((s) => s.worker.terminate()));
    return last;
  }

  private startSlot(index: number, restarts: number[] = []): Slot {
    const worker = startRuntimeWorker();
    const packer = new MessagePacker();
    // The ring goes first, with the first post (its answer then covers it).
    const slot: Slot = { index, worker, queue: [{ op: 'ring', ring: packer.ring }], transfer: [], packer, routes: new Map(), packsPosted: [], inFlight: 0, posted: 0, sensors: 0, failed: false, restarts, error: null };
    worker.on('message', (m: WorkerOutput) => {
      if (m.kind === 'log') return this.sink.log(m.line);
      this.answered(slot, m.entries, m.handled);
    });
    // An uncaught failure ends the thread (the runtimes catch their own); 'exit' follows 'error'.
    worker.on('error', (err) => void (slot.error = err));
    worker.on('exit', (code) => {
      if (!this.stopping && !slot.failed) this.failed(slot, code);
    });
    return slot;
  }

  /** A worker ended unasked: what it had in hand is lost; its assets go to a new worker if allowed. */
  private failed(slot: Slot, code: number): void {
    slot.failed = true;
    const assets = this.assetsOf(slot);
    const lost = slot.inFlight;
    slot.inFlight = 0;
    slot.posted = 0;
    for (const [id, p] of this.pending) {
      if (p.slot !== slot) continue;
      this.pending.delete(id);
      p.reject(new Error(`runtime worker ${slot.index} failed`));
    }
    const nowMs = Date.now();
    const recent = slot.restarts.filter((t) => nowMs - t < RESTART_WINDOW_MS);
    const restart = recent.length < MAX_RESTARTS && assets.length > 0;
    const err = slot.error ? String(slot.error.stack) : `exit code ${code}`;
    this.log.error(
      { stage: 'agent', code: 'QB_E_INTERNAL', worker: slot.index, assets, lost_inputs: lost, err },
      restart
        ? 'runtime worker failed: started again, its assets resumed from their last state (inputs it had in hand are lost)'
        : 'runtime worker failed again and again: its assets are no longer watched; restart the agent',
    );
    if (restart) this.restart(slot, assets, [...recent, nowMs]);
    while (this.waiters.length > 0 && !this.saturated) (this.waiters.shift() as () => void)();
  }

  private restart(old: Slot, assets: string[], restarts: number[]): void {
    const fresh = this.startSlot(old.index, restarts);
    fresh.sensors = old.sensors;
    this.slots[old.index] = fresh;
    const specs = assets.map((asset) => {
      this.owner.set(asset, fresh);
      const spec = this.specs.get(asset) as RuntimeSpec;
      return { ...spec, saved: this.lastState.get(asset) ?? spec.saved };
    });
    // Queued before any message that arrives from now on, so each asset is built before its next input.
    void Promise.all(specs.map((spec) => this.request(fresh, (id) => ({ op: 'add', spec, id })))).then(
      () => this.log.info({ stage: 'agent', code: 'QB_I_WORKER_RESTART', worker: old.index, assets }, 'runtime worker started again'),
      (e: Error) => this.log.error({ stage: 'agent', code: 'QB_E_INTERNAL', worker: old.index, assets, err: e.message }, 'runtime worker could not be started again'),
    );
  }

  private assetsOf(slot: Slot): string[] {
    return [...this.owner].filter(([, s]) => s === slot).map(([a]) => a);
  }

  private slotOf(asset: string): Slot {
    const slot = this.owner.get(asset);
    if (!slot) throw new Error(`no runtime for asset ${asset}`);
    return slot;
  }

  private request(slot: Slot, input: (id: number) => WorkerInput): Promise<unknown> {
    const id = this.nextId++;
    return new Promise((resolve, reject) => {
      if (slot.failed) return reject(new Error(`worker ${slot.index} failed`));
      this.pending.set(id, { slot, resolve, reject });
      this.push(slot, input(id));
    });
  }

  private push(slot: Slot, input: WorkerInput): void {
    if (slot.failed) return;
    closePacked(slot);
    slot.queue.push(input);
    slot.inFlight++;
    this.scheduleFlush();
  }

  private scheduleFlush(): void {
    if (this.flushScheduled) return;
    this.flushScheduled = true;
    // Everything routed in this turn of the event loop (one socket read) goes in one message.
    setImmediate(() => this.flush());
  }

  private flush(): void {
    this.flushScheduled = false;
    for (const slot of this.slots) this.post(slot);
  }

  /**
   * Hands a worker what waits for it: at once when it has nothing in hand; while it has some,
   * once MIN_BATCH wait (its next batch, so it need not wait for this thread between the two),
   * and never past POST_AHEAD in hand. Else the inputs gather until it answers.
   */
  private post(slot: Slot): void {
    if (slot.failed || slot.posted >= POST_AHEAD) return;
    if (slot.posted > 0 && slot.inFlight - slot.posted < MIN_BATCH) return;
    closePacked(slot);
    if (slot.queue.length === 0) return;
    slot.worker.postMessage(slot.queue, slot.transfer);
    slot.packsPosted.push(slot.queue.filter((input) => input.op === 'messages').length);
    slot.posted = slot.inFlight;
    slot.queue = [];
    slot.transfer = [];
  }

  private answered(slot: Slot, entries: AnswerEntry[], handled: number): void {
    for (const e of entries) {
      if (e.kind === 'load') this.sink.load({ ...e.change, worker: slot.index });
      else if (e.kind === 'result') {
        if (e.result.snapshot) this.lastState.set(e.result.asset, e.result.snapshot);
        this.sink.result(e.result);
      }
      if (e.kind !== 'load' && e.id !== undefined) this.settle(e.id, e.kind === 'result' ? e.result : e.value);
    }
    slot.inFlight -= handled;
    slot.posted -= handled;
    // Answers come one per post, in order: the ring space of that post's batches is free.
    for (let n = slot.packsPosted.shift() ?? 0; n > 0; n--) slot.packer.answered();
    this.post(slot);
    while (this.waiters.length > 0 && !this.saturated) (this.waiters.shift() as () => void)();
  }

  private settle(id: number, value: unknown): void {
    const p = this.pending.get(id);
    if (!p) return;
    this.pending.delete(id);
    const error = (value as { error?: string } | null)?.error;
    if (typeof error === 'string') p.reject(new Error(error));
    else p.resolve(value);
  }
}

/** Packed messages so far go into the queue, before an input of another kind. */
function closePacked(slot: Slot): void {
  if (slot.packer.count === 0) return;
  const { packed, transfer } = slot.packer.take();
  slot.queue.push(packed);
  slot.transfer.push(...transfer);
}

/** A command's bytes in an ArrayBuffer of their own, transferred (never the view's whole backing buffer). */
function ownBytes(payload: Uint8Array, slot: Slot): ArrayBuffer {
  const bytes = new ArrayBuffer(payload.byteLength);
  new Uint8Array(bytes).set(payload);
  slot.transfer.push(bytes);
  return bytes;
}

function reports(values: unknown[]): RestoreReport[] {
  return values.filter((v): v is RestoreReport => v !== null && typeof v === 'object');
}
