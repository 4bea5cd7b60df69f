/**
 * Where the bench process's CPU goes: V8's sampling profiler (node:inspector, no extra package)
 * around a piece of work, each sample charged to a part of the data path by the file of the
 * innermost frame that has one (a builtin such as TypedArray.set is charged to its caller;
 * JSON.stringify and JSON.parse are shown on their own).
 */
import { writeFileSync } from 'node:fs';
import { Session } from 'node:inspector/promises';
import { join } from 'node:path';

interface ProfileNode {
  id: number;
  callFrame: { functionName: string; url: string };
  children?: number[];
}

interface Profile {
  nodes: ProfileNode[];
  samples: number[];
  timeDeltas: number[];
}

/** Part of the data path a source file belongs to; null when the frame has no file. */
function partOf(url: string, functionName: string): string | null {
  if (url === '') {
    if (functionName === '(garbage collector)') return 'garbage collection';
    if (functionName === '(idle)') return 'idle';
    if (functionName === '(program)') return 'V8 and native, unattributed';
    if (functionName === 'stringify' || functionName === 'parse') return 'JSON.stringify / parse';
    return null;
  }
  if (url === 'node:inspector' || url.startsWith('node:internal/inspector')) return 'profiler';
  // pffft's FFT and qband's own kernels (spectra, decimation, tracking, capture, the sample
  // decoder): a wasm frame names its module by a hash, not its source.
  if (url.startsWith('wasm://')) return 'WebAssembly (FFT and kernels)';
  if (url.includes('/node_modules/mqtt-packet/') || url.includes('/node_modules/bl/')) return 'MQTT packet parsing (mqtt-packet, bl)';
  if (url.includes('/node_modules/mqtt/')) return 'MQTT client (mqtt.js)';
  if (url.includes('/node_modules/')) return 'other packages (streams, logger)';
  if (url.startsWith('node:')) return 'Node core (socket, streams, Buffer, IPC)';
  if (/\/src\/(engine|manipulation|physics|detection|transients|identification)\//.test(url)) return 'engine (spectra, orders, dwell, transients)';
  if (url.includes('/src/acquisition/')) return 'decode + sequencer';
  if (url.includes('/src/agent/')) return 'agent runtime (routing, counters)';
  if (url.includes('/src/advisory/')) return 'state and alarm messages';
  if (url.includes('/bench/')) return 'bench instrumentation';
  return 'other';
}

export interface ProfileShares {
  /** Share of the non-idle sampled time per part, largest first. */
  parts: Array<{ part: string; share: number }>;
  /** The functions with the most self time (the innermost frame of a sample), largest first. */
  functions: Array<{ name: string; part: string; share: number }>;
  sampledMs: number;
}

export function summarizeProfile(profile: Profile): ProfileShares {
  const byId = new Map<number, ProfileNode>();
  const parent = new Map<number, number>();
  for (const n of profile.nodes) {
    byId.set(n.id, n);
    for (const c of n.children ?? []) parent.set(c, n.id);
  }
  const memo = new Map<number, string>();
  const partOfNode = (id: number): string => {
    const known = memo.get(id);
    if (known) return known;
    let at: number | undefined = id;
    let part: string | null = null;
    while (at !== undefined && part === null) {
      const n = byId.get(at) as ProfileNode;
      part = partOf(n.callFrame.url, n.callFrame.functionName);
      at = parent.get(at);
    }
    memo.set(id, part ?? 'other');
    return part ?? 'other';
  };
  const label = (n: ProfileNode): string => {
    const { functionName, url } = n.callFrame;
    return `${functionName || '(anonymous)'}${url ? ` ${url.slice(url.lastIndexOf('/') + 1)}` : ''}`;
  };
  /** A frame without a file is named with the nearest caller that has one. */
  const describe = (id: number): string => {
    const n = byId.get(id) as ProfileNode;
    if (n.callFrame.url || n.callFrame.functionName.startsWith('(')) return label(n);
    for (let at = parent.get(id); at !== undefined; at = parent.get(at)) {
      const p = byId.get(at) as ProfileNode;
      if (p.callFrame.url) return `${label(n)} < ${label(p)}`;
    }
    return label(n);
  };
  const us = new Map<string, number>();
  const selfUs = new Map<string, { part: string; us: number }>();
  profile.samples.forEach((id, i) => {
    const part = partOfNode(id);
    const dt = profile.timeDeltas[i] ?? 0;
    us.set(part, (us.get(part) ?? 0) + dt);
    if (part === 'idle' || part === 'profiler') return;
    const name = describe(id);
    const entry = selfUs.get(name) ?? { part, us: 0 };
    entry.us += dt;
    selfUs.set(name, entry);
  });
  // The profiler's own work (collecting and serialising the profile) is not the agent's.
  us.delete('idle');
  us.delete('profiler');
  const total = [...us.values()].reduce((a, v) => a + v, 0);
  return {
    parts: [...us].map(([part, v]) => ({ part, share: v / total })).sort((a, b) => b.share - a.share),
    functions: [...selfUs]
      .map(([name, e]) => ({ name, part: e.part, share: e.us / total }))
      .sort((a, b) => b.share - a.share)
      .slice(0, 12),
    sampledMs: total / 1000,
  };
}

/** Starts V8's sampling profiler on this process; the returned function stops it and sums up. */
export async function startProfile(intervalUs = 500): Promise<() => Promise<ProfileShares>> {
  const session = new Session();
  session.connect();
  await session.post('Profiler.enable');
  await session.post('Profiler.setSamplingInterval', { interval: intervalUs });
  await session.post('Profiler.start');
  return async () => {
    const { profile } = (await session.post('Profiler.stop')) as { profile: Profile };
    session.disconnect();
    // QBENCH_PROFILE_OUT=<dir>: the raw profile too, for Chrome DevTools or a closer look.
    const out = process.env.QBENCH_PROFILE_OUT;
    if (out) writeFileSync(join(out, `qbench-${process.pid}-${Date.now()}.cpuprofile`), JSON.stringify(profile));
    return summarizeProfile(profile);
  };
}
