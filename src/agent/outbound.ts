/** One message the agent is to publish, as the asset runtime and its parts return it. */
export interface Outbound {
  topic: string;
  payload: string;
  qos: 0 | 1;
  retain: boolean;
  /** What it is, for logs and the journal; alarm events carry their id. */
  kind: 'alarm' | 'lifecycle' | 'state' | 'rejected' | 'transient' | 'identified';
  id?: string;
}
