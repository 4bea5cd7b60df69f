/**
 * The `analysis:` block of an asset: the spectrum every sensor keeps (frame size, overlap,
 * averages, decimation) and the step of dwell decisions. Each key is bounded, and so is the
 * memory the spectra imply, so that a map `check` accepts is one the engine can run on an
 * edge box: nothing the engine would refuse, nothing that would take the box's memory or spin.
 */
import { formatMiB } from '../text/formatMiB.ts';
import { ANALYSIS_BLOCK, keysOf, MAX_AVERAGES, MAX_DECIMATION, MAX_DECISION_STEP_S, MAX_FRAME_SIZE, MAX_OVERLAP, MIN_DECISION_STEP_S, MIN_FRAME_SIZE, ruleOf } from './mapKeys.ts';
import type { MapView, Reader } from './mapView.ts';
import type { AnalysisConfig } from './types.ts';

// The keys' bounds live with their descriptions in ANALYSIS_BLOCK (mapKeys.ts).
export { MAX_AVERAGES, MAX_DECIMATION, MAX_DECISION_STEP_S, MAX_FRAME_SIZE, MAX_OVERLAP, MIN_DECISION_STEP_S, MIN_FRAME_SIZE };
const rule = (key: string) => ruleOf(ANALYSIS_BLOCK, key);
/** Memory of one sensor's spectrum, and of all of a map's spectra together. */
export const MAX_SPECTRUM_BYTES_PER_SENSOR = 64 * 2 ** 20;
export const MAX_SPECTRUM_BYTES_PER_MAP = 512 * 2 ** 20;

const ANALYSIS_KEYS = keysOf(ANALYSIS_BLOCK);

export const DEFAULT_ANALYSIS: AnalysisConfig = {
  frameSize: 8192,
  overlap: 0.5,
  averages: 4,
  decimation: 'auto',
  decisionStepS: 0.1,
};

/**
 * Bytes one sensor's spectrum holds: `averages` power frames and three more (sum, newest,
 * velocity) of frameSize/2 + 1 doubles, and per frame sample the frame, the windowed frame
 * (float32), the window (float64) and the FFT's complex work space (two float64).
 */
export function spectrumBytes(analysis: Pick<AnalysisConfig, 'frameSize' | 'averages'>): number {
  const lines = analysis.frameSize / 2 + 1;
  return (analysis.averages + 3) * lines * 8 + analysis.frameSize * (4 + 4 + 8 + 16);
}

export function readAnalysis(reader: Reader, asset: MapView): AnalysisConfig | undefined {
  const view = reader.map(asset.get('analysis') ?? null, asset.child('analysis'), ANALYSIS_KEYS, asset.keyOffset('analysis'));
  if (!view) return undefined;
  const d = DEFAULT_ANALYSIS;
  const frameSize = view.number('frame_size', rule('frame_size'), d.frameSize);
  if (frameSize !== undefined && !isPowerOfTwo(frameSize)) powerOfTwoProblem(reader, view, 'frame_size', frameSize);
  const overlap = view.number('overlap', rule('overlap'), d.overlap);
  const averages = view.number('averages', rule('averages'), d.averages);
  const decisionStepS = view.number('decision_step_s', rule('decision_step_s'), d.decisionStepS);
  let decimation: number | 'auto' | undefined = d.decimation;
  if (view.has('decimation')) {
    const node = view.present('decimation', `'auto' or a power-of-two integer from 1 to ${MAX_DECIMATION}`);
    const raw = node && 'value' in node ? (node as { value: unknown }).value : undefined;
    if (raw === 'auto') decimation = 'auto';
    else if (node) {
      decimation = reader.number(node, view.child('decimation'), rule('decimation'));
      if (decimation !== undefined && !isPowerOfTwo(decimation)) {
        powerOfTwoProblem(reader, view, 'decimation', decimation);
        decimation = undefined;
      }
    } else decimation = undefined;
  }
  if (frameSize === undefined || !isPowerOfTwo(frameSize) || averages === undefined) return undefined;
  const bytes = spectrumBytes({ frameSize, averages });
  if (bytes > MAX_SPECTRUM_BYTES_PER_SENSOR) {
    const key = view.has('averages') ? 'averages' : 'frame_size';
    reader.log.error({
      code: 'QB_E_CONFIG_RANGE',
      path: view.child(key),
      offset: view.valueOffset(key),
      expected: `frame_size and averages whose spectrum fits in ${formatMiB(MAX_SPECTRUM_BYTES_PER_SENSOR)} per sensor`,
      found: `frame_size ${frameSize} with averages ${averages}`,
      detail: `frame_size ${frameSize} with averages ${averages} needs ${formatMiB(bytes)} per sensor, more than the ${formatMiB(MAX_SPECTRUM_BYTES_PER_SENSOR)} allowed: lower averages or frame_size (raise decimation to keep the line spacing)`,
    });
    return undefined;
  }
  if (overlap === undefined || decisionStepS === undefined || decimation === undefined) return undefined;
  return { frameSize, overlap, averages, decimation, decisionStepS };
}

function isPowerOfTwo(n: number): boolean {
  return Number.isInteger(n) && n >= 1 && (n & (n - 1)) === 0;
}

function powerOfTwoProblem(reader: Reader, view: MapView, key: string, found: number): void {
  reader.log.error({
    code: 'QB_E_CONFIG_RANGE',
    path: view.child(key),
    offset: view.valueOffset(key),
    expected: key === 'frame_size' ? `a power of two from ${MIN_FRAME_SIZE} to ${MAX_FRAME_SIZE}` : `a power of two from 1 to ${MAX_DECIMATION} (1, 2, 4, 8, ...)`,
    found: String(found),
  });
}
