/**
 * Runs one period of a switching circuit from a given state and records it as a chain of exact
 * segments and switching instants, with what each instant's timing depends on. Shooting (the
 * monodromy) and the sampled-data frequency response are both computed from this chain.
 */
import {
  CircuitModel,
  Simulation,
  type CircuitSpec,
  type ControlContext,
  type Controller,
  type RunResult,
  type TraceListener,
} from '@edgewise/engine';

/** A switching circuit with its control: what every analysis of a run takes. A {@link ClosedStage} fits. */
export interface SwitchingSystem {
  readonly circuit: CircuitSpec | CircuitModel;
  /** Makes a fresh controller for one run. */
  readonly createController: () => Controller;
  /** Time base of the controller's clock (the switching period for fixed-frequency control), seconds. */
  readonly timeBaseS: number;
}

/**
 * Where one period ends (the Poincare section).
 * - `clock`: after `cycles` periods of the time base (fixed-frequency control; cycles > 1 looks for
 *   period-k orbits).
 * - `gate-on`: at the next turn-on of `gate` (variable-frequency control: constant on-time,
 *   hysteretic); the period is then an unknown and comes out of the analysis.
 */
export type Section =
  | { readonly kind: 'clock'; readonly cycles?: number }
  | {
      readonly kind: 'gate-on';
      readonly gate: string;
      /** Give up when no turn-on came within this time, seconds (default 100 time bases). */
      readonly maxPeriodS?: number;
    };

/** What the time of a switching instant depends on. */
export type InstantTiming =
  | { readonly kind: 'fixed' }
  /** A guard crossing; `row` is the guard over w = [x; u] in the topology before. */
  | { readonly kind: 'guard'; readonly row: Float64Array }
  /** A timer started (with `after`) at an earlier instant: it moves with that instant. */
  | { readonly kind: 'timer'; readonly origin: number };

/** One exact segment of the chain. */
export interface ChainSegment {
  readonly kind: 'segment';
  readonly key: number;
  readonly startS: number;
  readonly durationS: number;
  /** State w = [x; u] at the segment start. */
  readonly w0: Float64Array;
}

/** One switching instant of the chain (every event at the same time merged). */
export interface ChainInstant {
  readonly kind: 'instant';
  /** Index among the instants of the chain. */
  readonly index: number;
  readonly timeS: number;
  readonly timing: InstantTiming;
  /** Topology before and after. */
  readonly before: number;
  readonly after: number;
  readonly wBefore: Float64Array;
  readonly wAfter: Float64Array;
  /** States overwritten by the controller (treated as set to constants). */
  readonly resets: readonly number[];
}

/** The chain of one period. */
export interface Chain {
  readonly items: readonly (ChainSegment | ChainInstant)[];
  readonly periodS: number;
  readonly nx: number;
  readonly n: number;
  readonly run: RunResult;
}

interface PendingInstant {
  timeS: number;
  timing: InstantTiming | null;
  before: number;
  wBefore: Float64Array;
  resets: number[];
  index: number;
}

/** Tag the tracer uses for its own boundary timers (kept away from controllers' small tags). */
export const TRACER_TAG = -987_654_321;

/** Receives the controller events a {@link TimingController} passes through (an object, not closures: see below). */
export interface TimingListener {
  controllerEvent(ctx: ControlContext, tag: number): void;
}

/**
 * The context the inner controller sees: every call passes through, and timers and gate edges
 * are noted on the way. A module-level class rather than an object literal of closures: our
 * runtime wraps every closure creation in a naming helper, and one context per traced period
 * made of ~20 closures dominated the cost of shooting.
 */
