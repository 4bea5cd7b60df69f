/**
 * `qband plan --map <map> [--asset id] [--json] [--svg <file>]`: per asset, the interference
 * diagram (as SVG) and the skip bands a drive should be given, in rpm and, where the map
 * describes the drive, in drive output frequency; warns when they leave too little of the
 * operating range or take in the normal operating point.
 */
import { writeFile } from 'node:fs/promises';
import { resolve } from 'node:path';
import { QbandError } from '../errors.ts';
import { assetPlan, skipBandDriveHz, type AssetPlan } from '../physics/assetPlan.ts';
import { PLAN_CAUTION, planFigure } from '../render/interferenceDiagram.ts';
import { printable } from '../text/printable.ts';
import { crossingJson } from './check.ts';
import { EXIT_CODES_HELP, EXIT_INVALID, EXIT_OK, type Command } from './io.ts';
import { pickAsset, readMapForCommand, writeMapProblems } from './mapForCommand.ts';
import { readOptions, stringOption } from './options.ts';
import { usageError } from './usage.ts';

const SYNOPSIS = 'qband plan --map <map.yaml> [--asset id] [--json] [--svg <file>]';

export const PLAN_HELP = `Usage: ${SYNOPSIS}

Draws each asset's interference diagram and gives the skip bands for its drive: the shaft
speeds the drive should not dwell in, ready to enter as the drive's skip (avoidance) bands.

  - every crossing of an order through a component's half-power band (as qband check
    lists them), with its speed band and whether the separation margin is met;
  - skip bands: each crossing's speed band that reaches into the operating range, widened on
    each side by the skip margin in percent of the crossing speed, merged where they touch.
    The margin is the map's drive.skip_margin_pct, else the alarm deadband plus the speed
    measurement's uncertainty (drive.speed_uncertainty_pct, else 0.1 % for a tach and 0.5 %
    for tachless or topic speed). The API separation margin stays a design check in
    qband check; it is not a skip-band width;
  - in drive output frequency too, where the map has drive.motor_poles (and slip_pct) or
    drive.hz_per_rpm: Hz = rpm x poles / (120 (1 - slip));
  - warnings (QB_E_PLAN_RANGE_USABLE, QB_E_PLAN_NORMAL_SKIPPED) when the bands leave less of
    the range usable than drive.min_usable_pct (default 50 %) or take in drive.normal_rpm.

Options:
  --map <file>    asset map (YAML)
  --asset <id>    one asset (default: every asset of the map)
  --json          print the plan as JSON on stdout (assets[].skip_bands_rpm: [[lo, hi], ...])
  --svg <file>    write the interference diagrams to this SVG file (plain, prints in black
                  and white; no fonts or scripts to load)
  -h, --help      this text

${EXIT_CODES_HELP}

Example:
  qband plan --map config/demo-map.yaml --svg out/plan.svg

${PLAN_CAUTION}
`;

export const runPlan: Command = async (args, io) => {
  const parsed = readOptions(args, { map: { kind: 'value' }, asset: { kind: 'value' }, json: { kind: 'flag' }, svg: { kind: 'value' }, help: { kind: 'flag', short: 'h' } }, false);
  if (typeof parsed === 'string') return usageError(io, 'plan', parsed, SYNOPSIS);
  if (parsed.values.help) {
    io.stdout.write(PLAN_HELP);
    return EXIT_OK;
  }
  const mapArg = stringOption(parsed, 'map');
  if (!mapArg) return usageError(io, 'plan', 'missing --map <map.yaml>', SYNOPSIS);
  const result = await readMapForCommand(io, 'plan', mapArg);
  if (typeof result === 'number') return result;
  writeMapProblems(io, mapArg, result);
  if (!result.map) {
    io.stderr.write(`qband plan: ${printable(mapArg, 200)} is not valid; see qband check [QB_E_CONFIG_INVALID]\n`);
    return EXIT_INVALID;
  }
  const map = result.map;
  const assetId = stringOption(parsed, 'asset');
  const assets = assetId === undefined ? map.assets : [pickAsset(map.assets, assetId)];
  const plans = assets.map(assetPlan);
  const svgArg = stringOption(parsed, 'svg');
  if (svgArg !== undefined) {
    try {
      await writeFile(resolve(io.cwd, svgArg), planFigure(map.site, plans));
    } catch (err) {
      throw new QbandError('QB_E_FILE_WRITE', `cannot write ${printable(svgArg, 200)}: ${(err as Error).message}`);
    }
  }
  for (const p of plans) for (const w of p.warnings) io.stderr.write(`qband plan: warning ${w.code} ${w.message}\n`);
  if (parsed.values.json === true) io.stdout.write(`${JSON.stringify(planJson(printable(mapArg, 200), map.site, plans), null, 2)}\n`);
  else io.stdout.write(planText(map.site, plans, svgArg));
  return EXIT_OK;
};

export function planJson(mapName: string, site: string, plans: AssetPlan[]) {
  return {
    map: mapName,
    site,
    assets: plans.map((p) => ({
      id: p.asset.id,
      range_rpm: p.asset.speed.rangeRpm,
      normal_rpm: p.asset.drive?.normalRpm ?? null,
      skip_margin_pct: p.marginPct,
      skip_margin_basis: p.marginBasis,
      skip_bands_rpm: p.skipBands.map((b): [number, number] => [b.loRpm, b.hiRpm]),
      skip_bands: p.skipBands.map((b) => ({ lo_rpm: b.loRpm, hi_rpm: b.hiRpm, drive_hz: skipBandDriveHz(p, b), crossings: b.crossings })),
      drive_hz_per_rpm: p.hzPerRpm,
      skip_bands_drive_hz: p.hzPerRpm === null ? null : p.skipBands.map((b) => skipBandDriveHz(p, b)),
      usable_range_pct: p.usablePct,
      crossings: p.crossings.map(crossingJson),
      warnings: p.warnings,
    })),
    caution: PLAN_CAUTION,
  };
}

function planText(site: string, plans: AssetPlan[], svg: string | undefined): string {
  const out: string[] = [`plan for site ${site}`, ''];
  for (const p of plans) {
    const [min, max] = p.asset.speed.rangeRpm;
    out.push(`asset ${p.asset.id}: operating range ${min}-${max} rpm${p.asset.drive?.normalRpm !== undefined ? `, normally ${p.asset.drive.normalRpm} rpm` : ''}`);
    out.push(`  skip margin: ${p.marginBasis}`);
    if (p.skipBands.length === 0) out.push('  skip bands: none: no crossing reaches into the operating range');
    else {
      out.push(`  skip bands (enter these on the drive)${p.hzPerRpm === null ? '; add drive.motor_poles or drive.hz_per_rpm to the map for drive frequencies' : `, drive ${p.hzPerRpm.toFixed(5)} Hz per rpm`}:`);
      for (const b of p.skipBands) {
        const hz = skipBandDriveHz(p, b);
        out.push(`    ${Math.floor(b.loRpm)}-${Math.ceil(b.hiRpm)} rpm${hz ? `   ${hz[0].toFixed(1)}-${hz[1].toFixed(1)} Hz` : ''}   (${b.crossings.join(', ')})`);
      }
    }
    out.push(`  usable: ${p.usablePct.toFixed(1)} % of the operating range`);
    for (const w of p.warnings) out.push(`  WARNING ${w.code}: ${w.message}`);
    out.push('');
  }
  if (svg !== undefined) out.push(`interference diagram${plans.length === 1 ? '' : 's'} written to ${printable(svg, 200)}`, '');
  out.push(PLAN_CAUTION);
  return `${out.join('\n')}\n`;
}
