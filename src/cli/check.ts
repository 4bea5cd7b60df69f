/**
 * `qband check <map> [--json]`: validates an asset map and prints, per asset, every component's
 * half-power band and every crossing of an order through it, with the separation margin the
 * amplification factor calls for and the margin the operating range leaves.
 */
import { wrapWords } from '../text/wrapWords.ts';
import type { AssetMapResult } from '../config/parseAssetMap.ts';
import type { ConfigProblem } from '../config/configProblem.ts';
import type { AssetConfig, SiteMap } from '../config/types.ts';
import { assetCrossings, type Crossing } from '../physics/crossings.ts';
import { displacementHalfPowerBand } from '../physics/halfPowerBand.ts';
import { printable } from '../text/printable.ts';
import { EXIT_CODES_HELP, EXIT_INVALID, EXIT_OK, type CliIo, type Command } from './io.ts';
import { problemCount, readMapForCommand, writeMapProblems } from './mapForCommand.ts';
import { readOptions } from './options.ts';
import { SEPARATION_MARGIN_BASIS } from '../physics/separationMargin.ts';
import { usageError } from './usage.ts';

export const BAND_DEFINITION =
  'band = velocity half-power band: the frequencies where the velocity response of the mode is at ' +
  'least 1/sqrt(2) of its peak, fn*(sqrt(1+zeta^2) -/+ zeta), exactly fn/Q wide with geometric centre fn ' +
  '(a measured band_hz is used as given); speed band = band*60/multiple';

export function checkHelp(): string {
  return `qband check: validate an asset map and show where each forcing order meets each
structural resonance.

Usage: qband check <map.yaml> [--json]

For every component it prints fn, Q, zeta and its band. The band is the velocity
half-power band: the frequencies where the component's velocity response is at least
1/sqrt(2) of its peak, fn*(sqrt(1+zeta^2) -/+ zeta). It is exactly fn/Q wide and its
geometric centre is fn. (The displacement half-power points sit slightly lower; fn*(1 -/+ zeta)
is only their first-order approximation.)

For every order that can excite a component it prints the crossing speed
(fn*60/multiple rpm), the speed band (band*60/multiple), whether the crossing lies inside
the operating range, the amplification factor (AF = Q), the separation margin that AF
calls for (none below AF 2.5; below the range 17*(1 - 1/(AF - 1.5)) % up to 16 %, above it
10 + 17*(1 - 1/(AF - 1.5)) % up to 26 %) and the margin the range actually leaves.
${wrapText(SEPARATION_MARGIN_BASIS, 88)}

Where a crossing's speed band reaches into the operating range, the report says so and points
to \`qband plan\`, which draws the interference diagram and gives skip bands for the drive.

Every problem in the map is reported at once, one per line on stderr, with its path,
line and column; past 100, the rest are counted (problems_not_listed in --json). Maps of
more than 1 MiB or 64 levels of nesting are not read. The map format is described in
docs/asset-map.md.

Options:
  --json     print the result as JSON on stdout (snake_case fields)
  -h, --help show this help

${EXIT_CODES_HELP}

Example:
  qband check config/example-map.yaml
  qband check config/example-map.yaml --json

qband advises only; it never stops a machine. Act under the site's procedures, local codes
and licensed practice.
`;
}

export const runCheck: Command = async (args, io) => {
  const parsed = readOptions(args, { json: { kind: 'flag' }, help: { kind: 'flag', short: 'h' } }, true);
  if (typeof parsed === 'string') return usage(io, parsed);
  if (parsed.values.help) {
    io.stdout.write(checkHelp());
    return EXIT_OK;
  }
  const json = parsed.values.json === true;
  const positional = parsed.positionals;
  if (positional.length !== 1) {
    return usage(io, positional.length === 0 ? 'missing <map.yaml>' : `one map at a time, got ${positional.length}`);
  }

  const result = await readMapForCommand(io, 'check', positional[0]);
  if (typeof result === 'number') return result;
  const name = printable(positional[0], 200);
  writeMapProblems(io, positional[0], result);

  if (json) io.stdout.write(`${JSON.stringify(toJson(name, result), null, 2)}\n`);
  if (!result.map) {
    const n = problemCount(result);
    io.stderr.write(`${name}: not valid, ${n} problem${n === 1 ? '' : 's'}\n`);
    return EXIT_INVALID;
  }
  if (!json) io.stdout.write(humanReport(name, result.map));
  return EXIT_OK;
};

function usage(io: CliIo, why: string): number {
  return usageError(io, 'check', why, 'qband check <map.yaml> [--json]');
}

// ---- JSON ----------------------------------------------------------------------------------

function toJson(name: string, result: AssetMapResult) {
  const problem = (p: ConfigProblem) => ({
    code: p.code,
    path: p.path,
    line: p.line,
    col: p.col,
    expected: p.expected,
    found: p.found,
    message: p.message,
  });
  return {
    map: name,
    valid: result.map !== null,
    site: result.map?.site ?? null,
    band_definition: BAND_DEFINITION,
    separation_margin_basis: SEPARATION_MARGIN_BASIS,
    assets: (result.map?.assets ?? []).map(assetJson),
    problems: result.problems.map(problem),
    warnings: result.warnings.map(problem),
    problems_not_listed: result.moreProblems,
    warnings_not_listed: result.moreWarnings,
  };
}