class TimingContext implements ControlContext {
  constructor(
    private readonly ctx: ControlContext,
    private readonly tc: TimingController,
  ) {}
  get timeS(): number {
    return this.ctx.timeS;
  }
  get cycle(): number {
    return this.ctx.cycle;
  }
  get offsetS(): number {
    return this.ctx.offsetS;
  }
  get timeBaseS(): number {
    return this.ctx.timeBaseS;
  }
  signal(name: string): number {
    return this.ctx.signal(name);
  }
  read(h: number): number {
    return this.ctx.read(h);
  }
  gate(name: string): number {
    return this.ctx.gate(name);
  }
  setGate(g: number, on: boolean): void {
    const ctx = this.ctx, tc = this.tc;
    if (ctx.isGateOn(g) !== on) {
      tc.gateEdge?.(g, on, ctx.timeS);
      if (on && g === tc.sectionGate && !tc.inStart) tc.sectionHit = true;
    }
    ctx.setGate(g, on);
  }
  isGateOn(g: number): boolean {
    return this.ctx.isGateOn(g);
  }
  at(tag: number, cycle: number, offsetS: number): void {
    this.tc.timerOrigin.set(tag, -1);
    this.ctx.at(tag, cycle, offsetS);
  }
  after(tag: number, delayS: number): void {
    const tc = this.tc;
    tc.timerOrigin.set(tag, tc.inStart || tc.currentFixed ? -1 : tc.currentInstant);
    this.ctx.after(tag, delayS);
  }
  cancel(tag: number): void {
    this.tc.timerOrigin.delete(tag);
    this.ctx.cancel(tag);
  }
  guard(spec: Parameters<ControlContext['guard']>[0]): number {
    return this.ctx.guard(spec);
  }
  arm(g: number, tag: number): void {
    this.ctx.arm(g, tag);
  }
  disarm(g: number): void {
    this.ctx.disarm(g);
  }
  block(id: string): number {
    return this.ctx.block(id);
  }
  setBlockState(b: number, value: number, index?: number): void {
    this.ctx.setBlockState(b, value, index);
  }
  stop(message: string): void {
    this.ctx.stop(message);
  }
}

/**
 * Wraps a controller so that timers know which instant started them and turn-ons of a gate can
 * end the run. Every call is passed through unchanged otherwise.
 */
export class TimingController implements Controller {
  private proxy: ControlContext | null = null;
  /** true while the inner controller's start runs */
  inStart = false;
  /** timer tag -> index of the instant that started it (-1: fixed time) */
  readonly timerOrigin = new Map<number, number>();
  /** set by the tracer: index of the instant being handled and whether its time is fixed */
  currentInstant = -1;
  currentFixed = true;
  sectionGate = -1;
  sectionHit = false;
  stopAtSection = false;
  /** told of every controller event other than the tracer's own (before the inner controller) */
  listener: TimingListener | null = null;
  /** called for every controller event other than the tracer's own */
  onControllerEvent: ((ctx: ControlContext, tag: number) => void) | null = null;
  /** called for the tracer's own timers */
  onOwnTimer: ((ctx: ControlContext) => void) | null = null;
  gateEdge: ((gate: number, on: boolean, timeS: number) => void) | null = null;
  sectionGateName: string | null = null;
  /** called at the start with the engine's context (before the inner controller starts) */
  onStart: ((ctx: ControlContext) => void) | null = null;

  constructor(private readonly inner: Controller) {}

  start(ctx: ControlContext): void {
    this.proxy = new TimingContext(ctx, this);
    if (this.sectionGateName !== null) this.sectionGate = ctx.gate(this.sectionGateName);
    this.inStart = true;
    this.onStart?.(ctx);
    try {
      this.inner.start(this.proxy);
    } finally {
      this.inStart = false;
    }
  }

  onEvent(ctx: ControlContext, tag: number): void {
    if (tag === TRACER_TAG) {
      this.onOwnTimer?.(ctx);
      return;
    }
    this.listener?.controllerEvent(ctx, tag);
    this.onControllerEvent?.(ctx, tag);
    this.inner.onEvent(this.proxy!, tag);
    if (this.sectionHit && this.stopAtSection) ctx.stop('reached the section (gate turn-on)');
  }
}

