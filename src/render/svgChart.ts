/**
 * qband's one renderer of pictures: plain data in, a self-contained SVG string out (no fonts,
 * scripts or links to load). Every picture qband draws (identification plots, the plan's
 * interference diagram, the operator page's live diagram) is made of these charts, so a band or
 * an order looks the same everywhere.
 *
 * Meaning never rests on colour alone: series differ by dash pattern and marker shape and carry
 * their label at their end; strips (bands) are hatched and labelled; everything prints in black
 * and white. Colour is kept for what is measured (dark) against what is assumed (grey).
 *
 * Elements carry data-* attributes in data units (data-from, data-to, data-x, data-y) so tests
 * check positions against the numbers through `scaleOf`, not pixels.
 */
import { wrapWords } from '../text/wrapWords.ts';

export interface Axis {
  label: string;
  unit: string;
  min: number;
  max: number;
}

export type SeriesStyle = 'solid' | 'dashed' | 'dotted' | 'points';
export type MarkerShape = 'circle' | 'square' | 'triangle' | 'none';

export interface Series {
  id: string;
  label: string;
  points: Array<[number, number]>;
  style: SeriesStyle;
  marker?: MarkerShape;
  /** 'measured' draws dark, 'model' mid grey, 'reference' light grey, 'alert' in the alert colour. */
  tone?: Tone;
  /** Write the label beside the line's last point as well as in the key (lines that fan out). */
  endLabel?: boolean;
}

export type Tone = 'measured' | 'model' | 'reference' | 'alert';

/** A point that matters (a crossing, the operating point): a marker with its words beside it. */
export interface Mark {
  id: string;
  x: number;
  y: number;
  shape: MarkerShape;
  /** A few characters drawn beside the marker ('A', '3'); `label` is listed under the chart. */
  tag: string;
  label: string;
  tone?: Tone;
  /** A horizontal bar through the mark from x = span[0] to span[1] (a speed band). */
  span?: [number, number];
}

/** A vertical line across the chart at x (the current speed), labelled at its top. */
export interface Cursor {
  id: string;
  x: number;
  label: string;
  tone?: Tone;
}

export interface Strip {
  id: string;
  label: string;
  from: number;
  to: number;
  /** A strip across the chart at x in [from, to] ('x') or at y in [from, to] ('y'). */
  along: 'x' | 'y';
  pattern: 'hatch-up' | 'hatch-down' | 'shade' | 'outline';
}

export interface Chart {
  title: string;
  x: Axis;
  y: Axis;
  series: Series[];
  strips?: Strip[];
  marks?: Mark[];
  cursors?: Cursor[];
  /** Lines of text under the chart. */
  notes?: string[];
  /** Draw x and y at the same scale (polar views). */
  equalAspect?: boolean;
  /** Height of the chart's box in px (default 320), for charts with much to show. */
  heightPx?: number;
}

export interface Layout {
  width: number;
  height: number;
  left: number;
  right: number;
  top: number;
  bottom: number;
}

const LAYOUT: Layout = { width: 900, height: 320, left: 70, right: 280, top: 34, bottom: 48 };
/** Characters per line of notes and footers before they wrap. */
const WRAP_CHARS = 130;
const NOTE_LINE_PX = 15;
/** Characters per line of the key beside a chart. */
const KEY_CHARS = 44;
/** The one colour: what is abnormal. Everything else is grey on white. */
export const ALERT = '#b3261e';
const TONES: Record<Tone, string> = { measured: '#1a1a1a', model: '#555555', reference: '#8c8c8c', alert: ALERT };
const DASH: Record<SeriesStyle, string | null> = { solid: null, dashed: '7 4', dotted: '2 3', points: null };

/** Pixel position of a data value on a chart's axes (inside a chart's own box). */
/** The layout a chart is drawn in. */
export function layoutOf(chart: Chart): Layout {
  return chart.heightPx ? { ...LAYOUT, height: chart.heightPx } : LAYOUT;
}

