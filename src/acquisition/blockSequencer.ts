/**
 * Puts the sample blocks of one input stream (one topic) back in order and says when the
 * consumer must forget its history. MQTT may redeliver (QoS 1), a bridge may reorder, a sender
 * may lose blocks or restart; a spectrum built across any of those would smear unrelated
 * samples together, so every break in the stream is delivered as `resetBefore: true`.
 *
 * Rules, with L the last delivered block, expected seq = L.seq + 1 and
 * L.end = L.t + L.count / L.fs; "continuous" means |t - L.end| <= half a sample period of L
 * (plus 4 double roundings of L.end, about 1.5 us at today's epoch times):
 *   - the first block is delivered as is (resetBefore false);
 *   - seq = expected: delivered; with resetBefore 'rate_change' if fs differs from L's (compared
 *     exactly: senders publish their nominal rate), else 'time_jump' if t is not continuous;
 *     then every held block that now follows on is delivered the same way;
 *   - seq > expected: held in a reorder buffer of at most `reorderWindow` blocks (a second copy
 *     of a held seq is a duplicate). When it would overflow, the missing seq(s) are given up:
 *     the lowest held is delivered with resetBefore 'gap' and the ones following it go out;
 *   - seq <= L.seq and t at or after L.end (within the tolerance): the sender restarted its
 *     counter; held blocks (older data) go out first as on flush(), then this block with
 *     resetBefore 'sender_restart';
 *   - seq <= L.seq and t before L.end: dropped. 'duplicate' when seq lies in the unbroken run
 *     delivered since the last gap or restart (delivery within a run is consecutive, so that
 *     seq went out already), else 'late': it was given up as missing or precedes that break.
 *   - flush() delivers whatever is held, in seq order, the first with resetBefore 'gap'.
 * Memory: at most reorderWindow blocks between calls. No clock: a stalled stream is flushed by
 * the caller, and wall-clock checks (t far from now) are the caller's.
 */
import { QbandError } from '../errors.ts';
import { quote } from './dropReason.ts';
import type { SampleBlock } from './samplePayload.ts';

export type ResetReason = 'gap' | 'rate_change' | 'time_jump' | 'sender_restart';
export type SequencerDropReason = 'duplicate' | 'late';

export interface Delivery {
  block: SampleBlock;
  /** The consumer must forget history before this block: it does not follow on from the last. */
  resetBefore: boolean;
  reason?: ResetReason;
}

export interface SequencerOutput {
  deliver: Delivery[];
  dropped: Array<{ reason: SequencerDropReason; seq: number }>;
}

export interface BlockSequencerOptions {
  /** Blocks held while waiting for a missing seq; 0 gives up on any gap at once. */
  reorderWindow?: number;
}

export const DEFAULT_REORDER_WINDOW = 4;
export const MAX_REORDER_WINDOW = 1024;

const COUNT_NAMES = [
  'received',
  'delivered',
  /** Delivered from the reorder buffer after the block it waited for arrived. */
  'reordered',
  'duplicate',
  'late',
  /** Seqs given up as missing (one gap reset may give up several). */
  'missing',
  'gap',
  'rate_change',
  'time_jump',
  'sender_restart',
] as const;
export type SequencerCountName = (typeof COUNT_NAMES)[number];
/** The names of `BlockSequencer.counts`, in the order its keys are listed. */
export const SEQUENCER_COUNT_NAMES: readonly SequencerCountName[] = COUNT_NAMES;

interface LastDelivered {
  seq: number;
  endS: number;
  sampleRateHz: number;
  toleranceS: number;
}

export class BlockSequencer {
  /** Running totals; received = delivered + duplicate + late + heldCount at every moment. */
  readonly counts: Record<SequencerCountName, number>;
  private readonly reorderWindow: number;
  private readonly held = new Map<number, SampleBlock>();
  private last: LastDelivered | null = null;
  /** First seq of the unbroken run delivered since the last gap or restart. */
  private runStartSeq = 0;