function assetJson(asset: AssetConfig) {
  return {
    id: asset.id,
    description: asset.description,
    procedure: asset.procedure,
    range_rpm: asset.speed.rangeRpm,
    orders: asset.orders.map((o) => ({ id: o.id, multiple: o.multiple, kind: o.kind, derivation: o.derivation })),
    components: asset.components.map((c) => ({
      id: c.id,
      fn_hz: c.fnHz,
      q: c.q,
      zeta: c.zeta,
      band_hz: c.bandHz,
      // For comparison only: the displacement response's half-power points (null where they
      // do not exist at this damping); qband's alarms use band_hz.
      displacement_band_hz: displacementHalfPowerBand(c.fnHz, c.zeta),
      damping_given: c.dampingGiven,
      orders: c.orderIds,
      sensors: c.sensorIds,
    })),
    crossings: assetCrossings(asset).map(crossingJson),
    // Where crossings reach into the operating range, the command that gives skip bands for the drive.
    plan_command: assetCrossings(asset).some((x) => x.bandOverlapsRange) ? `qband plan --map <map> --asset ${asset.id}` : null,
  };
}

/** One crossing as JSON: the same fields in `check` and `plan`. */
export function crossingJson(x: Crossing) {
  return {
    order: x.orderId,
    component: x.componentId,
    multiple: x.multiple,
    fn_hz: x.fnHz,
    speed_rpm: x.speedRpm,
    speed_band_rpm: x.speedBandRpm,
    position: x.position,
    inside_range: x.position === 'inside',
    band_overlaps_range: x.bandOverlapsRange,
    af: x.af,
    required_margin_pct: x.requiredMarginPct,
    actual_margin_pct: x.actualMarginPct,
    verdict: x.verdict,
  };
}

// ---- human report --------------------------------------------------------------------------

function humanReport(name: string, map: SiteMap): string {
  const n = map.assets.length;
  const out: string[] = [`${name}: valid asset map for site ${map.site} (${n} asset${n === 1 ? '' : 's'})`, ''];
  out.push(...wrapWords(BAND_DEFINITION.replace(/^band =/, 'Band:'), 92), '');
  for (const asset of map.assets) out.push(...assetLines(asset), '');
  out.push(...wrapWords(`SM: ${SEPARATION_MARGIN_BASIS}`, 92), '');
  out.push(
    'Advisory only: qband never stops a machine. Margins are screening figures; act under the',
    "site's procedures, local codes and licensed practice.",
  );
  return `${out.join('\n')}\n`;
}

function assetLines(asset: AssetConfig): string[] {
  const s = asset.speed;
  const source =
    s.source === 'tach'
      ? `tach on channel ${s.channel} (${s.pulsesPerRev} pulse${s.pulsesPerRev === 1 ? '' : 's'}/rev)`
      : s.source === 'spectrum'
        ? `1X in the spectrum of sensor ${s.sensor}`
        : `topic ${printable(s.topic ?? '', 200)}`;
  const lines = [
    `asset ${asset.id}${asset.description ? `: ${printable(asset.description, 200)}` : ''}`,
    `  operating range ${s.rangeRpm[0]}-${s.rangeRpm[1]} rpm; speed from ${source}`,
  ];
  if (asset.procedure) lines.push(`  procedure: ${printable(asset.procedure, 200)}`);
  lines.push('  orders');
  lines.push(
    ...table(
      ['id', 'multiple', 'derivation'],
      asset.orders.map((o) => [o.id, o.multiple.toFixed(4), o.derivation]),
      '    ',
    ),
  );
  lines.push('  components');
  lines.push(
    ...table(
      ['id', 'fn Hz', 'Q', 'zeta', 'band Hz', 'damping from'],
      asset.components.map((c) => [
        c.id,
        c.fnHz.toFixed(3),
        c.q.toFixed(2),
        c.zeta.toFixed(4),
        `${c.bandHz[0].toFixed(3)}-${c.bandHz[1].toFixed(3)}`,
        c.dampingGiven,
      ]),
      '    ',
    ),
  );
  const crossings = assetCrossings(asset);
  lines.push('  crossings');
  if (crossings.length === 0) lines.push('    none: no order can excite any component');
  else {
    lines.push(
      ...table(
        ['order', 'component', 'crossing rpm', 'speed band rpm', 'in range', 'AF', 'SM required', 'SM actual', 'verdict'],
        crossings.map(crossingRow),
        '    ',
      ),
    );
  }
  const inRange = crossings.filter((x) => x.bandOverlapsRange);
  if (inRange.length > 0) {
    lines.push(
      `  ${inRange.length} crossing${inRange.length === 1 ? '' : 's'} reach${inRange.length === 1 ? 'es' : ''} into the operating range: \`qband plan --map <map> --asset ${asset.id}\` draws the interference diagram and the skip bands for the drive`,
    );
  }
  return lines;
}

function crossingRow(x: Crossing): string[] {
  return [
    x.orderId,
    x.componentId,
    x.speedRpm.toFixed(1),
    `${x.speedBandRpm[0].toFixed(1)}-${x.speedBandRpm[1].toFixed(1)}`,
    x.position === 'inside' ? 'inside' : x.bandOverlapsRange ? `${x.position}, band overlaps` : x.position,
    x.af.toFixed(2),
    x.position === 'inside' ? '-' : `${x.requiredMarginPct.toFixed(2)} %`,
    x.position === 'inside' ? 'inside range' : `${x.actualMarginPct.toFixed(2)} %`,
    x.verdict,
  ];
}

function table(head: string[], rows: string[][], indent: string): string[] {
  const widths = head.map((h, i) => Math.max(h.length, ...rows.map((r) => r[i].length)));
  const line = (cells: string[]) => `${indent}${cells.map((c, i) => c.padEnd(widths[i])).join('  ')}`.trimEnd();
  return [line(head), ...rows.map(line)];
}

function wrapText(text: string, width: number): string {
  return wrapWords(text, width).join('\n');
}