/** Throws a RangeError naming the field when a section is malformed. */
export function validateSection(section: Section): void {
  if (section?.kind === 'clock') {
    const cycles = section.cycles ?? 1;
    if (!(Number.isInteger(cycles) && cycles >= 1)) throw new RangeError(`section.cycles must be an integer >= 1, got ${String(cycles)}`);
  } else if (section?.kind === 'gate-on') {
    if (typeof section.gate !== 'string' || section.gate.length === 0) throw new RangeError('section.gate must name a gate');
    if (section.maxPeriodS !== undefined && !(section.maxPeriodS > 0 && Number.isFinite(section.maxPeriodS))) {
      throw new RangeError(`section.maxPeriodS must be a time > 0 s, got ${String(section.maxPeriodS)}`);
    }
  } else {
    throw new RangeError(`section.kind must be "clock" or "gate-on", got ${JSON.stringify((section as { kind?: unknown })?.kind)}`);
  }
}

/** The model of a system, built once per analysis so topologies and propagators are shared. */
export function modelOf(sys: SwitchingSystem): CircuitModel {
  return sys.circuit instanceof CircuitModel ? sys.circuit : new CircuitModel(sys.circuit);
}

/** Top nx rows of expm(M h) for a topology, from the engine's propagator cache when present. */
export function propagator(model: CircuitModel, key: number, h: number): Float64Array {
  const t = model.topology(key);
  let E = t.cache.get(h);
  if (E === undefined) {
    E = t.computeE(h);
    // share it with the engine's propagator cache (same content: top rows of expm(M h)), bounded
    // like the engine's own default so Newton trials with new durations cannot grow it without end
    if (t.cache.size < 256) t.cache.set(h, E);
  }
  return E;
}

/** f = M w (top nx rows): the state derivative in a topology. */
export function derivative(model: CircuitModel, key: number, w: Float64Array): Float64Array {
  const t = model.topology(key);
  const nx = t.nx, n = t.n, m = t.m;
  const f = new Float64Array(nx);
  for (let i = 0; i < nx; i++) {
    let s = 0;
    for (let j = 0; j < n; j++) s += m[i * n + j]! * w[j]!;
    f[i] = s;
  }
  return f;
}

/**
 * Records one period as a chain: the engine's trace listener and the timing controller's
 * listener in one object (methods, no per-period closures).
 */
class ChainTracer implements TraceListener, TimingListener {
  readonly items: (ChainSegment | ChainInstant)[] = [];
  private instants = 0;
  pending: PendingInstant | null = null;
  /** state at the end of the last segment (before the jumps of an instant) */
  wEnd: Float64Array;
  keyEnd = -1;

  constructor(
    private readonly model: CircuitModel,
    private readonly tc: TimingController,
    private readonly nx: number,
    private readonly n: number,
    w0: Float64Array,
  ) {
    this.wEnd = new Float64Array(w0);
    // instants at t = 0 (controller start) are fixed
    this.pending = { timeS: 0, timing: { kind: 'fixed' }, before: -1, wBefore: new Float64Array(w0), resets: [], index: 0 };
    tc.currentInstant = 0;
    tc.currentFixed = true;
  }

  private open(timeS: number): PendingInstant {
    const p = this.pending;
    if (p !== null && p.timeS === timeS) return p;
    if (p !== null) this.close(p.before, this.wEnd);
    const q: PendingInstant = { timeS, timing: null, before: this.keyEnd, wBefore: new Float64Array(this.wEnd), resets: [], index: this.instants };
    this.pending = q;
    return q;
  }

  close(after: number, wAfter: Float64Array): void {
    const p = this.pending!;
    this.pending = null;
    this.items.push({
      kind: 'instant', index: p.index, timeS: p.timeS, timing: p.timing ?? { kind: 'fixed' },
      before: p.before < 0 ? after : p.before, after, wBefore: p.wBefore, wAfter: new Float64Array(wAfter), resets: p.resets,
    });
    this.instants++;
  }

