/**
 * What a person sees while the demo runs, fed with the agent's messages as they arrive.
 *
 *   terminal  a status panel redrawn in place (cursor up, clear to end of screen, redraw), with
 *             alarm events and notes printed above it, where they scroll away like a log;
 *   plain     (pipes, CI) one status line every STATUS_EVERY_S of data and whenever the speed
 *             state or an alarm's state changes, and every alarm event;
 *   both      a line when an order enters or leaves a band (the quick passes that raise nothing
 *             are part of the story);
 *   json      every message as one JSON line {"topic","message"}, nothing else on this stream.
 */
import type { IdentifiedRecord } from '../identification/identifiedRecord.ts';
import type { TransientRecord } from '../transients/transientRecord.ts';
import type { AlarmMessage, LifecycleMessage, StateMessage } from '../advisory/messages.ts';
import { alarmEventLines, learningLines, bandEntryLine, bandExitLine, panelLines, statusLine, storyKey, summaryLines, wrap, type RunInfo, type SummaryInput } from './demoText.ts';

export type ViewMode = 'terminal' | 'plain' | 'json';

export interface DemoViewOptions {
  out: { write(chunk: string): unknown };
  mode: ViewMode;
  /** Terminal width, for wrapping and for keeping panel lines from wrapping. */
  columns?: number;
}

/** Plain mode: a status line at least every this many seconds of data. */
const STATUS_EVERY_S = 5;
/** The lead of a note line, under whose end its wrapped text continues: a data time or a label. */
const LEAD = /^\s*(?:\+\d+(?:\.\d+)? s\s+|[a-z]+\s{2,})?/;
/** Terminal mode: at most one redraw per this many ms. */
const REDRAW_MS = 100;

const CURSOR_HIDE = '\x1b[?25l';
const CURSOR_SHOW = '\x1b[?25h';
const CLEAR_TO_END = '\x1b[0J';

export class DemoView {
  private readonly out: DemoViewOptions['out'];
  private readonly mode: ViewMode;
  private readonly width: number;
  private run: RunInfo | null = null;
  private state: StateMessage | null = null;
  private agentState = 'starting';
  private readonly inBand = new Map<string, { component: string; sinceS: number }>();
  /** component/order pairs raised and not cleared yet. */
  private readonly raised = new Set<string>();
  private lastKey = '';
  private lastLineSlot = -1;
  private drawnLines = 0;
  private pendingLog: string[] = [];
  private redrawTimer: NodeJS.Timeout | null = null;
  private finished = false;

  constructor(opts: DemoViewOptions) {
    this.out = opts.out;
    this.mode = opts.mode;
    this.width = Math.min(opts.columns ?? 100, 120);
    if (this.mode === 'terminal') this.out.write(CURSOR_HIDE);
  }

  /** Lines about the demo itself (what started, where the log is), before the run. */
  intro(lines: string[]): void {
    if (this.mode === 'json') return;
    this.log(lines.flatMap((l) => this.fit(l)));
  }

  setRun(run: RunInfo): void {
    this.run = run;
  }

  onState(s: StateMessage): void {
    this.state = s;
    const notes: string[] = [];
    for (const o of s.orders) {
      const seen = this.inBand.get(o.order);
      const inside = o.position === 'inside' && o.nearest_component !== null;
      if (seen && (!inside || seen.component !== o.nearest_component)) {
        this.inBand.delete(o.order);
        if (this.run) notes.push(bandExitLine(o.order, seen.component, s.t_s - seen.sinceS, s, this.run, this.raised.has(`${seen.component}/${o.order}`)));
      }
      if (inside && !this.inBand.has(o.order)) {
        this.inBand.set(o.order, { component: o.nearest_component as string, sinceS: s.t_s });
        if (this.run) notes.push(bandEntryLine(o, s, this.run));
      }
    }
    if (this.mode !== 'json' && notes.length > 0) this.log(notes.flatMap((l) => this.fit(l)));
    if (this.mode === 'terminal') this.scheduleRedraw();
    else if (this.mode === 'plain' && this.run) {
      const key = storyKey(s);
      const slot = Math.floor((s.t_s - this.run.startS) / STATUS_EVERY_S);
      if (key !== this.lastKey || slot > this.lastLineSlot) this.log([statusLine(s, this.run)]);
      this.lastKey = key;
      this.lastLineSlot = slot;
    }
  }

