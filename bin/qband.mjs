#!/usr/bin/env node
// Entry point: runs the compiled JavaScript in dist/ (built by `npm run build`, which `npm install`
// runs through `prepare` and `npm pack` runs before packing). No compiler is loaded at run time.
import { existsSync } from 'node:fs';

const mainUrl = new URL('../dist/cli/main.js', import.meta.url);
if (!existsSync(mainUrl)) {
  process.stderr.write('qband: the compiled program (dist/) is missing; run `npm run build` in the checkout first.\n');
  process.exit(1);
}
const { main } = await import(mainUrl.href);
process.exitCode = await main(process.argv.slice(2));
