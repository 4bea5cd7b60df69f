// The build: compiles src/ to dist/ with the TypeScript compiler (tsconfig.build.json rewrites the
// sources' `.ts` import extensions to `.js`), after emptying dist/ so no file of a removed source
// survives. Run by `npm run build`, by `prepare` on `npm install` and `npm pack`, and once before
// the tests (test/support/buildOnce.ts).
import { spawnSync } from 'node:child_process';
import { rmSync } from 'node:fs';
import { createRequire } from 'node:module';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';

const root = fileURLToPath(new URL('..', import.meta.url));
const require = createRequire(import.meta.url);
// The compiler's own command (its package exports no bin path): found beside its package.json.
const tsc = join(dirname(require.resolve('typescript/package.json')), 'bin', 'tsc');

rmSync(new URL('../dist', import.meta.url), { recursive: true, force: true });
const result = spawnSync(process.execPath, [tsc, '-p', 'tsconfig.build.json'], { cwd: root, stdio: 'inherit' });
if (result.status !== 0) {
  process.stderr.write('build: tsc failed\n');
  process.exit(result.status ?? 1);
}
