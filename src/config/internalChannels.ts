/**
 * Sensors fed only over MQTT need no recording channel: the live agent finds their sample
 * blocks by topic. The engine still keys every signal by a channel number, so such a sensor is
 * given an internal one during normalisation, above every channel the map binds (sensors and
 * tach), in the order the sensors are written; `liveOnly` marks it. Commands that read a
 * recording (replay, simulate) refuse those sensors by name (see recordingChannelProblem).
 */
import type { SensorConfig, SpeedConfig } from './types.ts';

/** A sensor as read from the map before normalisation: its channel may be missing. */
export type SensorDraft = Omit<SensorConfig, 'channel'> & { channel?: number };

export function assignInternalChannels(drafts: readonly SensorDraft[], speed: SpeedConfig | undefined): SensorConfig[] {
  const bound = drafts.flatMap((s) => (s.channel === undefined ? [] : [s.channel]));
  if (speed?.source === 'tach' && speed.channel !== undefined) bound.push(speed.channel);
  let next = Math.max(-1, ...bound) + 1;
  return drafts.map((s) => (s.channel === undefined ? { ...s, channel: next++, liveOnly: true } : { ...s, channel: s.channel }));
}

/**
 * Null when every sensor of the asset is bound to a recording channel; otherwise a message
 * naming each one that is not, for a command that reads a recording.
 */
export function recordingChannelProblem(asset: { id: string; sensors: readonly SensorConfig[] }, command: string): string | null {
  const live = asset.sensors.filter((s) => s.liveOnly).map((s) => `'${s.id}'`);
  if (live.length === 0) return null;
  const which = live.length === 1 ? `sensor ${live[0]} has` : `sensors ${live.join(', ')} have`;
  return `${command}: ${which} no recording channel in asset ${asset.id} (fed over MQTT only); give ${live.length === 1 ? 'it' : 'each'} a \`channel:\` in the map to use a recording`;
}