  onAlarm(m: AlarmMessage | LifecycleMessage): void {
    if (m.event === 'raise') this.raised.add(`${m.component}/${m.order}`);
    if (m.event === 'clear') this.raised.delete(`${m.component}/${m.order}`);
    if (this.mode === 'json' || !this.run) return;
    this.log(alarmEventLines(m, this.run, this.width));
  }

  /** A run-up or coast-down the agent recorded, or a band it measured from them. */
  onLearning(m: TransientRecord | IdentifiedRecord): void {
    if (this.mode === 'json' || !this.run) return;
    this.log(learningLines(m, this.run, this.width));
  }

  onPresence(state: string): void {
    this.agentState = state;
    if (this.mode === 'terminal') this.scheduleRedraw();
  }

  /** A raw message, for json mode. */
  onRaw(topic: string, message: unknown): void {
    if (this.mode === 'json') this.out.write(`${JSON.stringify({ topic, message })}\n`);
  }

  /** A note from the demo or the agent's log, shown like an event. */
  note(text: string): void {
    if (this.mode === 'json') return;
    this.log(this.fit(text));
  }

  /** Last panel, then the summary; the view writes nothing afterwards. */
  finish(summary: SummaryInput): void {
    if (this.finished) return;
    this.finished = true;
    if (this.redrawTimer) clearTimeout(this.redrawTimer);
    this.redrawTimer = null;
    if (this.mode === 'json') {
      this.out.write(`${JSON.stringify({ topic: null, message: { kind: 'demo-summary', ...summaryJson(summary) } })}\n`);
      return;
    }
    if (this.mode === 'terminal') this.redraw();
    this.drawnLines = 0; // the last panel stays on screen above the summary
    this.write(['', ...summaryLines(summary, this.width)]);
    if (this.mode === 'terminal') this.out.write(CURSOR_SHOW);
  }

  /** Gives the cursor back without a summary (a failed start). */
  abandon(): void {
    if (this.finished) return;
    this.finished = true;
    if (this.redrawTimer) clearTimeout(this.redrawTimer);
    if (this.mode === 'terminal') this.out.write(CURSOR_SHOW);
  }

  /** A long line wrapped under its own text, after its lead ("  +26.0 s  ", "  broker   "). */
  private fit(line: string): string[] {
    if (line.length < this.width) return [line];
    const lead = (LEAD.exec(line) as RegExpExecArray)[0];
    const wrapped = wrap(line.slice(lead.length), this.width, ' '.repeat(lead.length));
    wrapped[0] = lead + wrapped[0].slice(lead.length);
    return wrapped;
  }

  private log(lines: string[]): void {
    if (this.finished) return;
    if (this.mode !== 'terminal') {
      this.write(lines);
      return;
    }
    this.pendingLog.push(...lines);
    this.redraw();
  }

  private write(lines: string[]): void {
    this.out.write(lines.map((l) => `${l}\n`).join(''));
  }

  private scheduleRedraw(): void {
    if (this.redrawTimer || this.finished) return;
    this.redrawTimer = setTimeout(() => {
      this.redrawTimer = null;
      this.redraw();
    }, REDRAW_MS);
  }

  private redraw(): void {
    let text = this.drawnLines > 0 ? `\x1b[${this.drawnLines}A\r${CLEAR_TO_END}` : '';
    for (const l of this.pendingLog) text += `${l}\n`;
    this.pendingLog = [];
    const panel = this.run ? panelLines(this.state, this.run, this.inBand, this.agentState) : [];
    // A panel line that wrapped would throw off the cursor-up count of the next redraw.
    for (const l of panel) text += `${l.length >= this.width ? `${l.slice(0, this.width - 2)}~` : l}\n`;
    this.drawnLines = panel.length;
    this.out.write(text);
  }
}

function summaryJson(x: SummaryInput) {
  return {
    asset: x.run.asset.id,
    run_start_s: x.run.startS,
    duration_s: x.run.durationS,
    data_s: x.dataS,
    wall_s: x.wallS,
    stopped_early: x.aborted,
    blocks_published: x.blocksPublished,
    events: x.alarms.map((a) => ({ event: a.event, component: a.component, order: a.order, t_s: a.t_s, at_s: a.t_s - x.run.startS, priority: a.priority })),
    exposure: x.lastState?.exposure ?? [],
    still_active: x.lastState?.active ?? [],
    presence: x.presence,
    log: x.logPath,
    broker: x.broker,
  };
}
