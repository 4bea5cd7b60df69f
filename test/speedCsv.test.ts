import { describe, expect, it } from 'vitest';
import { parseSpeedCsv, speedCsvError } from '../src/acquisition/speedCsv.ts';
import { ERROR_CODES } from '../src/errors.ts';

describe('parseSpeedCsv', () => {
  it('reads time_s,rpm rows as series points of confidence 1', () => {
    const r = parseSpeedCsv('time_s,rpm\n0,1200\n0.5,1250.5\n1,1.3e3\n', 'run.csv');
    expect(r.problems).toEqual([]);
    expect(r.points).toEqual([
      { tS: 0, rpm: 1200, confidence: 1, source: 'series' },
      { tS: 0.5, rpm: 1250.5, confidence: 1, source: 'series' },
      { tS: 1, rpm: 1300, confidence: 1, source: 'series' },
    ]);
  });

  it('columns in either order, extra columns ignored, CRLF, comments, blank lines, BOM', () => {
    const text = '\uFEFF# exported by the plant historian\r\nRPM, note ,Time_S\r\n\r\n1200,start,0\r\n# pause\r\n1300,,2\r\n';
    const r = parseSpeedCsv(text, 'x.csv');
    expect(r.problems).toEqual([]);
    expect(r.points.map((p) => [p.tS, p.rpm])).toEqual([
      [0, 1200],
      [2, 1300],
    ]);
  });

  it('reports non-finite values and non-increasing times with their line numbers, keeping good rows', () => {
    const text = ['time_s,rpm', '0,1200', '1,NaN', '2,', 'x,1300', '3,Infinity', '3,1400', '3,1500', '2.5,1600', '4,-1', '5,0x10', '6,1700'].join('\n');
    const r = parseSpeedCsv(text, 'bad.csv');
    expect(r.points.map((p) => p.tS)).toEqual([0, 3, 6]);
    expect(r.problems.map((p) => p.line)).toEqual([3, 4, 5, 6, 8, 9, 10, 11]);
    expect(r.problems[0].message).toMatch(/rpm must be a finite decimal number, got 'NaN'/);
    expect(r.problems[1].message).toMatch(/rpm must be a finite decimal number, got ''/);
    expect(r.problems[2].message).toMatch(/time_s must be a finite decimal number, got 'x'/);
    expect(r.problems[4].message).toMatch(/time_s must increase, got 3 after 3/);
    expect(r.problems[5].message).toMatch(/time_s must increase, got 2.5 after 3/);
    expect(r.problems[6].message).toMatch(/rpm must be from 0 to 1000000, got '-1'/);
  });

  it('missing column in the header', () => {
    const r = parseSpeedCsv('# c\ntime,rpm\n0,1\n', 's.csv');
    expect(r.points).toEqual([]);
    expect(r.problems).toEqual([{ line: 2, message: 'header must name columns time_s and rpm; missing time_s in \'time,rpm\'' }]);
  });

  it('short row', () => {
    const r = parseSpeedCsv('time_s,x,rpm\n0,1\n', 's.csv');
    expect(r.problems[0]).toMatchObject({ line: 2 });
    expect(r.problems[0].message).toMatch(/at least 3 columns, got 2/);
  });

  it('empty file and header only', () => {
    expect(parseSpeedCsv('', 'e.csv').problems).toEqual([{ line: 1, message: 'e.csv holds no header line (expected "time_s,rpm")' }]);
    expect(parseSpeedCsv('time_s,rpm\n', 'h.csv').problems[0].message).toMatch(/header but no speed rows/);
  });

  it('speedCsvError carries QB_E_SPEED_CSV and lists every problem with source and line', () => {
    const r = parseSpeedCsv('time_s,rpm\n1,a\n2,5\n2,6\n', 'run.csv');
    const err = speedCsvError(r.problems, 'run.csv');
    expect(err.code).toBe('QB_E_SPEED_CSV');
    expect(ERROR_CODES.QB_E_SPEED_CSV.meaning).toMatch(/speed series/);
    expect(err.message).toContain("run.csv:2: rpm must be a finite decimal number, got 'a'");
    expect(err.message).toContain('run.csv:4: time_s must increase, got 2 after 2');
  });
});
