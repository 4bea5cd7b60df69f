// Writes schema/asset-map.schema.json from the map readers' key table (src/config/mapKeys.ts).
// `npm run schema` after adding or changing a key; test/mapSchema.test.ts fails while the
// committed file differs from what this writes.
import { mkdirSync, writeFileSync } from 'node:fs';
import { buildMapSchema } from '../src/config/mapSchema.ts';

const url = new URL('../schema/asset-map.schema.json', import.meta.url);
mkdirSync(new URL('.', url), { recursive: true });
writeFileSync(url, `${JSON.stringify(buildMapSchema(), null, 2)}\n`);
console.log('wrote schema/asset-map.schema.json');
