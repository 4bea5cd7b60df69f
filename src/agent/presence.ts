/**
 * The agent's retained presence message (`<prefix>/agent/<client id>/status`): online or
 * offline, the map in force and its last configuration error, and the advisory notice.
 */
import { isoTime } from '../advisory/messages.ts';
import type { SiteMap } from '../config/types.ts';

export interface PresenceFacts {
  clientId: string;
  site: string;
  mapPath: string;
  sha256: string;
  assets: string[];
  configError: unknown;
  nowMs: number;
}

export function presenceMessage(state: 'online' | 'offline', f: PresenceFacts) {
  return {
    state,
    client_id: f.clientId,
    site: f.site,
    map: { path: f.mapPath, sha256: f.sha256, assets: f.assets },
    config_error: f.configError,
    time: isoTime(f.nowMs / 1000),
    notice: 'qband advises only; it never stops a machine.',
  };
}

/** Whether two maps set the live agent the same way (else every asset's runtime is rebuilt). */
export function sameAgentSettings(a: SiteMap, b: SiteMap): boolean {
  return JSON.stringify(a.agent) === JSON.stringify(b.agent);
}