  constructor(opts: BlockSequencerOptions = {}) {
    const window = opts.reorderWindow ?? DEFAULT_REORDER_WINDOW;
    if (!Number.isInteger(window) || window < 0 || window > MAX_REORDER_WINDOW) {
      throw new QbandError('QB_E_PAYLOAD_ARGUMENT', `reorderWindow must be a whole number from 0 to ${MAX_REORDER_WINDOW}, got ${quote(window)}`);
    }
    this.reorderWindow = window;
    this.counts = Object.fromEntries(COUNT_NAMES.map((n) => [n, 0])) as Record<SequencerCountName, number>;
  }

  /** Blocks waiting in the reorder buffer. */
  get heldCount(): number {
    return this.held.size;
  }

  accept(block: SampleBlock): SequencerOutput {
    const out: SequencerOutput = { deliver: [], dropped: [] };
    this.counts.received++;
    const last = this.last;
    if (last === null) {
      this.runStartSeq = block.seq;
      this.emit(out, block);
      return out;
    }
    if (block.seq === last.seq + 1) {
      this.emitFollowing(out, block);
      this.drain(out);
    } else if (block.seq > last.seq) {
      if (this.held.has(block.seq)) this.drop(out, 'duplicate', block.seq);
      else {
        this.held.set(block.seq, block);
        while (this.held.size > this.reorderWindow) this.giveUpToLowestHeld(out);
      }
    } else if (block.tS >= last.endS - last.toleranceS) {
      while (this.held.size > 0) this.giveUpToLowestHeld(out);
      this.runStartSeq = block.seq;
      this.emit(out, block, 'sender_restart');
    } else {
      this.drop(out, block.seq >= this.runStartSeq ? 'duplicate' : 'late', block.seq);
    }
    return out;
  }

  /** Deliver everything held (the caller decided the missing blocks are not coming). */
  flush(): SequencerOutput {
    const out: SequencerOutput = { deliver: [], dropped: [] };
    while (this.held.size > 0) this.giveUpToLowestHeld(out);
    return out;
  }

  /** `block.seq` is last.seq + 1: a reset only if the rate or the time does not follow on. */
  private emitFollowing(out: SequencerOutput, block: SampleBlock): void {
    const last = this.last!;
    if (block.sampleRateHz !== last.sampleRateHz) this.emit(out, block, 'rate_change');
    else if (Math.abs(block.tS - last.endS) > last.toleranceS) this.emit(out, block, 'time_jump');
    else this.emit(out, block);
  }

  private drain(out: SequencerOutput): void {
    for (let next = this.held.get(this.last!.seq + 1); next !== undefined; next = this.held.get(this.last!.seq + 1)) {
      this.held.delete(next.seq);
      this.counts.reordered++;
      this.emitFollowing(out, next);
    }
  }

  private giveUpToLowestHeld(out: SequencerOutput): void {
    let lowest = Number.POSITIVE_INFINITY;
    for (const seq of this.held.keys()) if (seq < lowest) lowest = seq;
    const block = this.held.get(lowest)!;
    this.held.delete(lowest);
    this.counts.missing += lowest - (this.last!.seq + 1);
    this.runStartSeq = lowest;
    this.emit(out, block, 'gap');
    this.drain(out);
  }

  private emit(out: SequencerOutput, block: SampleBlock, reason?: ResetReason): void {
    out.deliver.push(reason === undefined ? { block, resetBefore: false } : { block, resetBefore: true, reason });
    const endS = block.tS + block.samples.length / block.sampleRateHz;
    const toleranceS = 0.5 / block.sampleRateHz + 4 * Number.EPSILON * Math.abs(endS);
    // Updated in place (one object per stream, not one per block): nothing outside holds it.
    const last = this.last;
    if (last === null) this.last = { seq: block.seq, endS, sampleRateHz: block.sampleRateHz, toleranceS };
    else {
      last.seq = block.seq;
      last.endS = endS;
      last.sampleRateHz = block.sampleRateHz;
      last.toleranceS = toleranceS;
    }
    this.counts.delivered++;
    if (reason !== undefined) this.counts[reason]++;
  }

  private drop(out: SequencerOutput, reason: SequencerDropReason, seq: number): void {
    out.dropped.push({ reason, seq });
    this.counts[reason]++;
  }
}
