/**
 * The live bench's sample publisher: a separate process (forked by liveBench.ts) so that its CPU
 * is not charged to the agent. It plays a gateway: per 0.1 s period one speed record, then one
 * binary sample block per channel, each channel on its own topic.
 *
 *   flat   as fast as the agent takes them: at most `window` blocks ahead of what the bench
 *          process reports processed (credits over IPC), so no broker queue ever overflows.
 *   paced  each period published when its data time has come (wall clock = data time), with
 *          the wall time of every publish call sent back over IPC when asked.
 *
 * IPC in:  connect {url, protocolVersion} | run {plan} | credit {processed} | abort | quit
 * IPC out: connected | times {id, period, speedMs, blockMs[]} | done {id, published, cpuS, wallS, lateMaxMs}
 */
import mqtt, { type MqttClient } from 'mqtt';
import { BLOCK_S, benchTopics, blockPool, periodStartS, poolIndex, scheduleRpm, speedPayload, stampBlock, type SpeedSchedule } from './benchStream.ts';

export interface PublishPlan {
  /** Echoed in every reply, so a late reply of an aborted run is never taken for the next one. */
  id: number;
  mode: 'flat' | 'paced';
  prefix: string;
  channels: number;
  periods: number;
  /** Data time of the first sample, epoch s. */
  t0S: number;
  qos: 0 | 1;
  schedule: SpeedSchedule;
  /** flat: most blocks published ahead of those processed. */
  window: number;
  /** Most publishes awaiting their callback (PUBACK at QoS 1, written at QoS 0). */
  inflight: number;
  /** paced: send the wall time of every publish over IPC. */
  recordTimes: boolean;
}

export type ToPublisher =
  | { type: 'connect'; url: string; protocolVersion: 4 | 5 }
  | { type: 'run'; plan: PublishPlan }
  | { type: 'credit'; processed: number }
  | { type: 'abort' }
  | { type: 'quit' };

export type FromPublisher =
  | { type: 'connected' }
  | { type: 'times'; id: number; period: number; speedMs: number; blockMs: number[] }
  | { type: 'done'; id: number; published: number; cpuS: number; wallS: number; lateMaxMs: number }
  | { type: 'error'; message: string };

const wallMs = (): number => performance.timeOrigin + performance.now();
const send = (m: FromPublisher): void => void process.send?.(m);

let client: MqttClient | null = null;
let credit = 0;
let pump: () => void = () => undefined;
let abort: () => void = () => undefined;
const pool = blockPool();

function run(plan: PublishPlan): void {
  const c = client as MqttClient;
  const topics = benchTopics(plan.prefix, plan.channels);
  const perPeriod = plan.channels + 1;
  const total = plan.periods * perPeriod;
  let next = 0;
  /** Messages released for publishing (paced: periods whose time has come). */
  let released = plan.mode === 'flat' ? total : 0;
  let inflight = 0;
  let blocksSent = 0;
  let lateMaxMs = 0;
  let times: { speedMs: number; blockMs: number[] } | null = null;
  credit = 0;
  const cpu0 = process.cpuUsage();
  const wall0 = wallMs();

  let finished = false;
  const finish = (): void => {
    if (finished) return;
    finished = true;
    const u = process.cpuUsage(cpu0);
    pump = () => undefined;
    abort = () => undefined;
    send({ type: 'done', id: plan.id, published: blocksSent, cpuS: (u.user + u.system) / 1e6, wallS: (wallMs() - wall0) / 1000, lateMaxMs });
  };
  const published = (): void => {
    inflight--;
    if (next === total && inflight === 0) finish();
    else pump();
  };
  let pumping = false;
  pump = () => {
    // A QoS 0 publish may call back before publish() returns: never re-enter the loop.
    if (pumping) return;
    pumping = true;
    while (next < released && inflight < plan.inflight && (plan.mode === 'paced' || blocksSent - credit < plan.window)) {
      const period = Math.floor(next / perPeriod);
      const j = next % perPeriod;
      inflight++;
      next++;
      const startS = periodStartS(plan.t0S, period);
      const at = wallMs();
      if (j === 0) {
        const endS = periodStartS(plan.t0S, period + 1);
        if (plan.mode === 'paced') lateMaxMs = Math.max(lateMaxMs, at - endS * 1000);
        if (plan.recordTimes) times = { speedMs: at, blockMs: [] };
        c.publish(topics.speed, speedPayload(endS, scheduleRpm(plan.schedule, endS - plan.t0S)), { qos: plan.qos }, published);
      } else {
        const template = pool[poolIndex(period, j - 1)];
        const payload = Buffer.allocUnsafe(template.length);
        payload.set(template);
        stampBlock(payload, period, startS);
        if (times) times.blockMs.push(at);
        blocksSent++;
        c.publish(topics.samples[j - 1], payload, { qos: plan.qos }, published);
        if (times && j === plan.channels) {
          send({ type: 'times', id: plan.id, period, ...times });
          times = null;
        }
      }
    }
    pumping = false;
    if (next === total && inflight === 0) finish();
  };
  abort = () => {
    released = next;
    finish();
  };
  if (plan.mode === 'flat') {
    pump();
    return;
  }
  // Paced: period k is released when its data ends on the wall clock, t0 + (k + 1) x block.
  let period = 0;
  const release = (): void => {
    released = Math.min(total, (period + 1) * perPeriod);
    pump();
    period++;
    if (period < plan.periods && !finished) setTimeout(release, Math.max(0, periodStartS(plan.t0S, period + 1) * 1000 - wallMs()));
  };
  setTimeout(release, Math.max(0, (plan.t0S + BLOCK_S) * 1000 - wallMs()));
}

process.on('message', (m: ToPublisher) => {
  if (m.type === 'connect') {
    client = mqtt.connect(m.url, { protocolVersion: m.protocolVersion, clean: true, reconnectPeriod: 0, connectTimeout: 5000, clientId: `qbench-pub-${process.pid}` });
    client.once('connect', () => send({ type: 'connected' }));
    client.on('error', (err) => send({ type: 'error', message: err.message }));
  } else if (m.type === 'run') {
    run(m.plan);
  } else if (m.type === 'credit') {
    credit = m.processed;
    pump();
  } else if (m.type === 'abort') {
    abort();
  } else if (m.type === 'quit') {
    void client?.endAsync().finally(() => process.exit(0));
    if (!client) process.exit(0);
  }
});
// The bench went away: do not linger.
process.on('disconnect', () => process.exit(0));
