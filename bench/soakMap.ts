/**
 * The soak's map: one fan, speed from a topic (600 to 1800 rpm), 1X and a 7-blade pass, a housing
 * mode at 20.5 Hz and a duct panel at 140 Hz, `channels` sensors. `npm run soak` runs the agent
 * on it; the transient capture tests take its asset so that what they bound is what the soak
 * measures.
 */
export function soakMap(prefix: string, url: string, channels: number): string {
  const sensors = Array.from({ length: channels }, (_, i) => `      - { id: s${i}, channel: ${i}, units: g }`).join('\n');
  return `site: soak
broker: { url: "${url}", topic_prefix: ${prefix} }
agent: { state_every_s: 1 }
assets:
  - id: fan-1
    procedure: "Soak run procedure (fictional)"
    speed: { source: topic, topic: ${prefix}/fan-1/speed, range_rpm: [600, 1800] }
    orders:
      - { id: 1x, multiple: 1 }
      - { id: blade-pass, blades: 7 }
    sensors:
${sensors}
    components:
      - { id: housing, fn_hz: 20.5, q: 10, orders: [1x] }
      - { id: duct-panel, fn_hz: 140, q: 20 }
    alarm: { on_delay_s: 5, off_delay_s: 5, deadband_pct: 1, priority: medium }
`;
}
