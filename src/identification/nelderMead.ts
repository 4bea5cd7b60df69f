/**
 * Downhill simplex minimisation of a function of a few parameters (the classic reflect,
 * expand, contract and shrink steps with the usual coefficients 1, 2, 1/2, 1/2). Enough for
 * the three nonlinear parameters of a mode fit; no derivatives needed.
 */
export interface SimplexResult {
  x: number[];
  value: number;
  evaluations: number;
}

export function nelderMead(
  f: (x: number[]) => number,
  start: number[],
  steps: number[],
  options: { maxEvaluations?: number; tolerance?: number } = {},
): SimplexResult {
  const maxEvaluations = options.maxEvaluations ?? 400;
  const tolerance = options.tolerance ?? 1e-9;
  const n = start.length;
  let evaluations = 0;
  const evaluate = (x: number[]): number => {
    evaluations++;
    const v = f(x);
    return Number.isFinite(v) ? v : Number.POSITIVE_INFINITY;
  };
  let simplex = [start.slice()];
  for (let i = 0; i < n; i++) {
    const x = start.slice();
    x[i] += steps[i];
    simplex.push(x);
  }
  let values = simplex.map(evaluate);
  while (evaluations < maxEvaluations) {
    const order = values.map((v, i) => i).sort((a, b) => values[a] - values[b]);
    simplex = order.map((i) => simplex[i]);
    values = order.map((i) => values[i]);
    const spread = Math.abs(values[n] - values[0]);
    if (spread <= tolerance * (Math.abs(values[0]) + tolerance)) break;
    const centroid = new Array<number>(n).fill(0);
    for (let i = 0; i < n; i++) for (let d = 0; d < n; d++) centroid[d] += simplex[i][d] / n;
    const along = (t: number): number[] => centroid.map((c, d) => c + t * (simplex[n][d] - c));
    const reflected = along(-1);
    const fr = evaluate(reflected);
    if (fr < values[0]) {
      const expanded = along(-2);
      const fe = evaluate(expanded);
      [simplex[n], values[n]] = fe < fr ? [expanded, fe] : [reflected, fr];
      continue;
    }
    if (fr < values[n - 1]) {
      [simplex[n], values[n]] = [reflected, fr];
      continue;
    }
    const contracted = fr < values[n] ? along(-0.5) : along(0.5);
    const fc = evaluate(contracted);
    if (fc < Math.min(fr, values[n])) {
      [simplex[n], values[n]] = [contracted, fc];
      continue;
    }
    for (let i = 1; i <= n; i++) {
      simplex[i] = simplex[i].map((v, d) => simplex[0][d] + 0.5 * (v - simplex[0][d]));
      values[i] = evaluate(simplex[i]);
    }
  }
  let best = 0;
  for (let i = 1; i < values.length; i++) if (values[i] < values[best]) best = i;
  return { x: simplex[best], value: values[best], evaluations };
}
