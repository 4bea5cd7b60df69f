/**
 * Structured logs: pino JSON lines with the same few fields everywhere (asset, sensor, stage,
 * code), or a readable rendering for people with `--pretty`. Tests pass their own destination
 * and read the lines back as JSON.
 */
import { pino, type DestinationStream, type Logger } from 'pino';

export type { Logger } from 'pino';

/** Where in the data path a log line comes from (the stages of src/). */
export type LogStage = 'config' | 'broker' | 'acquisition' | 'detection' | 'advisory' | 'agent';

export function createLogger(opts: { pretty?: boolean; level?: string; destination?: DestinationStream } = {}): Logger {
  const base = { level: opts.level ?? 'info', base: { app: 'qband' }, timestamp: pino.stdTimeFunctions.isoTime };
  if (opts.destination) return pino(base, opts.destination);
  if (opts.pretty) {
    return pino({ ...base, transport: { target: 'pino-pretty', options: { destination: 2, ignore: 'app,pid,hostname', translateTime: 'SYS:HH:MM:ss.l' } } });
  }
  return pino(base, pino.destination(2));
}

/**
 * At most one log line per key per `intervalMs` of wall time; the next line says how many
 * were held back. Drops of bad input can come thousands a second: the count is the news.
 */
export class RateLimitedLog {
  private readonly last = new Map<string, { atMs: number; held: number }>();
  constructor(private readonly intervalMs: number) {}

  /** Returns the number of lines held back since the last one, or null to stay quiet now. */
  admit(key: string, nowMs: number): number | null {
    const entry = this.last.get(key);
    if (entry && nowMs - entry.atMs < this.intervalMs) {
      entry.held++;
      return null;
    }
    const held = entry?.held ?? 0;
    this.last.set(key, { atMs: nowMs, held: 0 });
    return held;
  }
}
