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

/**
 * Wraps a controller so that timers know which instant started them and turn-ons of a gate can
 * end the run. Every call is passed through unchanged otherwise.
 */
export class TimingController implements Controller {
  private proxy: ControlContext | null = null;
  private inStart = false;
  /** timer tag -> index of the instant that started it (-1: fixed time) */
  readonly timerOrigin = new Map<number, number>();
  /** set by the tracer: index of the instant being handled and whether its time is fixed */
  currentInstant = -1;
  currentFixed = true;
  sectionGate = -1;
  sectionHit = false;
  stopAtSection = false;
  /** called for every controller event other than the tracer's own */
  onControllerEvent: ((ctx: ControlContext, tag: number) => void) | null = null;
  /** called for the tracer's own timers */
  onOwnTimer: ((ctx: ControlContext) => void) | null = null;
  gateEdge: ((gate: number, on: boolean, timeS: number) => void) | null = null;
  sectionGateName: string | null = null;
  /** called at the start with the engine's context (before the inner controller starts) */
  onStart: ((ctx: ControlContext) => void) | null = null;

  constructor(private readonly inner: Controller) {}

  private wrap(ctx: ControlContext): ControlContext {
    // eslint-disable-next-line @typescript-eslint/no-this-alias
    const self = this;
    return {
      get timeS() {
        return ctx.timeS;
      },
      get cycle() {
        return ctx.cycle;
      },
      get offsetS() {
        return ctx.offsetS;
      },
      get timeBaseS() {
        return ctx.timeBaseS;
      },
      signal: (name) => ctx.signal(name),
      read: (h) => ctx.read(h),
      gate: (name) => ctx.gate(name),
      setGate(g, on) {
        const was = ctx.isGateOn(g);
        if (was !== on) {
          self.gateEdge?.(g, on, ctx.timeS);
          if (on && g === self.sectionGate && !self.inStart) self.sectionHit = true;
        }
        ctx.setGate(g, on);
      },
      isGateOn: (g) => ctx.isGateOn(g),
      at(tag, cycle, offsetS) {
        self.timerOrigin.set(tag, -1);
        ctx.at(tag, cycle, offsetS);
      },
      after(tag, delayS) {
        self.timerOrigin.set(tag, self.inStart || self.currentFixed ? -1 : self.currentInstant);
        ctx.after(tag, delayS);
      },
      cancel(tag) {
        self.timerOrigin.delete(tag);
        ctx.cancel(tag);
      },
      guard: (spec) => ctx.guard(spec),
      arm: (g, tag) => ctx.arm(g, tag),
      disarm: (g) => ctx.disarm(g),
      block: (id) => ctx.block(id),
      setBlockState: (b, v, i) => ctx.setBlockState(b, v, i),
      stop: (m) => ctx.stop(m),
    };
  }

