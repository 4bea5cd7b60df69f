// The build: bundles src/ into dist/cli/ with esbuild, the command-line entry (main.js) and one
// chunk per lazily imported command or shared part (code splitting), so starting `qband check`
// reads a few files instead of the hundred-odd modules of src/. Packages stay external: they
// are the production dependencies installed beside the program (node_modules), among them the
// WebAssembly FFT, which loads its .wasm from its own folder. Types are checked by
// `npm run typecheck` (tsc), not here.
//
// Every file lands in dist/cli/, two levels below the package root, so the sources' paths
// relative to `import.meta.url` (`../../config/demo-map.yaml` in src/cli/demo.ts) hold in the
// build too. A source loaded by path at run time must be an entry of its own below: the runtime
// worker thread's script (src/agent/workers/runtimeWorker.ts) lands beside the chunks as
// dist/cli/runtimeWorker.js, where src/agent/workers/workerScript.ts looks for it.
//
// Run by `npm run build`, by `prepare` on `npm install` and `npm pack`, and once before the tests
// (test/support/buildOnce.ts). A build whose inputs (src/, this script, package.json) are
// unchanged since the last one is skipped (dist/.build-stamp holds their digest; `--force`
// builds anyway): so `npm pack` inside the test run does not rebuild dist/ under the feet of
// the process tests running beside it.
import { createHash } from 'node:crypto';
import { cpSync, existsSync, readdirSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { join, relative } from 'node:path';
import { fileURLToPath } from 'node:url';
import { build } from 'esbuild';

const root = fileURLToPath(new URL('..', import.meta.url));
const stampFile = join(root, 'dist', '.build-stamp');

function inputsDigest() {
  const files = [join(root, 'package.json'), fileURLToPath(import.meta.url)];
  const walk = (dir) => {
    for (const e of readdirSync(dir, { withFileTypes: true })) {
      const p = join(dir, e.name);
      if (e.isDirectory()) walk(p);
      else files.push(p);
    }
  };
  walk(join(root, 'src'));
  const hash = createHash('sha256');
  for (const f of files.sort()) hash.update(relative(root, f)).update('\0').update(readFileSync(f)).update('\0');
  return hash.digest('hex');
}

const digest = inputsDigest();
if (!process.argv.includes('--force') && existsSync(stampFile) && readFileSync(stampFile, 'utf8') === digest) {
  process.stdout.write('build: dist/ is up to date with src/\n');
  process.exit(0);
}
rmSync(new URL('../dist', import.meta.url), { recursive: true, force: true });
try {
  await build({
    absWorkingDir: root,
    entryPoints: [
      { in: 'src/cli/main.ts', out: 'main' },
      { in: 'src/agent/workers/runtimeWorker.ts', out: 'runtimeWorker' },
    ],
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
// Files a module reads at run time beside itself (`new URL('./static/...', import.meta.url)`):
// every chunk lands in dist/cli/, so they are copied there.
cpSync(join(root, 'src', 'page', 'static'), join(root, 'dist', 'cli', 'static'), { recursive: true });
writeFileSync(stampFile, digest);