export function scaleOf(chart: Chart, layout: Layout = layoutOf(chart)): { x: (v: number) => number; y: (v: number) => number } {
  let { min: x0, max: x1 } = chart.x;
  let { min: y0, max: y1 } = chart.y;
  let plotW = layout.width - layout.left - layout.right;
  let plotH = layout.height - layout.top - layout.bottom;
  if (chart.equalAspect) {
    const s = Math.min(plotW / (x1 - x0), plotH / (y1 - y0));
    const cx = (x0 + x1) / 2;
    const cy = (y0 + y1) / 2;
    plotW = s * (x1 - x0);
    plotH = s * (y1 - y0);
    x0 = cx - plotW / s / 2;
    x1 = cx + plotW / s / 2;
    y0 = cy - plotH / s / 2;
    y1 = cy + plotH / s / 2;
  }
  return {
    x: (v) => layout.left + ((v - x0) / (x1 - x0)) * plotW,
    y: (v) => layout.top + (1 - (v - y0) / (y1 - y0)) * plotH,
  };
}

export function escapeXml(text: string): string {
  return text.replace(/[&<>"']/g, (c) => ({ '&': '&amp;', '<': '&lt;', '>': '&gt;', '"': '&quot;', "'": '&#39;' })[c] as string);
}

/** Round tick values: 1, 2 or 5 times a power of ten, about `count` of them. */
export function niceTicks(min: number, max: number, count = 6): number[] {
  if (!(max > min)) return [min];
  const raw = (max - min) / count;
  const mag = 10 ** Math.floor(Math.log10(raw));
  const step = [1, 2, 5, 10].map((m) => m * mag).find((s) => s >= raw) as number;
  const ticks: number[] = [];
  for (let v = Math.ceil(min / step) * step; v <= max + step * 1e-9; v += step) ticks.push(Number(v.toPrecision(12)));
  return ticks;
}


/** A tick's label with as many decimals as the step between ticks needs. */
export function tickLabel(v: number, ticks: number[]): string {
  const step = ticks.length > 1 ? Math.abs(ticks[1] - ticks[0]) : Math.abs(v) || 1;
  const decimals = Math.max(0, Math.min(10, -Math.floor(Math.log10(step) + 1e-9)));
  return v.toFixed(decimals);
}

function fmt(v: number): string {
  return Number(v.toFixed(2)).toString();
}

function marker(shape: MarkerShape, x: number, y: number, tone: string, attrs: string): string {
  switch (shape) {
    case 'square':
      return `<rect x="${fmt(x - 2.5)}" y="${fmt(y - 2.5)}" width="5" height="5" fill="none" stroke="${tone}" ${attrs}/>`;
    case 'triangle':
      return `<path d="M${fmt(x)} ${fmt(y - 3)}L${fmt(x + 3)} ${fmt(y + 2.5)}L${fmt(x - 3)} ${fmt(y + 2.5)}Z" fill="none" stroke="${tone}" ${attrs}/>`;
    case 'none':
      return '';
    default:
      return `<circle cx="${fmt(x)}" cy="${fmt(y)}" r="2" fill="${tone}" ${attrs}/>`;
  }
}

/** One entry of a chart's key, wrapped to the key's width; returns the next line's y. */
function keyText(out: string[], x: number, y: number, text: string, tone: string): number {
  for (const [i, line] of wrapWords(text, KEY_CHARS).entries()) {
    out.push(`<text x="${fmt(x + (i > 0 ? 10 : 0))}" y="${fmt(y)}" font-size="11" fill="${tone}">${escapeXml(line)}</text>`);
    y += 14;
  }
  return y + 1;
}

/** A marker of a mark: larger than a series point and drawn with a white halo so it reads over lines. */
function bigMarker(shape: MarkerShape, x: number, y: number, tone: string): string {
  const halo = 'stroke-width="1.8" paint-order="stroke"';
  switch (shape) {
    case 'square':
      return `<rect x="${fmt(x - 4.5)}" y="${fmt(y - 4.5)}" width="9" height="9" fill="#ffffff" stroke="${tone}" ${halo}/>`;
    case 'triangle':
      return `<path d="M${fmt(x)} ${fmt(y - 6)}L${fmt(x + 5.5)} ${fmt(y + 4)}L${fmt(x - 5.5)} ${fmt(y + 4)}Z" fill="${tone}" stroke="${tone}" ${halo}/>`;
    case 'none':
      return '';
    default:
      return `<circle cx="${fmt(x)}" cy="${fmt(y)}" r="4.5" fill="#ffffff" stroke="${tone}" ${halo}/>`;
  }
}

/** One chart as an SVG group of its layout's size, its top-left at (0, offsetY). */
const STRIP_KEY: Record<Strip['pattern'], string> = { 'hatch-up': '////', 'hatch-down': '\\\\\\\\', shade: '[##]', outline: '[- -]' };

function chartGroup(chart: Chart, offsetY: number, uid: string, pre: string): { svg: string; height: number } {
  const L = layoutOf(chart);
  const s = scaleOf(chart, L);
  const out: string[] = [];
  const x0 = s.x(chart.x.min);
  const x1 = s.x(chart.x.max);
  const yTop = s.y(chart.y.max);
  const yBot = s.y(chart.y.min);
  const clip = `${pre}clip-${uid}`;
  out.push(`<clipPath id="${clip}"><rect x="${fmt(x0)}" y="${fmt(yTop)}" width="${fmt(x1 - x0)}" height="${fmt(yBot - yTop)}"/></clipPath>`);
  out.push(`<text x="${L.left}" y="${L.top - 14}" font-size="14" font-weight="bold">${escapeXml(chart.title)}</text>`);
  out.push(`<rect x="${fmt(x0)}" y="${fmt(yTop)}" width="${fmt(x1 - x0)}" height="${fmt(yBot - yTop)}" fill="none" stroke="#1a1a1a"/>`);
  const xTicks = niceTicks(chart.x.min, chart.x.max);
  for (const t of xTicks) {
    const x = s.x(t);
    out.push(`<line x1="${fmt(x)}" y1="${fmt(yBot)}" x2="${fmt(x)}" y2="${fmt(yBot + 4)}" stroke="#1a1a1a"/>`);
    out.push(`<text x="${fmt(x)}" y="${fmt(yBot + 16)}" font-size="11" text-anchor="middle">${tickLabel(t, xTicks)}</text>`);
  }
  const yTicks = niceTicks(chart.y.min, chart.y.max, 5);
  for (const t of yTicks) {
    const y = s.y(t);
    out.push(`<line x1="${fmt(x0 - 4)}" y1="${fmt(y)}" x2="${fmt(x0)}" y2="${fmt(y)}" stroke="#1a1a1a"/>`);
    out.push(`<text x="${fmt(x0 - 6)}" y="${fmt(y + 4)}" font-size="11" text-anchor="end">${tickLabel(t, yTicks)}</text>`);
  }
  out.push(`<text x="${fmt((x0 + x1) / 2)}" y="${fmt(yBot + 34)}" font-size="12" text-anchor="middle">${escapeXml(`${chart.x.label} (${chart.x.unit})`)}</text>`);
  out.push(
    `<text transform="translate(${fmt(x0 - 48)} ${fmt((yTop + yBot) / 2)}) rotate(-90)" font-size="12" text-anchor="middle">${escapeXml(`${chart.y.label} (${chart.y.unit})`)}</text>`,
  );
  let labelY = yTop + 12;
  for (const strip of chart.strips ?? []) {
    const fill = strip.pattern === 'shade' ? '#e6e6e6' : strip.pattern === 'outline' ? 'none' : `url(#${pre}${strip.pattern})`;
    const [rx, ry, rw, rh] =
      strip.along === 'x'
        ? [s.x(Math.min(strip.from, strip.to)), yTop, Math.abs(s.x(strip.to) - s.x(strip.from)), yBot - yTop]
        : [x0, s.y(Math.max(strip.from, strip.to)), x1 - x0, Math.abs(s.y(strip.from) - s.y(strip.to))];
    out.push(
      `<rect class="strip" data-id="${escapeXml(strip.id)}" data-from="${strip.from}" data-to="${strip.to}" x="${fmt(rx)}" y="${fmt(ry)}" width="${fmt(Math.max(rw, 0.5))}" height="${fmt(Math.max(rh, 0.5))}" fill="${fill}" stroke="#8c8c8c" stroke-width="${strip.pattern === 'outline' ? '1' : '0.5'}"${strip.pattern === 'outline' ? ' stroke-dasharray="3 3"' : ''} clip-path="url(#${clip})"/>`,
    );
    labelY = keyText(out, x1 + 8, labelY, `${STRIP_KEY[strip.pattern]} ${strip.label}`, '#1a1a1a');
  }
  for (const series of chart.series) {
    const tone = TONES[series.tone ?? 'measured'];
    const pts = series.points.filter(([a, b]) => Number.isFinite(a) && Number.isFinite(b));
    if (pts.length === 0) continue;
    const attrs = `class="series" data-id="${escapeXml(series.id)}"`;
    if (series.style !== 'points') {
      const dash = DASH[series.style];
      const d = pts.map(([a, b], i) => `${i === 0 ? 'M' : 'L'}${fmt(s.x(a))} ${fmt(s.y(b))}`).join('');
      out.push(`<path ${attrs} d="${d}" fill="none" stroke="${tone}" stroke-width="1.6"${dash ? ` stroke-dasharray="${dash}"` : ''} clip-path="url(#${clip})"/>`);
    }
    const shape = series.marker ?? (series.style === 'points' ? 'circle' : 'none');
    if (shape !== 'none') {
      for (const [a, b] of pts) out.push(marker(shape, s.x(a), s.y(b), tone, `data-x="${a}" data-y="${b}" clip-path="url(#${clip})"`));
    }
    if (series.endLabel) {
      // Inside the box, just before the line's end: below it where the line leaves by the top.
      const [ex, ey] = pts[pts.length - 1];
      const atTop = s.y(ey) - yTop < 14;
      out.push(`<text class="end-label" data-id="${escapeXml(series.id)}" x="${fmt(s.x(ex) - 4)}" y="${fmt(atTop ? yTop + 12 : s.y(ey) - 4)}" font-size="11" font-weight="bold" text-anchor="end" fill="${tone}">${escapeXml(series.id)}</text>`);
    }
    const key = series.style === 'points' ? `${shape === 'square' ? '[]' : shape === 'triangle' ? '/\\' : 'o'} ` : series.style === 'dashed' ? '- - ' : series.style === 'dotted' ? '.... ' : '—— ';
    labelY = keyText(out, x1 + 8, labelY, key + series.label, tone);
  }
  for (const [i, c] of (chart.cursors ?? []).entries()) {
    const tone = TONES[c.tone ?? 'measured'];
    const x = s.x(c.x);
    out.push(`<line class="cursor" data-id="${escapeXml(c.id)}" data-x="${c.x}" x1="${fmt(x)}" y1="${fmt(yTop)}" x2="${fmt(x)}" y2="${fmt(yBot)}" stroke="${tone}" stroke-width="2" clip-path="url(#${clip})"/>`);
    // Labelled at the foot of the box, clear of the marks' tags near the top; one line each.
    out.push(`<text x="${fmt(x + 4)}" y="${fmt(yBot - 6 - 14 * i)}" font-size="11" font-weight="bold" fill="${tone}">${escapeXml(c.label)}</text>`);
  }
  for (const m of chart.marks ?? []) {
    const tone = TONES[m.tone ?? 'measured'];
    const x = s.x(m.x);
    const y = s.y(m.y);
    if (m.span) {
      out.push(`<line class="span" data-id="${escapeXml(m.id)}" data-from="${m.span[0]}" data-to="${m.span[1]}" x1="${fmt(s.x(m.span[0]))}" y1="${fmt(y)}" x2="${fmt(s.x(m.span[1]))}" y2="${fmt(y)}" stroke="${tone}" stroke-width="3" clip-path="url(#${clip})"/>`);
    }
    out.push(`<g class="mark" data-id="${escapeXml(m.id)}" data-x="${m.x}" data-y="${m.y}">${bigMarker(m.shape, x, y, tone)}</g>`);
    out.push(`<text x="${fmt(x + 6)}" y="${fmt(y - 6)}" font-size="11" font-weight="bold" fill="${tone}">${escapeXml(m.tag)}</text>`);
  }
  let noteY = L.height - 4;
  for (const m of chart.marks ?? []) {
    for (const [i, line] of wrapWords(`${m.tag}: ${m.label}`, WRAP_CHARS).entries()) {
      noteY += NOTE_LINE_PX;
      out.push(`<text x="${L.left + (i > 0 ? 20 : 0)}" y="${fmt(noteY)}" font-size="11" fill="${TONES[m.tone ?? 'measured']}">${escapeXml(line)}</text>`);
    }
  }
  const notes = (chart.notes ?? []).flatMap((n) => wrapWords(n, WRAP_CHARS));
  for (const note of notes) {
    noteY += NOTE_LINE_PX;
    out.push(`<text x="${L.left}" y="${fmt(noteY)}" font-size="11">${escapeXml(note)}</text>`);
  }
  const height = noteY + 10;
  return { svg: `<g transform="translate(0 ${offsetY})">${out.join('')}</g>`, height };
}

/** A figure of charts stacked top to bottom, with a title and a caution line at the foot. */
export function renderFigure(title: string, charts: Chart[], footer: string[] = [], options: { idPrefix?: string } = {}): string {
  // Ids (patterns, clips) are prefixed so several figures can sit in one page.
  const pre = options.idPrefix ? `${options.idPrefix.replace(/[^A-Za-z0-9_-]/g, '_')}-` : '';
  const parts: string[] = [];
  let y = 30;
  charts.forEach((chart, i) => {
    const g = chartGroup(chart, y, String(i), pre);
    parts.push(g.svg);
    y += g.height;
  });
  for (const line of footer.flatMap((f) => wrapWords(f, WRAP_CHARS))) {
    y += NOTE_LINE_PX;
    parts.push(`<text x="10" y="${fmt(y)}" font-size="11" font-style="italic">${escapeXml(line)}</text>`);
  }
  const height = y + 10;
  const defs =
    '<defs>' +
    `<pattern id="${pre}hatch-up" width="6" height="6" patternUnits="userSpaceOnUse" patternTransform="rotate(45)"><line x1="0" y1="0" x2="0" y2="6" stroke="#9a9a9a" stroke-width="1.2"/></pattern>` +
    `<pattern id="${pre}hatch-down" width="6" height="6" patternUnits="userSpaceOnUse" patternTransform="rotate(-45)"><line x1="0" y1="0" x2="0" y2="6" stroke="#5a5a5a" stroke-width="1.2"/></pattern>` +
    '</defs>';
  return (
    `<svg xmlns="http://www.w3.org/2000/svg" width="${LAYOUT.width}" height="${fmt(height)}" viewBox="0 0 ${LAYOUT.width} ${fmt(height)}" font-family="sans-serif">` +
    `${defs}<rect width="100%" height="100%" fill="#ffffff"/>` +
    `<text x="10" y="20" font-size="15" font-weight="bold">${escapeXml(title)}</text>${parts.join('')}</svg>\n`
  );
}
