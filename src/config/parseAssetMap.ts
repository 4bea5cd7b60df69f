/**
 * Validates an asset map (YAML) and turns it into the normalised SiteMap of types.ts.
 *
 * Every problem of the file is reported in one pass, each with its path in the map, line and
 * column, what was expected and what was found. Unknown keys are errors (a typo must not
 * silently do nothing). Warnings never make a map invalid. The map is returned only when there
 * is no problem at all. The text is bounded before it is parsed: its size (MAX_MAP_BYTES) and
 * how deeply it nests (MAX_YAML_DEPTH); the problems listed are bounded too (the rest counted).
 *
 * The blocks are read in their own files: readAgent, readBroker, readAsset (sensors, alarm,
 * severity), readSpeed, readOrder, readComponent, readAnalysis; crossChecks holds the checks
 * across items (channels, input topics).
 */
import { isMap, parseDocument, LineCounter, type Node } from 'yaml';
import { readTextFile } from '../acquisition/readTextFile.ts';
import { formatMiB } from '../text/formatMiB.ts';
import { printable, quote } from '../text/printable.ts';
import { ProblemLog, type ConfigProblem } from './configProblem.ts';
import { checkInputTopics } from './crossChecks.ts';
import { keysOf, MAP_BLOCK } from './mapKeys.ts';
import { Reader, type MapView } from './mapView.ts';
import { expandedSize, firstAliasOffset, MAX_EXPANDED_VALUES } from './expandedSize.ts';
import { pathAtOffset } from './nodePath.ts';
import { MAX_SPECTRUM_BYTES_PER_MAP, spectrumBytes } from './readAnalysis.ts';
import { DEFAULT_AGENT, readAgent } from './readAgent.ts';
import { readAsset } from './readAsset.ts';
import { readSparkplug } from './readSparkplug.ts';
import { readBroker } from './readBroker.ts';
import { readList } from './readList.ts';
import type { SiteMap } from './types.ts';
import { firstTooDeep, MAX_YAML_DEPTH } from './yamlDepth.ts';

export type { ConfigProblem } from './configProblem.ts';
export { DEFAULT_AGENT } from './readAgent.ts';
export { DEFAULT_ANALYSIS } from './readAnalysis.ts';
export { DEFAULT_ESCALATE_AFTER_ON_DELAYS, DEFAULT_ESCALATE_GROWTH, DEFAULT_SEVERITY } from './readAsset.ts';
export { DEFAULT_TOPIC_PREFIX } from './readBroker.ts';
export { DEFAULT_MAX_AGE_S, DEFAULT_MIN_CONFIDENCE } from './readSpeed.ts';

/** The largest map read: about 600 assets of the example's size, far beyond one edge box. */
export const MAX_MAP_BYTES = 2 ** 20;

export interface AssetMapResult {
  /** The validated map; null when there is any problem. */
  map: SiteMap | null;
  /** The name given to parseAssetMap (usually the file path), for messages. */
  sourceName: string;
  problems: ConfigProblem[];
  warnings: ConfigProblem[];
  /** Problems and warnings found beyond the ones listed (ProblemLog.MAX_LISTED each). */
  moreProblems: number;
  moreWarnings: number;
}

const TOP_KEYS = keysOf(MAP_BLOCK);

