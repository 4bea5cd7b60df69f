/**
 * The one renderer: positions are checked against the numbers through the chart's own scale
 * (not pixels), the picture is self-contained (no scripts, links or external fonts) and every
 * strip and series carries a text label, so it reads in black and white.
 */
import { describe, expect, it } from 'vitest';
import { escapeXml, niceTicks, renderFigure, scaleOf, tickLabel, type Chart } from '../src/render/svgChart.ts';
import { wrapWords } from '../src/text/wrapWords.ts';

const chart: Chart = {
  title: 'amplitude <against> speed',
  x: { label: 'shaft speed', unit: 'rpm', min: 600, max: 1200 },
  y: { label: 'velocity', unit: 'mm/s', min: 0, max: 10 },
  strips: [{ id: 'band', label: 'band 800-900 rpm', from: 800, to: 900, along: 'x', pattern: 'hatch-up' }],
  series: [{ id: 'measured', label: 'measured', points: [[700, 2], [850, 8], [1000, 3]], style: 'points', marker: 'circle' }],
};

describe('svg chart renderer', () => {
  const svg = renderFigure('test figure', [chart], ['caution line']);

  it('places a strip and the points where the scale puts their values', () => {
    const s = scaleOf(chart);
    const rect = /<rect class="strip" data-id="band" data-from="800" data-to="900" x="([\d.]+)" y="[\d.]+" width="([\d.]+)"/.exec(svg);
    expect(rect).not.toBeNull();
    expect(Number(rect![1])).toBeCloseTo(s.x(800), 1);
    expect(Number(rect![1]) + Number(rect![2])).toBeCloseTo(s.x(900), 1);
    const dots = [...svg.matchAll(/<circle cx="([\d.]+)" cy="([\d.]+)" r="2" fill="[^"]+" data-x="([\d.]+)" data-y="([\d.]+)"/g)];
    expect(dots).toHaveLength(3);
    for (const d of dots) {
      expect(Number(d[1])).toBeCloseTo(s.x(Number(d[3])), 1);
      expect(Number(d[2])).toBeCloseTo(s.y(Number(d[4])), 1);
    }
    // Up is larger: 8 mm/s is drawn above 2 mm/s.
    expect(s.y(8)).toBeLessThan(s.y(2));
  });

  it('is self-contained, escapes text, and labels every strip and series in words', () => {
    expect(svg).not.toMatch(/<script|href=|@import|url\(http/);
    expect(svg).toContain('amplitude &lt;against&gt; speed');
    expect(svg).toContain('band 800-900 rpm');
    expect(svg).toContain('measured');
    expect(svg).toContain('shaft speed (rpm)');
    expect(svg).toContain('caution line');
  });

  it('chooses round ticks and wraps long lines', () => {
    expect(niceTicks(600, 1200)).toEqual([600, 700, 800, 900, 1000, 1100, 1200]);
    expect(niceTicks(0, 1, 5)).toEqual([0, 0.2, 0.4, 0.6, 0.8, 1]);
    expect([0.002, 0.004].map((v) => tickLabel(v, [0.002, 0.004]))).toEqual(['0.002', '0.004']);
    expect(tickLabel(700, [600, 700])).toBe('700');
    expect(wrapWords('aa bb cc dd', 5)).toEqual(['aa bb', 'cc dd']);
    expect(escapeXml(`"a" & 'b'`)).toBe('&quot;a&quot; &amp; &#39;b&#39;');
  });
});

describe('marks, cursors, end labels and horizontal strips', () => {
  const diagram: Chart = {
    title: 'orders against speed',
    x: { label: 'shaft speed', unit: 'rpm', min: 0, max: 1500 },
    y: { label: 'frequency', unit: 'Hz', min: 0, max: 100 },
    strips: [{ id: 'band-a', label: 'a band 40-44 Hz', from: 40, to: 44, along: 'y', pattern: 'hatch-up' }],
    series: [{ id: '2x', label: '2x', points: [[0, 0], [1500, 50]], style: 'dashed', endLabel: true }],
    marks: [{ id: 'crossing', tag: 'A', label: '2x x a at 1260 rpm: inside the operating range', x: 1260, y: 42, shape: 'triangle', tone: 'alert', span: [1200, 1320] }],
    cursors: [{ id: 'now', x: 900, label: 'now 900 rpm' }],
  };
  const svg = renderFigure('diagram', [diagram], [], { idPrefix: 'pump 1' });
  const s = scaleOf(diagram);

  it('draws a horizontal strip between its frequencies and a bar over the mark at its speeds', () => {
    const strip = /<rect class="strip" data-id="band-a" data-from="40" data-to="44" x="[\d.]+" y="([\d.]+)" width="[\d.]+" height="([\d.]+)"/.exec(svg)!;
    expect(Number(strip[1])).toBeCloseTo(s.y(44), 1);
    expect(Number(strip[1]) + Number(strip[2])).toBeCloseTo(s.y(40), 1);
    const bar = /<line class="span" data-id="crossing" data-from="1200" data-to="1320" x1="([\d.]+)" y1="([\d.]+)" x2="([\d.]+)"/.exec(svg)!;
    expect(Number(bar[1])).toBeCloseTo(s.x(1200), 1);
    expect(Number(bar[3])).toBeCloseTo(s.x(1320), 1);
    expect(Number(bar[2])).toBeCloseTo(s.y(42), 1);
    const tri = /<g class="mark" data-id="crossing" data-x="1260" data-y="42"><path d="M([\d.]+) ([\d.]+)L/.exec(svg)!;
    expect(Number(tri[1])).toBeCloseTo(s.x(1260), 1);
    expect(Number(tri[2])).toBeCloseTo(s.y(42) - 6, 1);
  });

  it('puts the cursor at its speed and the end label at the line end, and says everything in words', () => {
    const cursor = /<line class="cursor" data-id="now" data-x="900" x1="([\d.]+)"/.exec(svg)!;
    expect(Number(cursor[1])).toBeCloseTo(s.x(900), 1);
    const end = /<text class="end-label" data-id="2x" x="([\d.]+)"/.exec(svg)!;
    expect(Number(end[1])).toBeCloseTo(s.x(1500) - 4, 1);
    expect(svg).toContain('A: 2x x a at 1260 rpm: inside the operating range');
    expect(svg).toContain('now 900 rpm');
    // Ids carry the prefix, so several figures can share a page.
    expect(svg).toContain('id="pump_1-hatch-up"');
    expect(svg).toContain('url(#pump_1-hatch-up)');
    expect(svg).not.toMatch(/id="hatch-up"/);
  });
});