  /** Closes the period at its end state. */
  finish(run: RunResult): void {
    const items = this.items;
    if (this.pending !== null) this.close(run.topologyKey, run.state);
    else if (items[items.length - 1]?.kind === 'segment') {
      // the period ended without any event at its end (cannot happen with a stop event, kept for safety)
      this.pending = { timeS: run.timeS, timing: { kind: 'fixed' }, before: this.keyEnd, wBefore: new Float64Array(this.wEnd), resets: [], index: this.instants };
      this.close(run.topologyKey, run.state);
    }
  }

  segment(key: number, h: number, wStart: Float64Array): void {
    if (h <= 0) return;
    const items = this.items, nx = this.nx, n = this.n;
    if (this.pending !== null) this.close(key, wStart);
    else if (items.length === 0) {
      // no event at the start: still record the (fixed) start instant so resets apply
      this.pending = { timeS: 0, timing: { kind: 'fixed' }, before: key, wBefore: new Float64Array(wStart), resets: [], index: this.instants };
      this.close(key, wStart);
    }
    const last = items[items.length - 1];
    const startS = last === undefined ? 0 : last.kind === 'instant' ? last.timeS : last.startS + last.durationS;
    items.push({ kind: 'segment', key, startS, durationS: h, w0: new Float64Array(wStart) });
    const E = propagator(this.model, key, h);
    const w1 = new Float64Array(n);
    for (let i = 0; i < nx; i++) {
      let s = 0;
      for (let j = 0; j < n; j++) s += E[i * n + j]! * wStart[j]!;
      w1[i] = s;
    }
    for (let j = nx; j < n; j++) w1[j] = wStart[j]!;
    this.wEnd = w1;
    this.keyEnd = key;
  }

  guard(info: { readonly timeS: number; readonly before: number; readonly row: Float64Array }): void {
    const p = this.open(info.timeS);
    if (p.timing === null || p.timing.kind === 'fixed') p.timing = { kind: 'guard', row: new Float64Array(info.row) };
    if (p.before < 0 || this.items.length === 0) p.before = info.before;
    this.tc.currentInstant = p.index;
    this.tc.currentFixed = false;
  }

  switched(timeS: number): void {
    this.open(timeS);
  }

  reset(timeS: number, stateIndex: number): void {
    const p = this.open(timeS);
    if (!p.resets.includes(stateIndex)) p.resets.push(stateIndex);
  }

  controllerEvent(ctx: ControlContext, tag: number): void {
    const tc = this.tc;
    const p = this.open(ctx.timeS);
    if (p.timing === null) {
      const origin = tc.timerOrigin.get(tag);
      p.timing = origin === undefined || origin < 0 ? { kind: 'fixed' } : { kind: 'timer', origin };
    }
    tc.currentInstant = p.index;
    tc.currentFixed = p.timing.kind === 'fixed';
  }
}

/**
 * Runs one period (to the section) from state `w0` with a fresh controller and records the chain.
 * Throws an Error naming the cause when the run fails or never reaches the section.
 */
export function traceCycle(model: CircuitModel, sys: SwitchingSystem, section: Section, w0: Float64Array): Chain {
  const nx = model.circuit.nx, n = nx + model.circuit.nu;
  validateSection(section);
  const tc = new TimingController(sys.createController());
  const tracer = new ChainTracer(model, tc, nx, n, w0);
  tc.listener = tracer;
  let stopS: number;
  if (section.kind === 'clock') {
    stopS = (section.cycles ?? 1) * sys.timeBaseS;
  } else {
    tc.sectionGateName = section.gate;
    tc.stopAtSection = true;
    stopS = section.maxPeriodS ?? 100 * sys.timeBaseS;
  }
  const sim = new Simulation(model, { stopS, timeBaseS: sys.timeBaseS, controller: tc, initialState: w0, trace: tracer });
  const run = sim.run();
  if (run.status === 'failed') throw new Error(`the run of one period failed: ${run.message}`);
  if (section.kind === 'gate-on' && !tc.sectionHit) {
    throw new Error(`no turn-on of gate "${section.gate}" within ${stopS} s (section.maxPeriodS): the switching stopped or the period is longer`);
  }
  tracer.finish(run);
  return { items: tracer.items, periodS: run.timeS, nx, n, run };
}
