// The build: bundles src/ into dist/cli/ with esbuild, the command-line entry (main.js) and one
// chunk per lazily imported command or shared part (code splitting), so starting `qband check`
// reads a few files instead of the hundred-odd modules of src/. Packages stay external: they
// are the production dependencies installed beside the program (node_modules), among them the
// WebAssembly FFT, which loads its .wasm from its own folder. Types are checked by
// `npm run typecheck` (tsc), not here.
//
// Every file lands in dist/cli/, two levels below the package root, so the sources' paths
// relative to `import.meta.url` (`../../config/demo-map.yaml` in src/cli/demo.ts) hold in the
// build too. A source loaded by path at run time (a worker thread's script, say) must be added
// to `entryPoints` below.
//
// Run by `npm run build`, by `prepare` on `npm install` and `npm pack`, and once before the tests
// (test/support/buildOnce.ts).
import { rmSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { build } from 'esbuild';

const root = fileURLToPath(new URL('..', import.meta.url));

rmSync(new URL('../dist', import.meta.url), { recursive: true, force: true });
try {
  await build({
    absWorkingDir: root,
    entryPoints: ['src/cli/main.ts'],
    outdir: 'dist/cli',
    bundle: true,
    splitting: true,
    format: 'esm',
    platform: 'node',
    target: 'node20',
    packages: 'external',
    sourcemap: 'linked',
    chunkNames: '[name]-[hash]',
    logLevel: 'warning',
  });
} catch {
  // esbuild has printed the errors with file, line and column.
  process.stderr.write('build: esbuild failed\n');
  process.exit(1);
}