/** Parses and validates asset-map text; `sourceName` names the file in nothing but messages. */
export function parseAssetMap(text: string, sourceName: string): AssetMapResult {
  const lineCounter = new LineCounter();
  const log = new ProblemLog(lineCounter);
  const result = () => ({ map: null, sourceName, ...log.sorted() });
  if (text.length > MAX_MAP_BYTES) {
    log.error({
      code: 'QB_E_CONFIG_TOO_LARGE',
      path: '',
      offset: undefined,
      expected: `a map of at most ${formatMiB(MAX_MAP_BYTES)}`,
      found: `${text.length} characters`,
      detail: `the map holds ${text.length} characters, more than the ${MAX_MAP_BYTES} (${formatMiB(MAX_MAP_BYTES)}) qband reads`,
    });
    return result();
  }
  const deep = firstTooDeep(text);
  if (deep !== null) {
    // Not parsed: count the lines up to the offset for its line and column.
    for (let i = 0; i >= 0 && i <= deep; i = text.indexOf('\n', i) + 1 || -1) lineCounter.addNewLine(i);
    log.error({
      code: 'QB_E_CONFIG_TOO_LARGE',
      path: '',
      offset: deep,
      expected: `at most ${MAX_YAML_DEPTH} levels of nesting`,
      found: 'deeper nesting',
      detail: `the document is nested too deeply here (more than ${MAX_YAML_DEPTH} levels)`,
    });
    return result();
  }

  const doc = parseDocument(text, { lineCounter, prettyErrors: false, uniqueKeys: true });
  let structural = false;
  for (const err of doc.errors) {
    if (err.code === 'DUPLICATE_KEY') {
      const where = pathAtOffset(doc.contents, err.pos[0]);
      const key = where?.key ?? printable(text.slice(err.pos[0], err.pos[1]).trim(), 40);
      const path = where?.path ?? '';
      log.error({
        code: 'QB_E_CONFIG_DUPLICATE',
        path: printable(path),
        offset: err.pos[0],
        expected: 'each key once per mapping',
        found: `${quote(key)} twice`,
        detail: `key ${quote(key)} appears twice in the same mapping; keep one`,
      });
      continue;
    }
    structural = true;
    log.error({
      code: 'QB_E_CONFIG_SYNTAX',
      path: '',
      offset: err.pos[0],
      expected: 'well-formed YAML',
      found: err.code,
      detail: `YAML syntax: ${printable(firstLine(err.message), 200)}`,
    });
  }
  for (const w of doc.warnings) {
    log.warn({ code: 'QB_E_CONFIG_SYNTAX', path: '', offset: w.pos[0], expected: 'plain YAML', found: w.code, detail: `YAML: ${printable(firstLine(w.message), 200)}` });
  }
  if (structural) return result();
  if (expandedSize(doc) > MAX_EXPANDED_VALUES) {
    log.error({
      code: 'QB_E_CONFIG_TOO_LARGE',
      path: '',
      offset: firstAliasOffset(doc),
      expected: `at most ${MAX_EXPANDED_VALUES} values with aliases followed`,
      found: 'more',
      detail: `aliases (*name) expand the map to more than ${MAX_EXPANDED_VALUES} values (or into themselves); write the repeated parts out or split the map`,
    });
    return result();
  }

  const reader = new Reader(doc, text, log);
  const map = readSite(reader, reader.resolve(doc.contents));
  const sorted = log.sorted();
  return { map: sorted.problems.length === 0 && sorted.moreProblems === 0 ? (map ?? null) : null, sourceName, ...sorted };
}

/**
 * Reads a map file; a file that cannot be read (missing, a directory, no permission) is a
 * QbandError (QB_E_FILE_READ), one larger than MAX_MAP_BYTES QB_E_CONFIG_TOO_LARGE.
 */
export async function loadAssetMapFile(path: string): Promise<AssetMapResult> {
  return parseAssetMap(await readTextFile(path, MAX_MAP_BYTES, 'asset map', 'QB_E_CONFIG_TOO_LARGE'), path);
}

function firstLine(s: string): string {
  return s.split('\n')[0].replace(/ at line \d+, column \d+:?$/, '');
}

function readSite(reader: Reader, root: Node | null): SiteMap | undefined {
  if (!isMap(root)) {
    reader.log.error({
      code: 'QB_E_CONFIG_TYPE',
      path: '',
      offset: reader.offset(root),
      expected: 'a mapping with site and assets',
      found: reader.describe(root),
      detail: `the map must be a mapping with 'site' and 'assets', got ${reader.describe(root)}`,
    });
    return undefined;
  }
  const top = reader.map(root, '', TOP_KEYS)!;
  const site = top.text('site', { id: true });
  const broker = top.has('broker') ? readBroker(reader, top) : undefined;
  const agent = top.has('agent') ? readAgent(reader, top) : { ...DEFAULT_AGENT };
  const assets = readList(reader, top, 'assets', 'a list of assets', (node, path) => readAsset(reader, node, path));
  checkInputTopics(reader, top);
  if (assets) checkSpectrumMemory(reader, top, assets);
  const sparkplug = top.has('sparkplug') ? readSparkplug(reader, top) : undefined;
  if (site === undefined || assets === undefined || agent === undefined || (top.has('broker') && broker === undefined)) return undefined;
  if (top.has('sparkplug') && sparkplug === undefined) return undefined;
  return { site, ...(broker ? { broker } : {}), agent, assets, ...(sparkplug ? { sparkplug } : {}) };
}

/** Every sensor keeps a spectrum: all of them together must fit the map's memory budget. */
function checkSpectrumMemory(reader: Reader, top: MapView, assets: SiteMap['assets']): void {
  let bytes = 0;
  for (const a of assets) bytes += a.sensors.length * spectrumBytes(a.analysis);
  if (bytes <= MAX_SPECTRUM_BYTES_PER_MAP) return;
  reader.log.error({
    code: 'QB_E_CONFIG_RANGE',
    path: 'assets',
    offset: top.keyOffset('assets'),
    expected: `spectra that fit in ${formatMiB(MAX_SPECTRUM_BYTES_PER_MAP)} together`,
    found: formatMiB(bytes),
    detail: `the spectra of all sensors need ${formatMiB(bytes)} together, more than the ${formatMiB(MAX_SPECTRUM_BYTES_PER_MAP)} allowed: lower frame_size or averages, or split the map between agents`,
  });
}
