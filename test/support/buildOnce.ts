import { spawnSync } from 'node:child_process';
import { fileURLToPath } from 'node:url';

// Vitest global set-up: tests that start `bin/qband.mjs` run the compiled program, so the build
// runs once before any test and those tests always see the sources as they are now.
export default function buildOnce(): void {
  const root = fileURLToPath(new URL('../..', import.meta.url));
  const result = spawnSync(process.execPath, ['scripts/build.mjs'], { cwd: root, encoding: 'utf8' });
  if (result.status !== 0) throw new Error(`npm run build failed before the tests:\n${result.stdout}${result.stderr}`);
}
