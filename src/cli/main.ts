/**
 * `qband <command>`: dispatches to the sub-commands. Each command module exports one `Command`.
 */
import { quote } from '../text/printable.ts';
import { reportFailure } from './failure.ts';
import { EXIT_CODES_HELP, EXIT_OK, EXIT_USAGE, processIo, type CliIo, type Command } from './io.ts';

interface CommandEntry {
  summary: string;
  load: () => Promise<Command>;
}

const COMMANDS: Record<string, CommandEntry> = Object.assign(Object.create(null) as Record<string, CommandEntry>, {
  check: {
    summary: 'validate an asset map and print bands, crossings and separation margins',
    load: async () => (await import('./check.ts')).runCheck,
  },
  demo: {
    summary: 'watch the live agent on a simulated machine for a minute (npm start)',
    load: async () => (await import('./demo.ts')).runDemoCommand,
  },
  identify: {
    summary: 'measure fn and Q of components from the run-ups and coast-downs in a recording',
    load: async () => (await import('./identify.ts')).runIdentify,
  },
  plan: {
    summary: 'draw the interference diagram and give the skip bands for each drive',
    load: async () => (await import('./plan.ts')).runPlan,
  },
  replay: {
    summary: 'run the dwell engine over a recording (WAV or CSV) and print JSON lines',
    load: async () => (await import('./replay.ts')).runReplay,
  },
  run: {
    summary: 'run the live agent against an MQTT broker (alarms, state, operator commands)',
    load: async () => (await import('./run.ts')).runRun,
  },
  simulate: {
    summary: 'synthesise a recording from an asset map and a speed profile',
    load: async () => (await import('./simulate.ts')).runSimulate,
  },
});

export function topLevelHelp(): string {
  const width = Math.max(...Object.keys(COMMANDS).map((c) => c.length));
  const lines = Object.entries(COMMANDS).map(([name, c]) => `  ${name.padEnd(width)}  ${c.summary}`);
  return `qband: watches variable-speed machines for forcing orders that dwell inside a structural
resonance band, and says so. It advises only; it never stops a machine.

Usage: qband <command> [options]

Commands:
${lines.join('\n')}

Run \`qband <command> --help\` for a command's options and examples.

${EXIT_CODES_HELP}
`;
}

export async function main(argv: string[], io: CliIo = processIo()): Promise<number> {
  const [name, ...rest] = argv;
  if (name === undefined) {
    io.stderr.write(`qband: no command given [QB_E_USAGE]\n\n${topLevelHelp()}`);
    return EXIT_USAGE;
  }
  if (name === '--help' || name === '-h' || name === 'help') {
    io.stdout.write(topLevelHelp());
    return EXIT_OK;
  }
  if (name === '--version') {
    io.stdout.write('qband 0.1.0\n');
    return EXIT_OK;
  }
  const entry = COMMANDS[name];
  if (!entry) {
    io.stderr.write(`qband: unknown command ${quote(name)} [QB_E_USAGE]\n\n${topLevelHelp()}`);
    return EXIT_USAGE;
  }
  // The net under every command: whatever escapes it is reported as one line with its code,
  // never as a stack trace.
  try {
    const command = await entry.load();
    return await command(rest, io);
  } catch (err) {
    return reportFailure(io, name, err);
  }
}
