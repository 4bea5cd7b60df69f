/** What the agent is built from: its options (from the command line) and its dependencies. */
import type { IClientOptions, MqttClient } from 'mqtt';
import type { Logger } from './logger.ts';
import type { WorkerSetting } from './workers/workerCount.ts';

export interface AgentOptions {
  mapPath: string;
  /** Overrides the map's broker.url. */
  brokerUrl?: string;
  /** MQTT protocol: 5 (default) or 4 (= 3.1.1). */
  protocolVersion?: 4 | 5;
  clientId?: string;
  /** Watch the map file and reload it on change (default true). */
  watchMap?: boolean;
  /** Wall-clock period of the freshness tick (default 1000 ms). */
  tickMs?: number;
  /** Extra connection options (credentials, TLS): never logged. */
  connectOptions?: Partial<IClientOptions>;
  /**
   * Directory of the durable journal (alarm events until the broker has them, and the state
   * that survives a restart). Null: nothing is kept across restarts.
   */
  stateDir?: string | null;
  /** Wall-clock period of state snapshots into the journal (default 1000 ms). */
  persistEveryMs?: number;
  /**
   * Worker threads for the asset runtimes: 0 (default here) runs them in the agent's thread,
   * `auto` follows workers/workerCount.ts (what `qband run` uses unless told).
   */
  workers?: WorkerSetting;
}

export interface AgentDeps {
  logger: Logger;
  /** Wall clock, ms since the epoch. */
  now?: () => number;
  connect?: (url: string, options: IClientOptions) => MqttClient;
}
