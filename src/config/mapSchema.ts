/**
 * The asset map's JSON Schema (draft 2020-12), built from the key rows of mapKeys.ts, the same
 * rows the map readers take their keys and bounds from. `npm run schema` writes it to
 * schema/asset-map.schema.json (shipped in the package); a test checks that the committed file
 * is what this builds. Each key's description and unit become its `description`, which editors
 * show on hover.
 *
 * What a schema cannot say stays with `qband check` alone: references between ids (a
 * component's orders, the speed sensor), unique ids, min < max in ranges and ascending zone
 * boundaries, a band that brackets fn, keys that belong to one speed source, channel clashes
 * and the spectra's memory budget.
 */
import type { BlockSpec, KeySpec } from './mapKeys.ts';
import { MAP_BLOCK } from './mapKeys.ts';
import { MAX_ID_CHARS, type NumberRule } from './mapView.ts';

export const SCHEMA_ID = 'https://qband.invalid/schema/asset-map.schema.json';
type Json = Record<string, unknown>;

/** The same pattern as the readers' ids (mapView.ts). */
const ID_PATTERN = `^[A-Za-z0-9][A-Za-z0-9._-]{0,${MAX_ID_CHARS - 1}}$`;

export function buildMapSchema(): Json {
  return {
    $schema: 'https://json-schema.org/draft/2020-12/schema',
    $id: SCHEMA_ID,
    title: MAP_BLOCK.title,
    description: 'A qband asset map: the site, its broker and agent settings, and each machine with its speed source, orders, sensors and structural components. Generated from the map readers\' key table; `qband check` reports what the schema cannot express.',
    ...blockSchema(MAP_BLOCK),
  };
}

function blockSchema(block: BlockSpec): Json {
  const out: Json = {
    type: 'object',
    properties: Object.fromEntries(block.keys.map((k) => [k.key, keySchema(k)])),
    additionalProperties: false,
  };
  const required = block.keys.filter((k) => k.required).map((k) => k.key);
  if (required.length) out.required = required;
  const all: Json[] = [];
  if (block.exactlyOne) all.push({ oneOf: block.exactlyOne.map((k) => ({ required: [k] })) });
  if (block.notBoth) all.push({ not: { required: [...block.notBoth] } });
  if (all.length === 1) Object.assign(out, all[0]);
  else if (all.length > 1) out.allOf = all;
  if (block.needs) out.dependentRequired = Object.fromEntries(Object.entries(block.needs).map(([k, v]) => [k, [...v]]));
  return out;
}

function hover(k: KeySpec): string {
  return k.unit ? `${k.description} Unit: ${k.unit}.` : k.description;
}

function keySchema(k: KeySpec): Json {
  const description = hover(k);
  switch (k.kind) {
    case 'number':
      return { description, ...numberSchema(k.rule ?? {}) };
    case 'id':
      return { description, ...idSchema() };
    case 'text':
      return { description, type: 'string', pattern: '\\S' };
    case 'url':
      return { description, type: 'string', pattern: '^[A-Za-z][A-Za-z0-9+.-]*://[^/\\s]+' };
    case 'word':
      return { description, enum: [...(k.oneOf ?? [])] };
    case 'numbers':
      return { description, type: 'array', items: numberSchema(k.rule ?? {}), minItems: k.count, maxItems: k.count };
    case 'powerOfTwo':
      return { description, enum: powersOfTwo(k.rule ?? {}) };
    case 'autoOrPowerOfTwo':
      return { description, enum: ['auto', ...powersOfTwo(k.rule ?? {})] };
    case 'idList':
      return { description, type: 'array', items: idSchema() };
    case 'block':
      return { description, ...blockSchema(k.block!) };
    case 'list':
      return { description, type: 'array', minItems: 1, items: blockSchema(k.block!) };
  }
}

function idSchema(): Json {
  // A bare number written as an id (`id: 2`) is read as the text it is written as.
  return { anyOf: [{ type: 'string', pattern: ID_PATTERN }, { type: 'number', minimum: 0 }] };
}

function numberSchema(rule: NumberRule): Json {
  const out: Json = { type: rule.integer ? 'integer' : 'number' };
  if (rule.gt !== undefined) out.exclusiveMinimum = rule.gt;
  if (rule.ge !== undefined) out.minimum = rule.ge;
  if (rule.lt !== undefined) out.exclusiveMaximum = rule.lt;
  if (rule.le !== undefined) out.maximum = rule.le;
  return out;
}

function powersOfTwo(rule: NumberRule): number[] {
  const out: number[] = [];
  for (let p = 1; p <= (rule.le ?? 2 ** 30); p *= 2) if (p >= (rule.ge ?? 1)) out.push(p);
  return out;
}