  start(ctx: ControlContext): void {
    this.proxy = this.wrap(ctx);
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
 * Runs one period (to the section) from state `w0` with a fresh controller and records the chain.
 * Throws an Error naming the cause when the run fails or never reaches the section.
 */
export function traceCycle(model: CircuitModel, sys: SwitchingSystem, section: Section, w0: Float64Array): Chain {
  const nx = model.circuit.nx, n = nx + model.circuit.nu;
  const tc = new TimingController(sys.createController());
  const items: (ChainSegment | ChainInstant)[] = [];
  let instants = 0;
  let pending: PendingInstant | null = null;
  // state at the end of the last segment (before the jumps of an instant)
  let wEnd = new Float64Array(w0);
  let keyEnd = -1;

  const open = (timeS: number): PendingInstant => {
    if (pending !== null && pending.timeS === timeS) return pending;
    if (pending !== null) close(pending.before, wEnd);
    pending = { timeS, timing: null, before: keyEnd, wBefore: new Float64Array(wEnd), resets: [], index: instants };
    return pending;
  };
  const close = (after: number, wAfter: Float64Array): void => {
    const p = pending!;
    pending = null;
    items.push({
      kind: 'instant', index: p.index, timeS: p.timeS, timing: p.timing ?? { kind: 'fixed' },
      before: p.before < 0 ? after : p.before, after, wBefore: p.wBefore, wAfter: new Float64Array(wAfter), resets: p.resets,
    });
    instants++;
  };

  const trace: TraceListener = {
    segment(key, h, wStart) {
      if (h <= 0) return;
      if (pending !== null) close(key, wStart);
      else if (items.length === 0) {
        // no event at the start: still record the (fixed) start instant so resets apply
        pending = { timeS: 0, timing: { kind: 'fixed' }, before: key, wBefore: new Float64Array(wStart), resets: [], index: instants };
        close(key, wStart);
      }
      const last = items[items.length - 1];
      const startS = last === undefined ? 0 : last.kind === 'instant' ? last.timeS : last.startS + last.durationS;
      items.push({ kind: 'segment', key, startS, durationS: h, w0: new Float64Array(wStart) });
      const E = propagator(model, key, h);
      const w1 = new Float64Array(n);
      for (let i = 0; i < nx; i++) {
        let s = 0;
        for (let j = 0; j < n; j++) s += E[i * n + j]! * wStart[j]!;
        w1[i] = s;
      }
      for (let j = nx; j < n; j++) w1[j] = wStart[j]!;
      wEnd = w1;
      keyEnd = key;
    },
    guard(info) {
      const p = open(info.timeS);
      if (p.timing === null || p.timing.kind === 'fixed') p.timing = { kind: 'guard', row: new Float64Array(info.row) };
      if (p.before < 0 || items.length === 0) p.before = info.before;
      tc.currentInstant = p.index;
      tc.currentFixed = false;
    },
    switched(timeS) {
      open(timeS);
    },
    reset(timeS, stateIndex) {
      const p = open(timeS);
      if (!p.resets.includes(stateIndex)) p.resets.push(stateIndex);
    },
  };
  tc.onControllerEvent = (ctx, tag) => {
    const p = open(ctx.timeS);
    if (p.timing === null) {
      const origin = tc.timerOrigin.get(tag);
      p.timing = origin === undefined || origin < 0 ? { kind: 'fixed' } : { kind: 'timer', origin };
    }
    tc.currentInstant = p.index;
    tc.currentFixed = p.timing.kind === 'fixed';
  };
  let stopS: number;
  validateSection(section);
  if (section.kind === 'clock') {
    stopS = (section.cycles ?? 1) * sys.timeBaseS;
  } else {
    tc.sectionGateName = section.gate;
    tc.stopAtSection = true;
    stopS = section.maxPeriodS ?? 100 * sys.timeBaseS;
  }
  // instants at t = 0 (controller start) are fixed
  pending = { timeS: 0, timing: { kind: 'fixed' }, before: -1, wBefore: new Float64Array(w0), resets: [], index: 0 };
  tc.currentInstant = 0;
  tc.currentFixed = true;
  const sim = new Simulation(model, { stopS, timeBaseS: sys.timeBaseS, controller: tc, initialState: w0, trace });
  const run = sim.run();
  if (run.status === 'failed') throw new Error(`the run of one period failed: ${run.message}`);
  if (section.kind === 'gate-on' && !tc.sectionHit) {
    throw new Error(`no turn-on of gate "${section.gate}" within ${stopS} s (section.maxPeriodS): the switching stopped or the period is longer`);
  }
  if (pending !== null) close(run.topologyKey, run.state);
  else if (items[items.length - 1]?.kind === 'segment') {
    // the period ended without any event at its end (cannot happen with a stop event, kept for safety)
    pending = { timeS: run.timeS, timing: { kind: 'fixed' }, before: keyEnd, wBefore: new Float64Array(wEnd), resets: [], index: instants };
    close(run.topologyKey, run.state);
  }
  return { items, periodS: run.timeS, nx, n, run };
}
