import { existsSync, readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { describe, it } from 'vitest';
import { bearingOrders } from '../src/physics/bearingOrders.ts';
import { expectNear, expectRel } from './support/expectNear.ts';

// Bearing defect orders against the published multiples of the open recordings' manifest.

describe('bearing defect orders', () => {
  const recordings = new URL('../../shared/data/recordings/', import.meta.url);
  const manifestPath = fileURLToPath(new URL('manifest.json', recordings));
  const present = existsSync(manifestPath);
  if (!present) console.warn(`bearing-order checks skipped: ${manifestPath} not found`);

  /** Reads "NAME value" from the manifest's source text. */
  function published(text: string, name: string): number {
    const m = new RegExp(`${name} ([0-9.]+)`).exec(text);
    if (!m) throw new Error(`manifest text has no '${name} <value>': ${text}`);
    return Number(m[1]);
  }

  describe.skipIf(!present)('against manifest.json', () => {
    const manifest = present ? (JSON.parse(readFileSync(manifestPath, 'utf8')) as { sources: Record<string, string> }) : undefined;

    it('CWRU 6205 drive-end bearing: BPFI, BPFO, FTF, BSF (rolling element = 2 BSF)', () => {
      // Source: CWRU bearing data center values quoted in manifest.json. Geometry 9 balls,
      // d 0.3126 in, D 1.537 in. Tolerance relative 1e-4: the published multiples are given to
      // 5 significant figures and FTF differs from the kinematic value by 7e-5 relative.
      const text = manifest!.sources.cwru;
      const o = bearingOrders({
        rollingElements: Number(/(\d+) balls/.exec(text)![1]),
        elementDiameter: published(text, 'ball diameter'),
        pitchDiameter: published(text, 'pitch diameter'),
        contactAngleDeg: 0,
      });
      expectRel('CWRU BPFI', o.bpfi, published(text, 'BPFI'), 1e-4);
      expectRel('CWRU BPFO', o.bpfo, published(text, 'BPFO'), 1e-4);
      expectRel('CWRU FTF', o.ftf, published(text, 'FTF'), 1e-4);
      expectRel('CWRU rolling element (2 BSF)', 2 * o.bsf, published(text, 'rolling element'), 1e-4);
      expectRel('CWRU BSF', o.bsf, published(text, 'kinematic BSF is'), 1e-4);
    });

    it('MFPT geometry at 25 Hz: BPFO, BPFI, FTF, BSF in Hz', () => {
      // Source: MFPT values quoted in manifest.json (8 rollers, d 0.235, D 1.245, 25 Hz shaft).
      // Tolerance: one unit in the last published digit (0.001 Hz for BPFO/BPFI, 0.01 Hz for
      // FTF/BSF). The values are rounded, and BPFO 81.12450 appears as 81.125 (rounded twice, via
      // 81.1245), which half a unit would reject.
      const text = manifest!.sources.mfpt;
      const shaftHz = published(text, 'Shaft rate');
      const o = bearingOrders({
        rollingElements: Number(/(\d+) rollers/.exec(text)![1]),
        elementDiameter: published(text, 'roller diameter'),
        pitchDiameter: published(text, 'pitch diameter'),
        contactAngleDeg: published(text, 'contact angle'),
      });
      expectNear('MFPT BPFO Hz', o.bpfo * shaftHz, published(text, 'BPFO'), 0.001);
      expectNear('MFPT BPFI Hz', o.bpfi * shaftHz, published(text, 'BPFI'), 0.001);
      expectNear('MFPT FTF Hz', o.ftf * shaftHz, published(text, 'FTF'), 0.01);
      expectNear('MFPT BSF Hz', o.bsf * shaftHz, published(text, 'BSF'), 0.01);
    });
  });
});
