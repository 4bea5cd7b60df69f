// Start-up benchmark: `qband check` on the example map against a bare `node -e 0`, run in turn
// (A B A B ...) in the same run so a drift in the machine's speed moves both, and the ratio taken
// pair by pair. Wall time of the whole process, from spawn to exit. The target (issue 10) is a
// median ratio of at most 2.5. Options: --runs N (default 30), --warmup N (default 3).
// Run it after `npm run build` (npm install does that): it times the compiled program in dist/.
import { spawnSync } from 'node:child_process';
import { existsSync } from 'node:fs';
import { fileURLToPath } from 'node:url';

const root = fileURLToPath(new URL('..', import.meta.url));
const args = process.argv.slice(2);
const USAGE = `Usage: npm run bench:startup [-- options]

Start-up: \`qband check\` on the example map against a bare \`node -e 0\`, run in turn (A B A B ...)
so that a drift in the machine's speed moves both; wall time of the whole process, spawn to exit,
and the median ratio pair by pair (target at most 2.5). Times the compiled program in dist/
(\`npm run build\`, which npm install runs).

Options:
  --runs <n>      timed pairs (default 30)
  --warmup <n>    pairs before them, not timed (default 3)
  -h, --help      this text
`;
if (args.includes('--help') || args.includes('-h')) {
  process.stdout.write(USAGE);
  process.exit(0);
}
for (let i = 0; i < args.length; i += 2) {
  const value = Number(args[i + 1]);
  if (!['--runs', '--warmup'].includes(args[i]) || !Number.isInteger(value) || value < (args[i] === '--runs' ? 1 : 0)) {
    process.stderr.write(`not an option this bench takes, or not a whole number after it: ${args.slice(i, i + 2).join(' ')}\n\n${USAGE}`);
    process.exit(2);
  }
}
const option = (name, fallback) => {
  const i = args.indexOf(name);
  return i >= 0 ? Number(args[i + 1]) : fallback;
};
const runs = option('--runs', 30);
const warmup = option('--warmup', 3);

if (!existsSync(new URL('../dist/cli/main.js', import.meta.url))) {
  console.error('bench:startup: no dist/; run `npm run build` first');
  process.exit(1);
}

const commandA = [process.execPath, 'bin/qband.mjs', 'check', 'config/example-map.yaml'];
const commandB = [process.execPath, '-e', '0'];

function timeOnce([cmd, ...rest]) {
  const start = process.hrtime.bigint();
  const r = spawnSync(cmd, rest, { cwd: root, stdio: ['ignore', 'ignore', 'inherit'] });
  const s = Number(process.hrtime.bigint() - start) / 1e9;
  if (r.status !== 0) throw new Error(`${rest.join(' ')} exited ${r.status}`);
  return s;
}

const median = (xs) => {
  const s = [...xs].sort((a, b) => a - b);
  const m = s.length >> 1;
  return s.length % 2 ? s[m] : (s[m - 1] + s[m]) / 2;
};

for (let i = 0; i < warmup; i++) {
  timeOnce(commandA);
  timeOnce(commandB);
}
const a = [];
const b = [];
const ratio = [];
for (let i = 0; i < runs; i++) {
  const ta = timeOnce(commandA);
  const tb = timeOnce(commandB);
  a.push(ta);
  b.push(tb);
  ratio.push(ta / tb);
}
const row = (name, xs, unit) =>
  `${name.padEnd(34)} ${[Math.min(...xs), median(xs), Math.max(...xs)].map((x) => x.toFixed(unit === 's' ? 3 : 2).padStart(8)).join('')}`;
console.log(`start-up, ${runs} pairs after ${warmup} warm-up pairs (wall time, spawn to exit)`);
console.log(`${''.padEnd(34)} ${'min'.padStart(8)}${'median'.padStart(8)}${'max'.padStart(8)}`);
console.log(row('A qband check example-map.yaml, s', a, 's'));
console.log(row('B node -e 0, s', b, 's'));
console.log(row('A/B, pair by pair', ratio, 'x'));
console.log(`median ratio ${median(ratio).toFixed(2)} (target: at most 2.5)`);
