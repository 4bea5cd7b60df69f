/**
 * The one reader of command lines: `--name value`, `--name=value`, flags, short aliases
 * (`-h`, `-o file`), positionals and `--` (everything after it is positional). A value option
 * takes the next argument whatever it looks like, so `--status-every -1` reaches the check of
 * the value (which says what is wrong with -1) instead of being taken for an option. Every
 * fault is one sentence for usageError; values are quoted printable.
 */
import { quote } from '../text/printable.ts';
import { parseDecimal } from '../text/parseDecimal.ts';

export interface OptionSpec {
  /** 'value' takes an argument; 'flag' takes none. */
  kind: 'value' | 'flag';
  /** One-letter alias, without the dash. */
  short?: string;
}

export interface ParsedOptions {
  values: Record<string, string | true>;
  positionals: string[];
}

/** Reads `args` against `spec` (keys are long names without dashes); a string is the fault. */
export function readOptions(args: readonly string[], spec: Record<string, OptionSpec>, allowPositionals: boolean): ParsedOptions | string {
  const values: Record<string, string | true> = {};
  const positionals: string[] = [];
  const byShort = new Map(Object.entries(spec).filter(([, s]) => s.short).map(([name, s]) => [s.short as string, name]));
  let onlyPositionals = false;
  for (let i = 0; i < args.length; i++) {
    const arg = args[i];
    if (onlyPositionals || arg === '-' || !arg.startsWith('-')) {
      if (!allowPositionals) return `unexpected argument ${quote(arg)}`;
      positionals.push(arg);
      continue;
    }
    if (arg === '--') {
      onlyPositionals = true;
      continue;
    }
    const long = arg.startsWith('--');
    const eq = long ? arg.indexOf('=') : -1;
    const written = eq > 0 ? arg.slice(0, eq) : arg;
    const name = long ? written.slice(2) : byShort.get(written.slice(1));
    const option = name === undefined || !Object.hasOwn(spec, name) ? undefined : spec[name];
    if (name === undefined || option === undefined) return `unknown option ${quote(written)}`;
    if (Object.hasOwn(values, name)) return `${written} given twice`;
    if (option.kind === 'flag') {
      if (eq > 0) return `${written} takes no value`;
      values[name] = true;
      continue;
    }
    const value = eq > 0 ? arg.slice(eq + 1) : args[++i];
    if (value === undefined || value === '') return `${written} needs a value`;
    values[name] = value;
  }
  return { values, positionals };
}

/** A string option's value (undefined when absent). */
export function stringOption(parsed: ParsedOptions, name: string): string | undefined {
  const v = parsed.values[name];
  return typeof v === 'string' ? v : undefined;
}

/**
 * A numeric option: the decimal reading of its value, or a fault naming the option, the
 * range and the value. `fallback` when the option is absent.
 */
export function numberOption(
  parsed: ParsedOptions,
  name: string,
  rule: { min: number; max: number; integer?: boolean; unit: string },
  fallback: number,
): number | string {
  const text = stringOption(parsed, name);
  if (text === undefined) return fallback;
  const v = parseDecimal(text);
  const ok = Number.isFinite(v) && v >= rule.min && v <= rule.max && (!rule.integer || Number.isInteger(v));
  if (ok) return v;
  return `--${name} must be ${rule.integer ? 'a whole number of' : 'a number of'} ${rule.unit} from ${rule.min} to ${rule.max}, got ${quote(text)}`;
}
