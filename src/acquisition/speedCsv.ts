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
import { parseDecimal } from '../text/parseDecimal.ts';
import { printable, quote } from '../text/printable.ts';

export interface SpeedCsvProblem {
  /** 1-based line number in the file. */
  line: number;
  message: string;
}

export interface SpeedCsv {
  points: SpeedPoint[];
  /** The first MAX_LISTED_PROBLEMS problems. */
  problems: SpeedCsvProblem[];
  /** Problems found beyond those listed. */
  moreProblems: number;
}

/** Problems listed with their text; the rest are counted. */
export const MAX_LISTED_PROBLEMS = 100;
/** The largest speed series read: a million rows of time and rpm. */
export const MAX_SPEED_CSV_BYTES = 32 * 2 ** 20;
/** Shaft speeds above this are not a machine qband watches (the map's range_rpm bound). */
const MAX_RPM = 1_000_000;

function cell(raw: string | undefined): string {
  const t = (raw ?? '').trim();
  return t.length >= 2 && t.startsWith('"') && t.endsWith('"') ? t.slice(1, -1).trim() : t;
}

export function parseSpeedCsv(text: string, sourceName: string): SpeedCsv {
  const points: SpeedPoint[] = [];
  const problems: SpeedCsvProblem[] = [];
  let moreProblems = 0;
  const report = (p: SpeedCsvProblem) => {
    if (problems.length < MAX_LISTED_PROBLEMS) problems.push(p);
    else moreProblems++;
  };
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
        report({
          line: lineNo,
          message: `header must name columns time_s and rpm; missing ${missing.join(' and ')} in ${quote(trimmed)}`,
        });
        return { points, problems, moreProblems };
      }
      continue;
    }
    const need = Math.max(timeCol, rpmCol) + 1;
    if (cells.length < need) {
      report({ line: lineNo, message: `expected at least ${need} columns, got ${cells.length}: ${quote(trimmed)}` });
      continue;
    }
    const timeText = cells[timeCol];
    const rpmText = cells[rpmCol];
    const tS = parseDecimal(timeText);
    const rpm = parseDecimal(rpmText);
    const bad: string[] = [];
    if (!Number.isFinite(tS)) bad.push(`time_s must be a finite decimal number, got ${quote(timeText)}`);
    if (!Number.isFinite(rpm)) bad.push(`rpm must be a finite decimal number, got ${quote(rpmText)}`);
    else if (rpm < 0 || rpm > MAX_RPM) bad.push(`rpm must be from 0 to ${MAX_RPM}, got ${quote(rpmText)}`);
    if (bad.length === 0 && tS <= lastTimeS) {
      bad.push(`time_s must increase, got ${tS} after ${lastTimeS}`);
    }
    if (bad.length > 0) {
      report({ line: lineNo, message: bad.join('; ') });
      continue;
    }
    lastTimeS = tS;
    points.push({ tS, rpm, confidence: 1, source: 'series' });
  }
  const name = printable(sourceName, 200);
  if (!headerSeen) report({ line: 1, message: `${name} holds no header line (expected "time_s,rpm")` });
  else if (points.length === 0 && problems.length === 0) {
    report({ line: lines.length, message: `${name} holds a header but no speed rows` });
  }
  return { points, problems, moreProblems };
}

/** One QB_E_SPEED_CSV error listing every problem as `source:line: message`. */
export function speedCsvError(problems: SpeedCsvProblem[], sourceName: string): QbandError {
  const name = printable(sourceName, 200);
  const listed = problems.map((p) => `${name}:${p.line}: ${p.message}`).join('\n');
  return new QbandError('QB_E_SPEED_CSV', `speed series ${name} has ${problems.length} problem(s):\n${listed}`);
}
