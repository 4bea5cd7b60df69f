/**
 * A known speed series from a CSV file: header with `time_s` and `rpm` (either order, other
 * columns ignored, names case-insensitive), then one row per point. Blank lines and lines
 * starting with `#` are skipped anywhere. Every bad row is reported with its 1-based line
 * number and left out; the caller decides whether any problem is fatal (QB_E_SPEED_CSV).
 *
 * Each point gets confidence 1 and source 'series': the file is taken as measured truth.
 */
import { QbandError } from '../errors.ts';
import type { SpeedPoint } from '../manipulation/speedPoint.ts';

export interface SpeedCsvProblem {
  /** 1-based line number in the file. */
  line: number;
  message: string;
}

export interface SpeedCsv {
  points: SpeedPoint[];
  problems: SpeedCsvProblem[];
}

/** A plain decimal number with optional exponent: no hex, no 'Infinity', no empty string. */
const NUMBER = /^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$/;

function cell(raw: string | undefined): string {
  const t = (raw ?? '').trim();
  return t.length >= 2 && t.startsWith('"') && t.endsWith('"') ? t.slice(1, -1).trim() : t;
}

function parseNumber(text: string): number {
  return NUMBER.test(text) ? Number(text) : Number.NaN;
}

export function parseSpeedCsv(text: string, sourceName: string): SpeedCsv {
  const points: SpeedPoint[] = [];
  const problems: SpeedCsvProblem[] = [];
  const lines = text.split(/\r\n|\n|\r/);
  let timeCol = -1;
  let rpmCol = -1;
  let headerSeen = false;
  let lastTimeS = Number.NEGATIVE_INFINITY;
  for (let i = 0; i < lines.length; i++) {
    const lineNo = i + 1;
    const raw = i === 0 ? lines[i].replace(/^\uFEFF/, '') : lines[i];
    const trimmed = raw.trim();
    if (trimmed === '' || trimmed.startsWith('#')) continue;
    const cells = raw.split(',').map(cell);
    if (!headerSeen) {
      headerSeen = true;
      const names = cells.map((c) => c.toLowerCase());
      timeCol = names.indexOf('time_s');
      rpmCol = names.indexOf('rpm');
      const missing = [timeCol < 0 ? 'time_s' : '', rpmCol < 0 ? 'rpm' : ''].filter((m) => m !== '');
      if (missing.length > 0) {
        problems.push({
          line: lineNo,
          message: `header must name columns time_s and rpm; missing ${missing.join(' and ')} in "${trimmed}"`,
        });
        return { points, problems };
      }
      continue;
    }
    const need = Math.max(timeCol, rpmCol) + 1;
    if (cells.length < need) {
      problems.push({ line: lineNo, message: `expected at least ${need} columns, got ${cells.length}: "${trimmed}"` });
      continue;
    }
    const timeText = cells[timeCol];
    const rpmText = cells[rpmCol];
    const tS = parseNumber(timeText);
    const rpm = parseNumber(rpmText);
    const bad: string[] = [];
    if (!Number.isFinite(tS)) bad.push(`time_s must be a finite number, got "${timeText}"`);
    if (!Number.isFinite(rpm)) bad.push(`rpm must be a finite number, got "${rpmText}"`);
    else if (rpm < 0) bad.push(`rpm must be >= 0, got ${rpmText}`);
    if (bad.length === 0 && tS <= lastTimeS) {
      bad.push(`time_s must increase, got ${timeText} after ${lastTimeS}`);
    }
    if (bad.length > 0) {
      problems.push({ line: lineNo, message: bad.join('; ') });
      continue;
    }
    lastTimeS = tS;
    points.push({ tS, rpm, confidence: 1, source: 'series' });
  }
  if (!headerSeen) problems.push({ line: 1, message: `${sourceName} holds no header line (expected "time_s,rpm")` });
  else if (points.length === 0 && problems.length === 0) {
    problems.push({ line: lines.length, message: `${sourceName} holds a header but no speed rows` });
  }
  return { points, problems };
}

/** One QB_E_SPEED_CSV error listing every problem as `source:line: message`. */
export function speedCsvError(problems: SpeedCsvProblem[], sourceName: string): QbandError {
  const listed = problems.map((p) => `${sourceName}:${p.line}: ${p.message}`).join('\n');
  return new QbandError('QB_E_SPEED_CSV', `speed series ${sourceName} has ${problems.length} problem(s):\n${listed}`);
}
