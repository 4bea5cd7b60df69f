/**
 * Typed, located reads from one YAML mapping of the asset map. Every read that fails records a
 * problem (with path, line and column) and returns undefined, so validation carries on and
 * reports every problem of the file in one pass.
 */
import { isAlias, isMap, isScalar, isSeq, type Document, type Node, type Pair, type YAMLMap } from 'yaml';
import type { ProblemLog } from './configProblem.ts';
import { printable, quote } from '../text/printable.ts';
import { aliasResolver, type ResolveAlias } from './aliasResolver.ts';
import { suggestKey } from './suggestKey.ts';

export interface NumberRule {
  /** Exclusive lower bound. */
  gt?: number;
  /** Inclusive lower bound. */
  ge?: number;
  lt?: number;
  le?: number;
  integer?: boolean;
}

/** Ids appear in MQTT topics and log fields: letters, digits, '.', '_' and '-', 64 at most. */
export const MAX_ID_CHARS = 64;
const ID_PATTERN = new RegExp(`^[A-Za-z0-9][A-Za-z0-9._-]{0,${MAX_ID_CHARS - 1}}$`);
const ID_EXPECTED = `an id (letters, digits, '.', '_' or '-', at most ${MAX_ID_CHARS} characters)`;

/** Context shared by every view of one document. */
export class Reader {
  private readonly followAlias: ResolveAlias;

  constructor(
    readonly doc: Document,
    readonly source: string,
    readonly log: ProblemLog,
  ) {
    this.followAlias = aliasResolver(doc);
  }

  /** Follows an alias to its anchor's node. */
  resolve(node: unknown): Node | null {
    if (node === null || node === undefined) return null;
    if (isAlias(node)) return (this.followAlias(node) as Node | null) ?? null;
    return node as Node;
  }

  offset(node: Node | null | undefined): number | undefined {
    return node?.range?.[0];
  }

  /** How a value looks in the file, for `got ...`. */
  describe(node: Node | null): string {
    if (node === null) return 'nothing';
    if (isMap(node)) return 'a mapping';
    if (isSeq(node)) return 'a list';
    if (isScalar(node)) {
      if (node.value === null) return 'nothing';
      if (typeof node.value === 'string') return quote(node.value);
      if (node.range) return printable(this.source.slice(node.range[0], node.range[1]).trim() || String(node.value));
      return printable(String(node.value));
    }
    return 'an unreadable value';
  }

  /** Opens a mapping; records a type problem and returns undefined when `node` is not one. */
  map(node: Node | null, path: string, allowedKeys: readonly string[], parentOffset?: number): MapView | undefined {
    if (!isMap(node)) {
      this.log.error({
        code: 'QB_E_CONFIG_TYPE',
        path,
        offset: this.offset(node) ?? parentOffset,
        expected: 'a mapping (key: value lines or { key: value })',
        found: this.describe(node),
      });
      return undefined;
    }
    return new MapView(this, node, path, allowedKeys);
  }

  /** The items of a list; records a type problem when `node` is not one. */
  list(node: Node | null, path: string, expected: string, parentOffset?: number): Node[] | undefined {
    if (!isSeq(node)) {
      this.log.error({
        code: 'QB_E_CONFIG_TYPE',
        path,
        offset: this.offset(node) ?? parentOffset,
        expected,
        found: this.describe(node),
      });
      return undefined;
    }
    return node.items.map((item) => this.resolve(item) ?? (item as Node));
  }

  number(node: Node | null, path: string, rule: NumberRule): number | undefined {
    const expected = describeRule(rule);
    const value = isScalar(node) ? node.value : undefined;
    if (typeof value !== 'number' || !Number.isFinite(value) || (rule.integer && !Number.isInteger(value))) {
      this.log.error({ code: 'QB_E_CONFIG_TYPE', path, offset: this.offset(node), expected, found: this.describe(node) });
      return undefined;
    }
    const outside =
      (rule.gt !== undefined && !(value > rule.gt)) ||
      (rule.ge !== undefined && !(value >= rule.ge)) ||
      (rule.lt !== undefined && !(value < rule.lt)) ||
      (rule.le !== undefined && !(value <= rule.le));
    if (outside) {
      this.log.error({ code: 'QB_E_CONFIG_RANGE', path, offset: this.offset(node), expected, found: this.describe(node) });
      return undefined;
    }
    return value;
  }

  text(node: Node | null, path: string, options: { oneOf?: readonly string[]; id?: boolean } = {}): string | undefined {
    let value: unknown = isScalar(node) ? node.value : undefined;
    // An id written as a bare number (`id: 2`) is meant as text: keep it as written.
    if (options.id && typeof value === 'number' && node?.range) value = this.source.slice(node.range[0], node.range[1]).trim();
    const expected = options.oneOf
      ? `one of ${options.oneOf.map((s) => `'${s}'`).join(', ')}`
      : options.id
        ? ID_EXPECTED
        : 'non-empty text';
    if (typeof value !== 'string' || value.trim() === '') {
      this.log.error({ code: 'QB_E_CONFIG_TYPE', path, offset: this.offset(node), expected, found: this.describe(node) });
      return undefined;
    }
    if ((options.oneOf && !options.oneOf.includes(value)) || (options.id && !ID_PATTERN.test(value))) {
      this.log.error({ code: 'QB_E_CONFIG_RANGE', path, offset: this.offset(node), expected, found: this.describe(node) });
      return undefined;
    }
    return value;
  }

