/**
 * The odex ODE solver (a general-purpose Gragg-Bulirsch-Stoer integrator from the registry), the
 * independent reference for the SDOF checks. odex ships its TypeScript source, which does not
 * pass this project's strict settings, so its compiled build is loaded and only the part the
 * tests use is typed here.
 */
import { createRequire } from 'node:module';

export type OdexOutput = (n: number, tOld: number, t: number, y: number[], dense?: (i: number, t: number) => number) => boolean | void;

export interface OdexSolver {
  absoluteTolerance: number;
  relativeTolerance: number;
  maxSteps: number;
  denseOutput: boolean;
  solve(f: (t: number, y: number[]) => number[], t0: number, y0: number[], tEnd: number, out?: OdexOutput): { y: number[]; outcome: number };
  grid(dt: number, out: (t: number, y: number[]) => boolean | void): OdexOutput;
}

export const { Solver } = createRequire(import.meta.url)('odex') as { Solver: new (n: number) => OdexSolver };
