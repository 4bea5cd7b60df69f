import { describe, expect, it } from 'vitest';
import { BlockSequencer, DEFAULT_REORDER_WINDOW, type SequencerOutput } from '../src/acquisition/blockSequencer.ts';
import type { SampleBlock } from '../src/acquisition/samplePayload.ts';
import { QbandError } from '../src/errors.ts';

// Behaviour written as data. Unless a step says otherwise a block holds 4 samples at 4 Hz, so
// it lasts 1 s and the block after `seq@t` is `seq+1@t+1`; half a sample period is 0.125 s.
// Every expected outcome is worked by hand from the rules in docs/payloads.md ("Putting blocks
// in order"). Events read: `d3` delivered seq 3, `d3 gap` delivered with resetBefore and that
// reason, `x3 duplicate` dropped; `flush` in the input calls flush().

interface Step {
  seq: number;
  tS: number;
  fs?: number;
  n?: number;
}

function parseStep(s: string): Step {
  // seq@t[,fs=..][,n=..]
  const [head, ...opts] = s.split(',');
  const [seq, tS] = head.split('@').map(Number);
  const step: Step = { seq, tS };
  for (const o of opts) {
    const [k, v] = o.split('=');
    if (k === 'fs') step.fs = Number(v);
    if (k === 'n') step.n = Number(v);
  }
  return step;
}

function blockOf(step: Step): SampleBlock {
  return { seq: step.seq, tS: step.tS, sampleRateHz: step.fs ?? 4, samples: new Float32Array(step.n ?? 4) };
}

function events(out: SequencerOutput): string[] {
  return [
    ...out.deliver.map((d) => `d${d.block.seq}${d.resetBefore ? ` ${d.reason}` : ''}`),
    ...out.dropped.map((x) => `x${x.seq} ${x.reason}`),
  ];
}

function run(input: string[], reorderWindow?: number): { got: string[]; seq: BlockSequencer } {
  const seq = new BlockSequencer(reorderWindow === undefined ? {} : { reorderWindow });
  const got: string[] = [];
  for (const s of input) got.push(...events(s === 'flush' ? seq.flush() : seq.accept(blockOf(parseStep(s)))));
  return { got, seq };
}

interface Script {
  name: string;
  window?: number;
  input: string[];
  expected: string[];
  counts?: Record<string, number>;
}

