import { expect } from 'vitest';
import { Decimator, type DecimatorOptions } from '../../src/manipulation/decimator.ts';
import { gaussianNoise } from './signals.ts';

/**
 * Feeds decimators with the WebAssembly stages and with the JavaScript stages (`kernel: false`)
 * the same noise, block by block in `sizes`, all the runs' decimators taking turns (the kernel's
 * work buffers are shared), a reset before the seventh block, and expects every output bit for
 * bit the same, and the same phase.
 */
export function expectKernelStagesMatchPlain(factors: number[], options: DecimatorOptions, sizes: number[], seed: number): void {
  const runs = factors.map((factor, r) => ({
    factor,
    seed: seed + 100 * r,
    kernel: new Decimator(factor, options),
    plain: new Decimator(factor, { ...options, kernel: false }),
  }));
  for (const [b, n] of sizes.entries()) {
    for (const run of runs) {
      const { factor, kernel, plain } = run;
      if (b === 6) {
        kernel.reset();
        plain.reset();
      }
      const x = gaussianNoise(n, 1, run.seed++);
      const a = new Float32Array(Math.ceil(n / factor));
      const c = new Float32Array(Math.ceil(n / factor));
      const ma = kernel.process(x, a);
      const mc = plain.process(x, c);
      expect(ma, `factor ${factor}, block ${b} of ${n}: outputs`).toBe(mc);
      expect(kernel.phase).toBe(plain.phase);
      for (let i = 0; i < mc; i++) {
        if (!Object.is(a[i], c[i])) expect.fail(`factor ${factor}, block ${b}, output ${i}: kernel ${a[i]}, JavaScript ${c[i]}`);
      }
    }
  }
}
