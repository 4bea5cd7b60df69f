/**
 * One problem found in an asset map, located by its path in the map and its line and column in
 * the file, and the log that collects every problem of one validation pass.
 */
import type { LineCounter } from 'yaml';
import type { ErrorCode } from '../errors.ts';
import { printable } from '../text/printable.ts';

export interface ConfigProblem {
  code: ErrorCode;
  /** Where in the map, e.g. `assets[0].components[1].q`; empty for the document as a whole. */
  path: string;
  /** 1-based line and column of the offending key or value (of the enclosing mapping when a key is missing). */
  line: number;
  col: number;
  /** What the map must hold there, e.g. `a number >= 0.5`. */
  expected: string;
  /** What it holds, quoted from the file (`nothing` when absent). */
  found: string;
  /** `assets[0].components[1].q: must be a number >= 0.5, got 0 (line 31, col 12)` */
  message: string;
}

export interface ProblemInput {
  code: ErrorCode;
  path: string;
  /** Character offset in the source; the start of the document when unknown. */
  offset: number | undefined;
  expected: string;
  found: string;
  /** The sentence after the path; defaults to `must be <expected>, got <found>`. */
  detail?: string;
}

export class ProblemLog {
  /** Problems (and warnings) kept with their text; the rest are only counted. */
  static readonly MAX_LISTED = 100;
  readonly problems: ConfigProblem[] = [];
  readonly warnings: ConfigProblem[] = [];
  private moreProblems = 0;
  private moreWarnings = 0;

  constructor(private readonly lineCounter: LineCounter) {}

  error(p: ProblemInput): void {
    if (this.problems.length < ProblemLog.MAX_LISTED) this.problems.push(this.locate(p));
    else this.moreProblems++;
  }

  warn(p: ProblemInput): void {
    if (this.warnings.length < ProblemLog.MAX_LISTED) this.warnings.push(this.locate(p));
    else this.moreWarnings++;
  }

  /** Line and column of a source offset (1-based). */
  position(offset: number | undefined): { line: number; col: number } {
    return offset === undefined ? { line: 1, col: 1 } : this.lineCounter.linePos(offset);
  }

  /** Problems and warnings in the order they appear in the file. */
  sorted(): { problems: ConfigProblem[]; warnings: ConfigProblem[]; moreProblems: number; moreWarnings: number } {
    const byPlace = (a: ConfigProblem, b: ConfigProblem) => a.line - b.line || a.col - b.col;
    return {
      problems: [...this.problems].sort(byPlace),
      warnings: [...this.warnings].sort(byPlace),
      moreProblems: this.moreProblems,
      moreWarnings: this.moreWarnings,
    };
  }

  private locate(p: ProblemInput): ConfigProblem {
    const { line, col } = this.position(p.offset);
    // Values are quoted printable where they are put in; this is the net for any that were not.
    const path = printable(p.path, 200);
    const found = printable(p.found, 200);
    const detail = printable(p.detail ?? `must be ${p.expected}, got ${found}`, 600);
    const where = path === '' ? '' : `${path}: `;
    return {
      code: p.code,
      path,
      line,
      col,
      expected: printable(p.expected, 600),
      found,
      message: `${where}${detail} (line ${line}, col ${col})`,
    };
  }
}