const scripts: Script[] = [
  { name: 'in order', input: ['0@0', '1@1', '2@2', '3@3'], expected: ['d0', 'd1', 'd2', 'd3'] },
  { name: 'first block delivered as is, whatever its seq and t', input: ['41@1700000000'], expected: ['d41'] },
  {
    name: 'duplicate of the last block (QoS 1 redelivery)',
    input: ['0@0', '1@1', '1@1', '2@2'],
    expected: ['d0', 'd1', 'x1 duplicate', 'd2'],
    counts: { received: 4, delivered: 3, duplicate: 1 },
  },
  { name: 'duplicate of an older block of the run', input: ['0@0', '1@1', '2@2', '0@0'], expected: ['d0', 'd1', 'd2', 'x0 duplicate'] },
  {
    name: 'swap of two blocks',
    input: ['0@0', '2@2', '1@1', '3@3'],
    expected: ['d0', 'd1', 'd2', 'd3'],
    counts: { delivered: 4, reordered: 1, gap: 0 },
  },
  { name: 'three blocks in reverse within the window', input: ['0@0', '3@3', '2@2', '1@1', '4@4'], expected: ['d0', 'd1', 'd2', 'd3', 'd4'] },
  { name: 'second copy of a held block', input: ['0@0', '2@2', '2@2', '1@1'], expected: ['d0', 'x2 duplicate', 'd1', 'd2'] },
  {
    name: 'lost block: window 2 overflows on the third held',
    window: 2,
    input: ['0@0', '2@2', '3@3', '4@4', '5@5'],
    expected: ['d0', 'd2 gap', 'd3', 'd4', 'd5'],
    counts: { missing: 1, gap: 1, delivered: 5 },
  },
  {
    name: 'lost block: default window 4 gives up on the fifth held',
    input: ['0@0', '2@2', '3@3', '4@4', '5@5', '6@6'],
    expected: ['d0', 'd2 gap', 'd3', 'd4', 'd5', 'd6'],
  },
  {
    name: 'two lost blocks given up at once',
    window: 1,
    input: ['0@0', '3@3', '4@4'],
    expected: ['d0', 'd3 gap', 'd4'],
    counts: { missing: 2, gap: 1 },
  },
  { name: 'window 0: any gap is given up at once', window: 0, input: ['0@0', '2@2', '3@3'], expected: ['d0', 'd2 gap', 'd3'] },
  {
    name: 'late arrival after give-up',
    window: 1,
    input: ['0@0', '2@2', '3@3', '1@1'],
    expected: ['d0', 'd2 gap', 'd3', 'x1 late'],
    counts: { late: 1, duplicate: 0 },
  },
  {
    name: 'redelivery of a block from before a gap is late',
    window: 1,
    input: ['0@0', '1@1', '3@3', '4@4', '1@1'],
    expected: ['d0', 'd1', 'd3 gap', 'd4', 'x1 late'],
  },
  { name: 'lower seq before the first block is late', input: ['5@5', '4@4'], expected: ['d5', 'x4 late'] },
  {
    name: 'sender restart: counter back to 0, time goes on',
    input: ['10@0', '11@1', '12@2', '0@7', '1@8'],
    expected: ['d10', 'd11', 'd12', 'd0 sender_restart', 'd1'],
    counts: { sender_restart: 1 },
  },
  {
    name: 'sender restart with time exactly continuous',
    input: ['10@0', '11@1', '0@2', '1@3'],
    expected: ['d10', 'd11', 'd0 sender_restart', 'd1'],
  },
  {
    name: 'sender restart at the same seq as the last block',
    input: ['0@0', '1@1', '1@9'],
    expected: ['d0', 'd1', 'd1 sender_restart'],
  },
  {
    name: 'sender restart while blocks are held: held ones go out first',
    input: ['0@0', '1@1', '3@3', '0@10'],
    expected: ['d0', 'd1', 'd3 gap', 'd0 sender_restart'],
  },
  {
    name: 'duplicates after a restart are judged against the new run',
    input: ['5@0', '6@1', '0@5', '1@6', '0@5'],
    expected: ['d5', 'd6', 'd0 sender_restart', 'd1', 'x0 duplicate'],
  },
  {
    name: 'rate change',
    input: ['0@0', '1@1,fs=8', '2@1.5,fs=8'],
    expected: ['d0', 'd1 rate_change', 'd2'],
  },
  {
    name: 'rate change wins over a time jump in the same block',
    input: ['0@0', '1@5,fs=8'],
    expected: ['d0', 'd1 rate_change'],
  },
  { name: 'time jump forward', input: ['0@0', '1@1', '2@5', '3@6'], expected: ['d0', 'd1', 'd2 time_jump', 'd3'], counts: { time_jump: 1 } },
  { name: 'time jump backward', input: ['0@10', '1@11', '2@3', '3@4'], expected: ['d0', 'd1', 'd2 time_jump', 'd3'] },
  // 0.12 s, 0.11 s (measured from the end of the block actually delivered) and 0.13 s against
  // the half-sample tolerance of 0.125 s
  { name: 'time off by less than half a sample is continuous', input: ['0@0', '1@1.12', '2@2.01'], expected: ['d0', 'd1', 'd2'] },
  { name: 'time off by more than half a sample is a jump', input: ['0@0', '1@1.13'], expected: ['d0', 'd1 time_jump'] },
  {
    name: 'a held block that is not continuous resets when its turn comes',
    input: ['0@0', '2@9', '1@1'],
    expected: ['d0', 'd1', 'd2 time_jump'],
  },
  { name: 'different block lengths follow on', input: ['0@0,n=2', '1@0.5,n=8', '2@2.5,n=1'], expected: ['d0', 'd1', 'd2'] },
  {
    name: 'flush delivers what is held, the first with a gap reset',
    input: ['0@0', '2@2', '3@3', 'flush', '4@4'],
    expected: ['d0', 'd2 gap', 'd3', 'd4'],
  },
  { name: 'flush of held blocks that do not follow on: each a gap', input: ['0@0', '2@2', '4@4', 'flush'], expected: ['d0', 'd2 gap', 'd4 gap'] },
  { name: 'flush with nothing held delivers nothing', input: ['flush', '0@0', 'flush', '1@1'], expected: ['d0', 'd1'] },
];