  /** A list of exactly `n` finite numbers, each obeying `rule`. */
  numbers(node: Node | null, path: string, n: number, rule: NumberRule): number[] | undefined {
    const items = this.list(node, path, `a list of ${n} numbers`);
    if (!items) return undefined;
    if (items.length !== n) {
      this.log.error({
        code: 'QB_E_CONFIG_TYPE',
        path,
        offset: this.offset(node),
        expected: `a list of ${n} numbers`,
        found: `${items.length} item${items.length === 1 ? '' : 's'}`,
      });
      return undefined;
    }
    const values = items.map((item, i) => this.number(item, `${path}[${i}]`, rule));
    return values.every((v): v is number => v !== undefined) ? values : undefined;
  }
}

/** One mapping: reads its keys and reports any key not in `allowedKeys`. */
export class MapView {
  private readonly fields = new Map<string, { key: Node; value: Node | null }>();

  constructor(
    readonly reader: Reader,
    readonly node: YAMLMap,
    readonly path: string,
    allowedKeys: readonly string[],
  ) {
    for (const pair of node.items as Pair[]) {
      const keyNode = pair.key as Node;
      const name = isScalar(keyNode) ? String(keyNode.value) : undefined;
      if (name === undefined) {
        reader.log.error({
          code: 'QB_E_CONFIG_TYPE',
          path,
          offset: reader.offset(keyNode),
          expected: 'a plain key',
          found: reader.describe(keyNode),
        });
        continue;
      }
      if (this.fields.has(name)) continue; // the YAML layer has already reported the duplicate key
      if (!allowedKeys.includes(name)) {
        const hint = suggestKey(name, allowedKeys);
        reader.log.error({
          code: 'QB_E_CONFIG_UNKNOWN_KEY',
          path: this.child(name),
          offset: reader.offset(keyNode),
          expected: `one of ${allowedKeys.join(', ')}`,
          found: quote(name),
          detail: hint ? `unknown key, did you mean '${hint}'?` : `unknown key; expected one of ${allowedKeys.join(', ')}`,
        });
        continue;
      }
      this.fields.set(name, { key: keyNode, value: reader.resolve(pair.value) });
    }
  }

  get offset(): number | undefined {
    return this.node.range?.[0];
  }

  child(key: string): string {
    return this.path === '' ? key : `${this.path}.${key}`;
  }

  has(key: string): boolean {
    return this.fields.has(key);
  }

  /** The value node of `key` (null when written with no value), or undefined when absent. */
  get(key: string): Node | null | undefined {
    return this.fields.get(key)?.value;
  }

  keyOffset(key: string): number | undefined {
    return this.reader.offset(this.fields.get(key)?.key);
  }

  /** Offset of a key's value (or of the key when it has none). */
  valueOffset(key: string): number | undefined {
    return this.reader.offset(this.get(key)) ?? this.keyOffset(key);
  }

  missing(key: string, expected: string): undefined {
    this.reader.log.error({
      code: 'QB_E_CONFIG_MISSING',
      path: this.child(key),
      offset: this.offset,
      expected,
      found: 'nothing',
      detail: `required, must be ${expected}`,
    });
    return undefined;
  }

  /** Reports `key` as not applying here (it would otherwise silently do nothing). */
  notApplicable(key: string, why: string): void {
    this.reader.log.error({
      code: 'QB_E_CONFIG_UNKNOWN_KEY',
      path: this.child(key),
      offset: this.keyOffset(key),
      expected: why,
      found: `'${key}'`,
      detail: `does not apply here: ${why}`,
    });
  }

  number(key: string, rule: NumberRule, fallback?: number): number | undefined {
    if (!this.has(key)) return fallback === undefined ? this.missing(key, describeRule(rule)) : fallback;
    const node = this.present(key, describeRule(rule));
    return node && this.reader.number(node, this.child(key), rule);
  }

  optionalNumber(key: string, rule: NumberRule): number | undefined {
    if (!this.has(key)) return undefined;
    const node = this.present(key, describeRule(rule));
    return node && this.reader.number(node, this.child(key), rule);
  }

  text(key: string, options: { oneOf?: readonly string[]; id?: boolean; fallback?: string } = {}): string | undefined {
    const expected = options.oneOf ? `one of ${options.oneOf.join(', ')}` : options.id ? ID_EXPECTED : 'non-empty text';
    if (!this.has(key)) return options.fallback !== undefined ? options.fallback : this.missing(key, expected);
    const node = this.present(key, expected);
    return node && this.reader.text(node, this.child(key), options);
  }

  numbers(key: string, n: number, rule: NumberRule): number[] | undefined {
    if (!this.has(key)) return this.missing(key, `a list of ${n} numbers`);
    const node = this.present(key, `a list of ${n} numbers`);
    return node && this.reader.numbers(node, this.child(key), n, rule);
  }

  /** The value node of a present key; `key:` written with no value is reported at the key. */
  present(key: string, expected: string): Node | undefined {
    const v = this.get(key);
    if (v !== null && v !== undefined && !(isScalar(v) && v.value === null)) return v;
    this.reader.log.error({
      code: 'QB_E_CONFIG_TYPE',
      path: this.child(key),
      offset: this.keyOffset(key),
      expected,
      found: 'nothing',
    });
    return undefined;
  }
}

export function describeRule(rule: NumberRule): string {
  const noun = rule.integer ? 'an integer' : 'a number';
  const parts: string[] = [];
  if (rule.gt !== undefined) parts.push(`> ${rule.gt}`);
  if (rule.ge !== undefined) parts.push(`>= ${rule.ge}`);
  if (rule.lt !== undefined) parts.push(`< ${rule.lt}`);
  if (rule.le !== undefined) parts.push(`<= ${rule.le}`);
  return parts.length === 0 ? `a finite ${noun.replace(/^an? /, '')}` : `${noun} ${parts.join(' and ')}`;
}