describe('BlockSequencer scripts', () => {
  it.each(scripts)('$name', ({ input, window, expected, counts }) => {
    const { got, seq } = run(input, window);
    expect(got, `input ${input.join(' ')} (window ${window ?? DEFAULT_REORDER_WINDOW})`).toEqual(expected);
    if (counts) expect(seq.counts, `counts after ${input.join(' ')}`).toMatchObject(counts);
    // conservation (docs/payloads.md): received = delivered + duplicate + late + held
    const c = seq.counts;
    expect(c.received).toBe(c.delivered + c.duplicate + c.late + seq.heldCount);
  });
});

describe('BlockSequencer details', () => {
  it('epoch times at 25.6 kHz: 100 blocks of 0.1 s follow on without a reset', () => {
    // t_k = t0 + k * 2560 / 25600 computed as the sender would, at an epoch of 1.7e9 s where a
    // double resolves about 2.4e-7 s; half a sample is 1.95e-5 s.
    const s = new BlockSequencer();
    const resets: string[] = [];
    for (let k = 0; k < 100; k++) {
      const out = s.accept({ seq: k, tS: 1_700_000_000.1 + (k * 2560) / 25_600, sampleRateHz: 25_600, samples: new Float32Array(2560) });
      for (const d of out.deliver) if (d.resetBefore) resets.push(`${d.block.seq} ${d.reason}`);
    }
    expect(resets).toEqual([]);
    expect(s.counts.delivered).toBe(100);
  });

  it('epoch times at 25.6 kHz: 0.4 sample late is continuous, 0.6 sample late is a jump', () => {
    const dt = 1 / 25_600;
    const base = 1_700_000_000;
    const reasons = (offsetSamples: number) => {
      const s = new BlockSequencer();
      s.accept({ seq: 0, tS: base, sampleRateHz: 25_600, samples: new Float32Array(2560) });
      return s.accept({ seq: 1, tS: base + 0.1 + offsetSamples * dt, sampleRateHz: 25_600, samples: new Float32Array(2560) }).deliver.map((d) => d.reason ?? 'none');
    };
    expect(reasons(0.4)).toEqual(['none']);
    expect(reasons(-0.4)).toEqual(['none']);
    expect(reasons(0.6)).toEqual(['time_jump']);
    expect(reasons(-0.6)).toEqual(['time_jump']);
  });

  it('a 10 MHz sender at epoch times: the rounding of t is not taken for a time jump', () => {
    // Doubles near 1.7e9 are 2^-22 s = 2.4e-7 s apart (IEEE 754 binary64), more than half a
    // sample at 10 MHz (5e-8 s), so t = t0 + k * n / fs as a sender computes it misses the exact
    // end by a rounding step; the tolerance allows 4 roundings of the end time.
    const s = new BlockSequencer();
    const resets: string[] = [];
    for (let k = 0; k < 2000; k++) {
      const out = s.accept({ seq: k, tS: 1_700_000_000.1 + (k * 1000) / 1e7, sampleRateHz: 1e7, samples: new Float32Array(1000) });
      for (const d of out.deliver) if (d.resetBefore) resets.push(`${d.block.seq} ${d.reason}`);
    }
    expect(resets).toEqual([]);
  });

  it('delivers the very block objects it was given', () => {
    const s = new BlockSequencer();
    const a = blockOf({ seq: 0, tS: 0 });
    const b = blockOf({ seq: 1, tS: 1 });
    expect(s.accept(a).deliver[0].block).toBe(a);
    expect(s.accept(b).deliver[0].block).toBe(b);
  });

  it('the default reorder window is 4 blocks', () => {
    // pinned default of the agent (docs/payloads.md)
    expect(DEFAULT_REORDER_WINDOW).toBe(4);
    const s = new BlockSequencer();
    s.accept(blockOf({ seq: 0, tS: 0 }));
    for (let k = 2; k <= 5; k++) expect(s.accept(blockOf({ seq: k, tS: k })).deliver).toEqual([]);
    expect(s.heldCount).toBe(4);
  });

  it.each([-1, 1.5, 1025, Number.NaN])('reorderWindow %s is a QB_E_PAYLOAD_ARGUMENT error', (reorderWindow) => {
    let caught: unknown;
    try {
      new BlockSequencer({ reorderWindow });
    } catch (e) {
      caught = e;
    }
    expect(caught).toBeInstanceOf(QbandError);
    expect((caught as QbandError).code).toBe('QB_E_PAYLOAD_ARGUMENT');
    expect((caught as QbandError).message).toMatch(/reorderWindow must be a whole number from 0 to 1024/);
  });
});
