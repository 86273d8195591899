import { compileCircuit, type CircuitSpec, type CompiledCircuit } from './circuit.ts';
import { SimulationError } from './errors.ts';
import { expm } from './expm.ts';
import { SignalResolver, type LinearRef, type SignalInfo } from './signals.ts';
import { buildTopology, describeKey, DURATION_SLOTS, type Topology } from './topology.ts';

/** Direction of a guard crossing. */
export type GuardDirection = 'rising' | 'falling' | 'either';

/** A guard: fires when sum(gain * signal) - threshold crosses zero in the given direction. */
export interface GuardSpec {
  /** A single signal name (gain 1) ... */
  readonly signal?: string;
  /** ... or a linear combination of signals. */
  readonly terms?: readonly { readonly signal: string; readonly gain: number }[];
  /** Threshold in the unit of the combination (default 0). */
  readonly threshold?: number;
  readonly direction: GuardDirection;
}

/**
 * What a controller may do at an event. Handles (numbers) are obtained once in `start` and
 * used in `onEvent`; reading and setting through handles allocates nothing.
 */
export interface ControlContext {
  /** Absolute time now, seconds. */
  readonly timeS: number;
  /** Index of the current time-base period (see {@link RunOptions.timeBaseS}). */
  readonly cycle: number;
  /** Offset within the current time-base period, seconds. */
  readonly offsetS: number;
  /** Length of the time-base period, seconds. */
  readonly timeBaseS: number;
  /** Handle of a named signal (throws on unknown names). */
  signal(name: string): number;
  /** Value of a signal now, in the topology in force just before the event. */
  read(signal: number): number;
  /** Handle of a gate signal. */
  gate(name: string): number;
  setGate(gate: number, on: boolean): void;
  isGateOn(gate: number): boolean;
  /** Schedules timer `tag` at cycle * timeBaseS + offsetS (drift free); replaces a pending timer with the same tag. */
  at(tag: number, cycle: number, offsetS: number): void;
  /** Schedules timer `tag` delayS seconds from now; replaces a pending timer with the same tag. */
  after(tag: number, delayS: number): void;
  cancel(tag: number): void;
  /** Defines a guard (only in `start`); returns its handle. */
  guard(spec: GuardSpec): number;
  /** Arms a guard: when it fires, onEvent receives `tag`. */
  arm(guard: number, tag: number): void;
  disarm(guard: number): void;
  /** Handle of a block's state (first state index) by block id. */
  block(id: string): number;
  /** Overwrites state `index` of a block (0 for ramps). */
  setBlockState(block: number, value: number, index?: number): void;
  /** Ends the run after this event with status "stopped". */
  stop(message: string): void;
}

/** Control logic driven by events. */
export interface Controller {
  /** Called once at t = 0 before the first segment. */
  start(ctx: ControlContext): void;
  /** Called for each timer and armed guard of this controller, with its tag. */
  onEvent(ctx: ControlContext, tag: number): void;
}

/** Kinds of recorded samples. */
export const SampleKind = {
  /** A point of the uniform grid, evaluated exactly from the segment solution. */
  Grid: 0,
  /** An event instant, in the topology before the event. */
  Before: 1,
  /** An event instant, in the topology after the event. */
  After: 2,
} as const;
export type SampleKind = (typeof SampleKind)[keyof typeof SampleKind];

/** Receives samples as the run streams them. `values` is reused: copy what you keep. */
export interface SampleSink {
  sample(timeS: number, values: Float64Array, topologyKey: number, kind: SampleKind): void;
}

/** Low-level observer of every segment and event (used by analyses for exact Jacobians). */
export interface TraceListener {
  /** A segment of `durationS` in topology `key`, starting from state `w0` (do not keep). */
  segment?(key: number, durationS: number, w0: Float64Array): void;
  /** A guard fired: `guardRow` over w in topology `before`; `which` is 'device' or 'controller'. */
  guard?(info: { readonly timeS: number; readonly before: number; readonly row: Float64Array; readonly which: 'device' | 'controller'; readonly index: number }): void;
  /** The topology changed at an event (after consistent switching), with the state then. */
  switched?(timeS: number, before: number, after: number, w: Float64Array): void;
  /** A controller overwrote a state at an event. */
  reset?(timeS: number, stateIndex: number, value: number): void;
}

/** An integral accumulated exactly over the run: integral of a (times b when given) dt. */
export interface IntegralSpec {
  readonly name: string;
  readonly of: string;
  readonly times?: string;
}

/** Numerical settings (all optional; defaults documented). */
export interface EngineSettings {
  /** Currents below this magnitude count as zero in consistent switching, amperes (default 1e-9). */
  readonly currentTolA?: number;
  /** Diode voltages within this of the forward voltage count as not forward-biased, volts (default 1e-9). */
  readonly voltageTolV?: number;
  /** Events allowed at one instant before the run fails with "chattering" (default 200). */
  readonly maxEventsPerInstant?: number;
  /** Device flips allowed in one consistent-switching step (default 4 * devices + 8). */
  readonly maxSwitchIterations?: number;
  /** Cache segment propagators (default true; turning it off is for testing). */
  readonly cachePropagators?: boolean;
  /** Largest number of cached durations per topology (default 256). */
  readonly maxCachedDurations?: number;
}

/** Options of one run. */
export interface RunOptions {
  /** Stop time, seconds. */
  readonly stopS: number;
  /** Time-base period for drift-free scheduling, seconds (default: stopS). Set it to the switching period. */
  readonly timeBaseS?: number;
  readonly controller?: Controller;
  /** Signals to record (names). */
  readonly record?: readonly string[];
  readonly sink?: SampleSink;
  /** Uniform grid step for recorded samples, seconds (none by default). */
  readonly gridS?: number;
  /** Record from this time on, seconds (default 0). */
  readonly recordFromS?: number;
  /** Record event points (default true when a sink is given). */
  readonly recordEvents?: boolean;
  readonly integrals?: readonly IntegralSpec[];
  /** Initial values by state or input name (default: from the circuit description). */
  readonly initialState?: Readonly<Record<string, number>> | Float64Array;
  readonly settings?: EngineSettings;
  readonly trace?: TraceListener;
}

/** Counters of a run. */
export interface RunCounters {
  segments: number;
  events: number;
  guardEvents: number;
  topologies: number;
  propagatorCacheHits: number;
  propagatorCacheMisses: number;
  taylorSegments: number;
  exponentials: number;
  /** guard crossings located by a short step from the guard's anchor (the rest by a scan) */
  anchoredLocations: number;
}

/** Outcome of a run: a value, not an exception. */
export interface RunResult {
  readonly status: 'finished' | 'stopped' | 'failed';
  readonly message: string;
  readonly error?: SimulationError;
  /** Time reached, seconds. */
  readonly timeS: number;
  /** Final extended state [x; u]. */
  readonly state: Float64Array;
  readonly stateNames: readonly string[];
  readonly counters: RunCounters;
  /** Values of the requested integrals by name. */
  readonly integrals: Readonly<Record<string, number>>;
  /** Final topology key and its description. */
  readonly topologyKey: number;
  readonly topology: string;
}

// Queue entry kinds, numbered in their order at one instant: source steps, then timers, then the stop.
const KIND_STEP = 0;
const KIND_TIMER = 1;
const KIND_STOP = 2;

const TAYLOR_MAX = 40;

/** Scratch for hashing a duration's bits (one per module: never in use twice at once). */
const DUR_F = new Float64Array(1);
const DUR_I = new Int32Array(DUR_F.buffer);
const DUR_SHIFT = 32 - Math.log2(DURATION_SLOTS);

/** The error of an invalid `at` call (kept out of the hot method). */
function badTimer(tag: number, cycle: number, offsetS: number, nowS: number): RangeError {
  if (!Number.isInteger(cycle) || !Number.isFinite(offsetS)) return new RangeError(`timer ${tag}: cycle must be an integer and offsetS finite, got ${String(cycle)}, ${String(offsetS)}`);
  return new RangeError(`timer ${tag}: scheduled in the past (cycle ${cycle} + ${offsetS} s is before t = ${nowS} s)`);
}

/**
 * out[i] = sum_j E[i n + j] w[j] for the nx top rows (the sums in the order of a plain loop
 * from s = 0, so that every size gives the same bits). Four and six columns, the common small
 * circuits, avoid the inner loop.
 */
function topRows(E: Float64Array, nx: number, n: number, w: Float64Array, out: Float64Array): void {
  if (n === 4) {
    const a0 = w[0]!, a1 = w[1]!, a2 = w[2]!, a3 = w[3]!;
    for (let i = 0, o = 0; i < nx; i++, o += 4) {
      out[i] = 0 + E[o]! * a0 + E[o + 1]! * a1 + E[o + 2]! * a2 + E[o + 3]! * a3;
    }
  } else if (n === 6) {
    const a0 = w[0]!, a1 = w[1]!, a2 = w[2]!, a3 = w[3]!, a4 = w[4]!, a5 = w[5]!;
    for (let i = 0, o = 0; i < nx; i++, o += 6) {
      out[i] = 0 + E[o]! * a0 + E[o + 1]! * a1 + E[o + 2]! * a2 + E[o + 3]! * a3 + E[o + 4]! * a4 + E[o + 5]! * a5;
    }
  } else {
    for (let i = 0, o = 0; i < nx; i++, o += n) {
      let s = 0;
      for (let j = 0; j < n; j++) s += E[o + j]! * w[j]!;
      out[i] = s;
    }
  }
}

/** Float64 views carved in order from one zeroed buffer of the given size in bytes. */
class Arena {
  private readonly buf: ArrayBuffer;
  private at = 0;
  constructor(bytes: number) {
    this.buf = new ArrayBuffer(bytes);
  }
  f64(length: number): Float64Array {
    const a = new Float64Array(this.buf, this.at, length);
    this.at += 8 * length;
    return a;
  }
}

/** A copy of a typed array with twice the length (the event queue grows rarely). */
function grown<T extends Float64Array | Int32Array>(a: T): T {
  const b = new (a.constructor as new (n: number) => T)(a.length * 2);
  b.set(a);
  return b;
}

/**
 * Number of Taylor terms giving a truncation below 2e-17 (relative) for rho = ||A|| h <= 1:
 * the smallest k >= 2 with rho^k / k! < 2e-17, the term built factor by factor. The
 * definition; the simulator looks the same number up in {@link taylorOrder}.
 */
export function taylorOrderByTerms(rhoSigned: number): number {
  const rho = Math.abs(rhoSigned); // a backward step needs the same order
  if (rho === 0) return 1;
  let term = 1;
  for (let k = 1; k <= TAYLOR_MAX; k++) {
    term *= rho / k;
    if (term < 2e-17 && k >= 2) return k;
  }
  return TAYLOR_MAX;
}

/**
 * ORDER_BOUND[K]: the smallest double rho whose order exceeds K, for K = 2 .. TAYLOR_MAX - 1.
 * Each term built factor by factor is non-decreasing in rho (so is every correctly rounded
 * factor), hence so is the order, and bisection on the doubles found each bound exactly; a test
 * checks every one against the definition on both of its sides.
 */
// prettier-ignore
const ORDER_BOUND = Float64Array.of(
  Infinity, Infinity, 6.324555320336759e-9, 0.000004932424148660941, 0.00014801656089845708,
  0.0011913578981670918, 0.004932424148660941, 0.01391078071480448, 0.03078355801572517,
  0.0578509288716415, 0.09684546814614294, 0.14891072359220597, 0.2146745592799427,
  0.29435405568156886, 0.38785926282834515, 0.4948823600613839, 0.6149688235402054,
  0.7475717020114355, 0.8920917044411818, 1.0479060512750957, 1.2143887369312414,
  1.3909243797689896, 1.57691736563874, 1.7717975850014434, 1.9750237361287328,
  2.1860849127779165, 2.404501002079106, 2.6298222744573887, 2.8616284409590795,
  3.0995273751393726, 3.343153639492196, 3.5921669147716258, 3.846250400351922,
  4.105109231945333, 4.368468947290386, 4.63607401918354, 4.907686467241055,
  5.18308455415813, 5.462061568329734, 5.744424692037712, Infinity,
);

/** A copy of the bounds (for tests). */
export function taylorOrderBounds(): Float64Array {
  return ORDER_BOUND.slice();
}

/** taylorOrderByTerms(rho) by comparisons with the bounds (the same number, without the
 * chain of divisions that the duration of every located segment would pay). The search starts
 * at `near` (the order of the last duration in the same topology, which the next one rarely
 * leaves) and walks up or down: order K holds on [ORDER_BOUND[K - 1], ORDER_BOUND[K]). */
export function taylorOrder(rhoSigned: number, near = 2): number {
  const rho = Math.abs(rhoSigned);
  if (rho === 0) return 1;
  let K = near > 2 ? (near < TAYLOR_MAX ? near : TAYLOR_MAX) : 2;
  if (rho >= ORDER_BOUND[K]!) {
    do K++;
    while (K < TAYLOR_MAX && rho >= ORDER_BOUND[K]!);
  } else while (K > 2 && rho < ORDER_BOUND[K - 1]!) K--;
  return K;
}

/** The compiled model shared by runs: circuit, signals and the topology cache. */
export class CircuitModel {
  readonly circuit: CompiledCircuit;
  readonly signals: SignalResolver;
  private readonly topos = new Map<number, Topology>();
  private readonly probes = new Map<number, Topology>();
  private readonly failed = new Map<number, SimulationError>();
  constructor(spec: CircuitSpec | CompiledCircuit) {
    this.circuit = 'branches' in spec ? spec : compileCircuit(spec);
    this.signals = new SignalResolver(this.circuit);
  }
  /** Topology for a key (built once and cached). Throws SimulationError for ill-posed topologies. */
  topology(key: number): Topology {
    let t = this.topos.get(key);
    if (t === undefined) {
      // ill-posed topologies are remembered so that a recurring one costs no rebuild
      const bad = this.failed.get(key);
      if (bad !== undefined) throw bad;
      try {
        t = buildTopology(this.circuit, this.signals, key);
      } catch (err) {
        if (err instanceof SimulationError) this.failed.set(key, err);
        throw err;
      }
      this.topos.set(key, t);
    }
    return t;
  }
  /** Topology with open devices given a probe resistance (for interrupted currents). */
  probe(key: number): Topology {
    let t = this.probes.get(key);
    if (t === undefined) {
      t = buildTopology(this.circuit, this.signals, key, true);
      this.probes.set(key, t);
    }
    return t;
  }
  get topologyCount(): number {
    return this.topos.size;
  }
  /** Every measurable signal with its unit. */
  listSignals(): readonly SignalInfo[] {
    return this.signals.list;
  }
  /** Linear reference of a signal (throws with the list of known names when unknown). */
  resolve(name: string): LinearRef {
    return this.signals.resolve(name);
  }
}

interface ActiveGuard {
  row: Float64Array;
  drow: Float64Array;
  d4row: Float64Array;
  /** sums of |row_j|, |drow_j| and |(row M^2)_j|, for the screens' bounds */
  rnorm: number;
  dnorm: number;
  d2norm: number;
  /** the anchor of located crossings: a duration and its propagator (null until the first
   * crossing is located), and the last crossing's offset in the segment */
  anchorH: number;
  anchorE: Float64Array | null;
  lastRoot: number;
  dir: number; // +1 rising, -1 falling, 0 either
  owner: number; // >= 0 controller guard index, < 0: -(device+1)
}

/**
 * A run that can be advanced event by event. `simulate()` is a short loop over `step()`.
 */
export class Simulation {
  readonly model: CircuitModel;
  readonly options: RunOptions;
  status: 'running' | 'finished' | 'stopped' | 'failed' = 'running';
  message = '';
  error: SimulationError | undefined;
  readonly counters: RunCounters = {
    segments: 0, events: 0, guardEvents: 0, topologies: 0,
    propagatorCacheHits: 0, propagatorCacheMisses: 0, taylorSegments: 0, exponentials: 0, anchoredLocations: 0,
  };

  private readonly c: CompiledCircuit;
  private readonly nx: number;
  private readonly n: number;
  private readonly tb: number;
  private readonly stopCycle: number;
  private readonly stopOff: number;
  private cyc = 0;
  private off = 0;
  private key = 0;
  private topo!: Topology;
  private readonly w: Float64Array;
  private readonly w1: Float64Array;
  private readonly wtmp: Float64Array;
  private readonly taylorV: Float64Array;
  private readonly polyC: Float64Array;
  /** scratch of splitAt (its callers may pass wtmp as the output) */
  private readonly splitTmp: Float64Array;
  private readonly locWa: Float64Array;
  private readonly locWb: Float64Array;
  /** the state at a located crossing, and at the earliest one of the segment (swapped, not copied) */
  private locFound: Float64Array;
  private locBest: Float64Array;
  /** the duration argument of propagate and taylor (a double argument to a call that is not
   * inlined would be boxed on the heap) */
  private readonly hArg: Float64Array;
  /** arguments of maybeRising (0-5) and of locate (6, 7), the time locate found (8), the
   * time of the earliest guard crossing in the segment (9), and the bound exp(normM h)
   * ||w0||_inf of the state over the segment (10) */
  private readonly screen: Float64Array;
  // settings
  private readonly iTol: number;
  private readonly vTol: number;
  private readonly maxPerInstant: number;
  private readonly maxFlips: number;
  private readonly useCache: boolean;
  private readonly maxCached: number;
  // event queue (small), sorted latest first: the next event is at qLen - 1
  /** entry i at 4 i: cycle, offset, kind, tag (one array: each array a loop touches costs its
   * own checks at every access) */
  private q: Float64Array;
  private qLen = 0;
  /** queue changes recorded, not yet applied (see push): kind, tag, cycle, offset */
  private pend: Float64Array;
  private pLen = 0;
  // gates
  private readonly gateMask: Int32Array;
  private readonly diodeCount: number;
  /** device index and forward voltage of each diode, in device order (consistent switching visits only these) */
  private readonly diodeIdx: Int32Array;
  private readonly diodeVf: Float64Array;
  /** topologies by key for circuits with at most 16 devices (a direct index beats a Map lookup) */
  private readonly topoTable: (Topology | undefined)[] | null;
  /** active guard list by topology key and the arm key it was built for (same size limit) */
  private readonly activeDense: (ActiveGuard[] | undefined)[] | null;
  private readonly activeDenseArm: Float64Array;
  private turnedOff = 0;
  // guards
  private readonly guardRefs: LinearRef[] = [];
  private readonly guardDir: number[] = [];
  private guardArmed: Int32Array = new Int32Array(0);
  private guardTag: Float64Array = new Float64Array(0);
  private active: ActiveGuard[] = [];
  private activeDirty = true;
  /** no diodes and no controller guards (known after start): no topology has an active guard */
  private guardless = false;
  /** bit set of armed controller guards (guards beyond 30 fall back to a version counter) */
  private armKey = 0;
  private readonly activeCache = new Map<number, Map<number, ActiveGuard[]>>();
  private readonly guardRowCache = new Map<number, (ActiveGuard | undefined)[]>();
  // recording
  private readonly recRefs: LinearRef[];
  private readonly recRows = new Map<number, Float64Array[]>();
  private readonly recValues: Float64Array;
  private readonly recordEvents: boolean;
  /** a trace, integrals or a grid watch the segments */
  private readonly observed: boolean;
  /** two or four states and two inputs, cached propagators, no observers: the commonest
   * segment is written out in advance() */
  private readonly smallPlain: boolean;
  /** a trace of switching or recorded event points */
  private readonly switchWatched: boolean;
  /** no diodes, a dense topology table, no observers and no sink: switching is a lookup */
  private readonly plainSwitching: boolean;
  private readonly gridS: number;
  private readonly recordFrom: number;
  private gridIndex = 0;
  // integrals
  private readonly intRefs: { a: LinearRef; b: LinearRef | null }[];
  private readonly intValues: Float64Array;
  private readonly intRows = new Map<number, { a: Float64Array; b: Float64Array | null }[]>();
  private readonly intCache = new Map<number, Map<number, { L: Float64Array; G: (Float64Array | null)[] }>>();
  // controller
  private readonly ctrl: Controller | undefined;
  private readonly ctx: ControlContext;
  private inStart = false;
  private stopRequest: string | null = null;
  private instantCount = 0;
  /** owners of the guards fired at this instant, for the chattering message (a Set would reallocate on every clear) */
  private instantGuards = new Int32Array(8);
  private instantGuardCount = 0;
  /** topology keys met in one consistent-switching step (reused: settle runs at every event) */
  private visited = new Int32Array(8);
  private visitedCount = 0;
  private readonly stepTimes: { atS: number; input: number; value: number }[];

  constructor(model: CircuitModel | CircuitSpec, options: RunOptions) {
    this.model = model instanceof CircuitModel ? model : new CircuitModel(model);
    this.options = options;
    const c = (this.c = this.model.circuit);
    this.nx = c.nx;
    this.n = c.nx + c.nu;
    const n = this.n;
    if (!(typeof options?.stopS === 'number' && Number.isFinite(options.stopS) && options.stopS >= 0)) {
      throw new RangeError(`stopS must be a finite time >= 0 s, got ${String(options?.stopS)}`);
    }
    const tb = options.timeBaseS ?? (options.stopS > 0 ? options.stopS : 1);
    if (!(Number.isFinite(tb) && tb > 0)) throw new RangeError(`timeBaseS must be a finite time > 0 s, got ${String(tb)}`);
    this.tb = tb;
    this.stopCycle = Math.floor(options.stopS / tb);
    this.stopOff = options.stopS - this.stopCycle * tb;
    const s = options.settings ?? {};
    this.iTol = s.currentTolA ?? 1e-9;
    this.vTol = s.voltageTolV ?? 1e-9;
    this.maxPerInstant = s.maxEventsPerInstant ?? 200;
    this.maxFlips = s.maxSwitchIterations ?? 4 * c.devices.length + 8;
    this.useCache = s.cachePropagators ?? true;
    this.maxCached = s.maxCachedDurations ?? 256;
    this.w = new Float64Array(c.initialState);
    // The run's scratch arrays are views of one buffer: a typed array over 64 bytes gets its own
    // off-heap store, about 1-2 us each, which was most of the set-up of a short run.
    const dense = c.devices.length <= 16;
    // (the size is the sum of the views' lengths below, in their order)
    const arena = new Arena(8 * (TAYLOR_MAX + 1 + 1 + 11 + 64 + 32 + (7 + TAYLOR_MAX + 1) * n + (dense ? 1 << c.devices.length : 0)));
    this.polyC = arena.f64(TAYLOR_MAX + 1);
    this.hArg = arena.f64(1);
    this.screen = arena.f64(11);
    this.q = arena.f64(64);
    this.pend = arena.f64(32);
    this.w1 = arena.f64(n);
    this.wtmp = arena.f64(n);
    this.taylorV = arena.f64((TAYLOR_MAX + 1) * n);
    this.splitTmp = arena.f64(n);
    this.locWa = arena.f64(n);
    this.locWb = arena.f64(n);
    this.locFound = arena.f64(n);
    this.locBest = arena.f64(n);
    this.activeDenseArm = arena.f64(dense ? 1 << c.devices.length : 0).fill(-1);
    if (options.initialState !== undefined) this.applyInitial(options.initialState);

    this.gateMask = new Int32Array(c.gates.length);
    c.devices.forEach((d, i) => {
      if (d.kind === 'channel') {
        this.gateMask[d.gate]! |= 1 << i;
        const spec = c.spec.elements.find((e) => e.id === d.element);
        if (spec?.kind === 'switch' && spec.initiallyOn) {
          this.key |= 1 << i;
        }
      }
    });
    this.diodeCount = c.devices.filter((d) => d.kind === 'diode').length;
    this.diodeIdx = new Int32Array(this.diodeCount);
    this.diodeVf = new Float64Array(this.diodeCount);
    for (let d = 0, q = 0; d < c.devices.length; d++) {
      const dev = c.devices[d]!;
      if (dev.kind !== 'diode') continue;
      this.diodeIdx[q] = d;
      this.diodeVf[q++] = c.branches[dev.branch]!.forwardVolts;
    }
    this.topoTable = c.devices.length <= 16 ? new Array<Topology | undefined>(1 << c.devices.length).fill(undefined) : null;
    this.activeDense = c.devices.length <= 16 ? new Array<ActiveGuard[] | undefined>(1 << c.devices.length).fill(undefined) : null;

    const rec = options.record ?? [];
    this.recRefs = rec.map((name) => this.resolveOrThrow(name, 'record'));
    this.recValues = new Float64Array(rec.length);
    this.recordEvents = options.recordEvents ?? options.sink !== undefined;
    this.gridS = options.gridS ?? 0;
    if (options.gridS !== undefined && !(Number.isFinite(options.gridS) && options.gridS > 0)) throw new RangeError(`gridS must be a time > 0 s, got ${String(options.gridS)}`);
    this.recordFrom = options.recordFromS ?? 0;
    this.intRefs = (options.integrals ?? []).map((spec) => ({
      a: this.resolveOrThrow(spec.of, `integrals.${spec.name}.of`),
      b: spec.times === undefined ? null : this.resolveOrThrow(spec.times, `integrals.${spec.name}.times`),
    }));
    this.intValues = new Float64Array(this.intRefs.length);
    this.stepTimes = c.sourceSteps.slice();
    this.observed = options.trace !== undefined || this.intRefs.length !== 0 || this.gridS > 0;
    this.smallPlain = ((this.n === 4 && this.nx === 2) || (this.n === 6 && this.nx === 4)) && !this.observed && this.useCache;
    this.switchWatched = options.trace?.switched !== undefined || this.recordEvents;
    this.plainSwitching = this.diodeCount === 0 && this.topoTable !== null && !this.observed && !this.recordEvents;
    this.ctrl = options.controller;
    this.ctx = this.makeContext();

    try {
      for (let i = 0; i < this.stepTimes.length; i++) {
        const st = this.stepTimes[i]!;
        if (st.atS === 0) this.w[this.nx + st.input] = st.value;
        else {
          const k = Math.floor(st.atS / tb);
          this.push(k, st.atS - k * tb, KIND_STEP, i);
        }
      }
      this.push(this.stopCycle, this.stopOff, KIND_STOP, 0);
      if (this.ctrl) {
        this.inStart = true;
        this.ctrl.start(this.ctx);
        this.inStart = false;
      }
      this.guardless = this.diodeCount === 0 && this.guardRefs.length === 0;
      this.topo = this.settle();
      this.counters.topologies = this.model.topologyCount;
      if (this.recordEvents && this.inRecordWindow(0)) this.emit(SampleKind.After);
      if (this.gridS > 0) this.gridIndex = Math.max(0, Math.ceil(this.recordFrom / this.gridS - 1e-12));
      this.emitGridUpTo(0, 0);
      if (options.stopS === 0) this.finish('finished', 'reached the stop time');
    } catch (err) {
      this.fail(err);
    }
  }

  private resolveOrThrow(name: string, where: string): LinearRef {
    try {
      return this.model.resolve(name);
    } catch (err) {
      throw new RangeError(`${where}: ${(err as Error).message}`);
    }
  }

  private applyInitial(init: Readonly<Record<string, number>> | Float64Array): void {
    const c = this.c;
    if (init instanceof Float64Array) {
      if (init.length !== this.n && init.length !== this.nx) throw new RangeError(`initialState must have ${this.nx} or ${this.n} entries, got ${init.length}`);
      this.w.set(init);
      return;
    }
    for (const [name, v] of Object.entries(init)) {
      if (!Number.isFinite(v)) throw new RangeError(`initialState.${name} must be finite, got ${String(v)}`);
      let i = c.stateNames.indexOf(name);
      if (i < 0) {
        const alias = c.stateNames.indexOf(`${name}.charge`);
        i = alias >= 0 ? alias : c.stateNames.indexOf(`${name}.current`);
      }
      if (i < 0) {
        const u = c.inputNames.indexOf(name);
        if (u > 0) i = this.nx + u;
      }
      if (i < 0) throw new RangeError(`initialState: unknown state "${name}"; states: ${c.stateNames.join(', ')}`);
      this.w[i] = v;
    }
  }

  private lookupTopology(key: number): Topology {
    const tab = this.topoTable;
    if (tab !== null) {
      const t = tab[key];
      if (t !== undefined) return t;
      const built = this.model.topology(key);
      tab[key] = built;
      return built;
    }
    return this.model.topology(key);
  }

  /** Absolute time now, seconds. */
  get timeS(): number {
    return this.cyc * this.tb + this.off;
  }
  /** Current extended state (a live view: do not modify). */
  get state(): Float64Array {
    return this.w;
  }
  /** Current topology key. */
  get topologyKey(): number {
    return this.key;
  }

  // ----------------------------------------------------------------------------------------
  // event queue

  /**
   * Records a queue change: an entry of `kind` at (cyc, off); a timer replaces the pending timer
   * with its tag, and a timer with offset NaN only cancels. Changes are applied in order by
   * applyQueued() before the queue is next read, which gives the queue that applying them at
   * once would give; recording is small enough to be inlined into the controller's calls.
   */
  private push(cyc: number, off: number, kind: number, tag: number): void {
    const i = this.pLen;
    let p = this.pend;
    if (i === p.length) p = this.pend = grown(p);
    p[i] = kind;
    p[i + 1] = tag;
    p[i + 2] = cyc;
    p[i + 3] = off;
    this.pLen = i + 4;
  }

  /**
   * Applies the recorded queue changes. The queue is kept sorted latest first, so that the
   * earliest entry is the last one and taking it costs nothing. At one instant the kinds go in
   * their numeric order, entries of one kind in scheduling order (a new entry goes after every
   * equal one). One function on purpose: too large to be inlined, it leaves the inlining budget
   * of the event loop to the controller's calls, and takes no arguments that would be boxed.
   */
  private applyQueued(): void {
    const count = this.pLen, pend = this.pend;
    const tb = this.tb;
    const TIMER = KIND_TIMER; // a local: a module constant is reloaded at every use
    // the queue array changes only when it grows (below): read once
    let q = this.q;
    let len = this.qLen;
    for (let p = 0; p < count; p += 4) {
      const kind = pend[p]!, tag = pend[p + 1]!;
      let cyc = pend[p + 2]!, off = pend[p + 3]!;
      if (kind === TIMER) {
        // drop the pending timer with this tag, shifting the later part down to keep the order
        let i = 0;
        while (i < len && !(q[4 * i + 2] === TIMER && q[4 * i + 3] === tag)) i++;
        if (i < len) {
          for (let o = 4 * i + 4; o < 4 * len; o += 4) {
            q[o - 4] = q[o]!;
            q[o - 3] = q[o + 1]!;
            q[o - 2] = q[o + 2]!;
            q[o - 1] = q[o + 3]!;
          }
          len--;
        }
        if (off !== off) continue; // cancelled
      }
      if (4 * len === q.length) this.q = q = grown(q);
      // normalise the offset into [0, tb)
      if (off >= tb || off < 0) {
        const k = Math.floor(off / tb);
        cyc += k;
        off -= k * tb;
        if (off < 0) off = 0;
      }
      // one pass from the earliest end moves the entries due before the new one up by a slot
      let o = 4 * len;
      for (; o > 0; o -= 4) {
        const cj = q[o - 4]!, oj = q[o - 3]!, kj = q[o - 2]!;
        if (cj > cyc || (cj === cyc && (oj > off || (oj === off && kj > kind)))) break;
        q[o] = cj;
        q[o + 1] = oj;
        q[o + 2] = kj;
        q[o + 3] = q[o - 1]!;
      }
      q[o] = cyc;
      q[o + 1] = off;
      q[o + 2] = kind;
      q[o + 3] = tag;
      len++;
    }
    this.qLen = len;
    this.pLen = 0;
  }

  // ----------------------------------------------------------------------------------------
  // controller context

  /**
   * The controller context: one class for every run (a class, not an object literal with
   * accessors, and not one class per run, so that call sites in controllers stay monomorphic).
   * Declared inside Simulation so that it may use the run's private state.
   */
  private static readonly Context = class implements ControlContext {
    readonly signals: LinearRef[] = [];
    readonly rowCache = new Map<number, Float64Array[]>();
    constructor(private readonly sim: Simulation) {}
    get timeS(): number {
      return this.sim.timeS;
    }
    get cycle(): number {
      return this.sim.cyc;
    }
    get offsetS(): number {
      return this.sim.off;
    }
    get timeBaseS(): number {
      return this.sim.tb;
    }
    signal(name: string): number {
      this.signals.push(this.sim.resolveOrThrow(name, 'controller signal'));
      return this.signals.length - 1;
    }
    read(h: number): number {
      // the topology in force just before the event (gates set at this event are not yet
      // settled, and the raw key may even be ill-posed until consistent switching runs)
      const key = this.sim.topo !== undefined ? this.sim.topo.key : this.sim.key;
      let rows = this.rowCache.get(key);
      if (rows === undefined) {
        rows = [];
        this.rowCache.set(key, rows);
      }
      let r = rows[h];
      if (r === undefined) {
        const t = this.sim.model.topology(key);
        r = rows[h] = t.row(this.signals[h]!);
      }
      let s = 0;
      const w = this.sim.w;
      for (let j = 0; j < r.length; j++) s += r[j]! * w[j]!;
      return s;
    }
    gate(name: string): number {
      const g = this.sim.c.gates.indexOf(name);
      if (g < 0) throw new RangeError(`unknown gate "${name}"; gates: ${this.sim.c.gates.join(', ') || '(none)'}`);
      return g;
    }
    setGate(g: number, on: boolean): void {
      // short, so that it is inlined into the controller's event handler
      const sim = this.sim;
      const mask = sim.gateMask[g]!, key = sim.key;
      if (on) sim.key = key | mask;
      else {
        sim.turnedOff |= key & mask;
        sim.key = key & ~mask;
      }
    }
    isGateOn(g: number): boolean {
      // only setGate changes switch channel bits (consistent switching flips diodes), and it
      // sets or clears all the channels of a gate together
      return (this.sim.key & this.sim.gateMask[g]!) !== 0;
    }
    at(tag: number, cycle: number, offsetS: number): void {
      const sim = this.sim;
      // one combined test (offsetS - offsetS is 0 only for finite values), short so that it is
      // inlined; the messages are built only on failure
      if (!(Number.isInteger(cycle) && offsetS - offsetS === 0 && (cycle - sim.cyc) * sim.tb + (offsetS - sim.off) >= 0)) {
        throw badTimer(tag, cycle, offsetS, sim.timeS);
      }
      // push() written out: a call that is not inlined would box the two doubles, and whether
      // it is inlined varies from process to process
      const i = sim.pLen;
      let p = sim.pend;
      if (i === p.length) p = sim.pend = grown(p);
      p[i] = KIND_TIMER;
      p[i + 1] = tag;
      p[i + 2] = cycle;
      p[i + 3] = offsetS;
      sim.pLen = i + 4;
    }
    after(tag: number, delayS: number): void {
      const sim = this.sim;
      if (!(delayS >= 0 && delayS < Infinity)) throw new RangeError(`timer ${tag}: delay must be a finite time >= 0 s, got ${String(delayS)}`);
      sim.push(sim.cyc, sim.off + delayS, KIND_TIMER, tag);
    }
    cancel(tag: number): void {
      this.sim.push(0, Number.NaN, KIND_TIMER, tag);
    }
    guard(spec: GuardSpec): number {
      if (!this.sim.inStart) throw new Error('guards are defined in Controller.start');
      const terms = spec.terms ?? (spec.signal !== undefined ? [{ signal: spec.signal, gain: 1 }] : []);
      if (terms.length === 0) throw new RangeError('a guard needs a signal or terms');
      const mna = new Map<number, number>();
      const w = new Map<number, number>();
      for (const t of terms) {
        const r = this.sim.resolveOrThrow(t.signal, 'guard');
        r.mna.forEach((g, k) => mna.set(k, (mna.get(k) ?? 0) + g * t.gain));
        r.w.forEach((g, k) => w.set(k, (w.get(k) ?? 0) + g * t.gain));
      }
      const thr = spec.threshold ?? 0;
      if (!Number.isFinite(thr)) throw new RangeError(`guard threshold must be finite, got ${String(thr)}`);
      if (thr !== 0) w.set(this.sim.nx, (w.get(this.sim.nx) ?? 0) - thr);
      this.sim.guardRefs.push({ mna, w });
      this.sim.guardDir.push(spec.direction === 'rising' ? 1 : spec.direction === 'falling' ? -1 : 0);
      const armed = new Int32Array(this.sim.guardRefs.length);
      armed.set(this.sim.guardArmed);
      this.sim.guardArmed = armed;
      const tags = new Float64Array(this.sim.guardRefs.length);
      tags.set(this.sim.guardTag);
      this.sim.guardTag = tags;
      return this.sim.guardRefs.length - 1;
    }
    arm(g: number, tag: number): void {
      if (this.sim.guardArmed[g] !== 1 || this.sim.guardTag[g] !== tag) {
        this.sim.guardArmed[g] = 1;
        this.sim.guardTag[g] = tag;
        this.sim.activeDirty = true;
        this.sim.armKey = g < 30 ? this.sim.armKey | (1 << g) : this.sim.armKey + 2 ** 31;
      }
    }
    disarm(g: number): void {
      if (this.sim.guardArmed[g] === 1) {
        this.sim.guardArmed[g] = 0;
        this.sim.activeDirty = true;
        this.sim.armKey = g < 30 ? this.sim.armKey & ~(1 << g) : this.sim.armKey + 2 ** 31;
      }
    }
    block(id: string): number {
      const b = this.sim.c.blocks.find((x) => x.id === id);
      if (b === undefined) throw new RangeError(`unknown block "${id}"`);
      return b.firstState;
    }
    setBlockState(b: number, value: number, index = 0): void {
      if (!Number.isFinite(value)) throw new RangeError(`block state value must be finite, got ${String(value)}`);
      this.sim.w[b + index] = value;
      this.sim.options.trace?.reset?.(this.sim.timeS, b + index, value);
    }
    stop(message: string): void {
      this.sim.stopRequest = message;
    }
  };

  private makeContext(): ControlContext {
    return new Simulation.Context(this);
  }

  // ----------------------------------------------------------------------------------------
  // guards

  private guardRowsFor(t: Topology, row: Float64Array): ActiveGuard {
    const n = this.n, nx = this.nx, m = t.m;
    const mul = (r: Float64Array): Float64Array => {
      const out = new Float64Array(n);
      for (let i = 0; i < nx; i++) {
        const ri = r[i]!;
        if (ri === 0) continue;
        for (let j = 0; j < n; j++) out[j] += ri * m[i * n + j]!;
      }
      return out;
    };
    const d1 = mul(row);
    const d2 = mul(d1);
    const d4 = mul(mul(d2));
    let rnorm = 0, dnorm = 0, d2norm = 0;
    for (let j = 0; j < n; j++) {
      rnorm += Math.abs(row[j]!);
      dnorm += Math.abs(d1[j]!);
      d2norm += Math.abs(d2[j]!);
    }
    return { row, drow: d1, d4row: d4, rnorm, dnorm, d2norm, anchorH: Number.NaN, anchorE: null, lastRoot: Number.NaN, dir: 0, owner: 0 };
  }

  private rebuildActive(): void {
    const t = this.topo;
    const dense = this.activeDense;
    if (dense !== null && this.activeDenseArm[t.key] === this.armKey) {
      this.active = dense[t.key]!;
      this.activeDirty = false;
      return;
    }
    let perTopo = this.activeCache.get(t.key);
    if (perTopo === undefined) {
      perTopo = new Map();
      this.activeCache.set(t.key, perTopo);
    }
    const hit = perTopo.get(this.armKey);
    if (hit !== undefined) {
      this.active = hit;
      this.activeDirty = false;
      if (dense !== null) {
        dense[t.key] = hit;
        this.activeDenseArm[t.key] = this.armKey;
      }
      return;
    }
    // device guards depend only on the topology: kept on it, shared by every run of the model
    let dg = t.deviceGuards as ActiveGuard[] | undefined;
    if (dg === undefined) {
      dg = [];
      const c = this.c;
      for (let d = 0; d < c.devices.length; d++) {
        const dev = c.devices[d]!;
        if (dev.kind !== 'diode') continue;
        const on = (t.key >>> d) & 1;
        let g: ActiveGuard;
        if (on) {
          g = this.guardRowsFor(t, t.deviceCurrent[d]!);
          g.dir = -1;
        } else {
          const r = new Float64Array(t.deviceVoltage[d]!);
          r[this.nx]! -= c.branches[dev.branch]!.forwardVolts;
          g = this.guardRowsFor(t, r);
          g.dir = 1;
        }
        g.owner = -(d + 1);
        dg.push(g);
      }
      t.deviceGuards = dg;
    }
    const act = dg.slice();
    for (let g = 0; g < this.guardRefs.length; g++) {
      if (this.guardArmed[g] !== 1) continue;
      // controller guards belong to this run (another run of the same model may number its
      // guards differently): their rows are cached per run and topology
      let rows = this.guardRowCache.get(t.key);
      if (rows === undefined) {
        rows = [];
        this.guardRowCache.set(t.key, rows);
      }
      let base = rows[g];
      if (base === undefined) base = rows[g] = this.guardRowsFor(t, t.row(this.guardRefs[g]!));
      const ag: ActiveGuard = { ...base, dir: 0, owner: 0 };
      ag.dir = this.guardDir[g]!;
      ag.owner = g;
      act.push(ag);
    }
    this.active = act;
    this.activeDirty = false;
    if (perTopo.size > 64) perTopo.clear();
    perTopo.set(this.armKey, act);
    if (dense !== null) {
      dense[t.key] = act;
      this.activeDenseArm[t.key] = this.armKey;
    }
  }

  // ----------------------------------------------------------------------------------------
  // propagation

  /** Propagates w0 over h = hArg[0] in topology t into out (exact). */
  private propagate(t: Topology, w0: Float64Array, out: Float64Array): void {
    const n = this.n, nx = this.nx;
    const h = this.hArg[0]!;
    let E: Float64Array | null | undefined = null;
    // home slot of h in the duration tables of the topology (a hash of its bits)
    DUR_F[0] = h;
    const home = Math.imul(DUR_I[0]! ^ Math.imul(DUR_I[1]!, -1640531535), -2048144789) >>> DUR_SHIFT;
    let cslot = -1;
    if (this.useCache) {
      if (t.lastH === h) E = t.lastE;
      else {
        const keys = t.cachedKeys;
        let i = home;
        for (;;) {
          const k = keys[i]!;
          if (k === h) {
            E = t.cachedE[i];
            break;
          }
          if (k !== k) {
            cslot = i;
            break;
          }
          i = (i + 1) & (DURATION_SLOTS - 1);
        }
        // entries that others put in the Map (or that did not fit the table) are looked up there
        if (!E && t.cache.size !== t.cachedCount) E = t.cache.get(h);
        if (E) {
          t.lastH = h;
          t.lastE = E;
        }
      }
    }
    if (E) {
      this.counters.propagatorCacheHits++;
    } else {
      this.counters.propagatorCacheMisses++;
      const rho = t.normA * h;
      // A duration is cached the second time it is seen: fixed-frequency operation repeats its
      // durations every cycle, while event-terminated ones (DCM, comparators) rarely repeat and
      // are cheaper by the Taylor series (or the split below) than by a fresh exponential.
      let repeat = false;
      if (this.useCache) {
        const keys = t.seenKeys;
        let i = home;
        for (;;) {
          const k = keys[i]!;
          if (k === h) {
            repeat = true;
            break;
          }
          if (k !== k) break;
          i = (i + 1) & (DURATION_SLOTS - 1);
        }
        if (!repeat) {
          if (t.seenCount >= Math.min(4 * this.maxCached, DURATION_SLOTS / 2)) {
            keys.fill(Number.NaN);
            t.seenCount = 0;
            i = home;
          }
          keys[i] = h;
          t.seenCount++;
        }
      }
      const room = this.useCache && repeat && t.cache.size < this.maxCached;
      if (!room && rho <= 1) {
        this.taylorEnd(t, w0, out);
        this.counters.taylorSegments++;
        return;
      }
      if (room || !this.useCache) {
        E = t.computeE(h);
        this.counters.exponentials++;
        if (this.useCache) {
          t.cache.set(h, E);
          // cslot is the empty slot where the probe for h ended (h was not in the table)
          if (cslot >= 0 && t.cachedCount < DURATION_SLOTS / 2 && t.cache.size === t.cachedCount + 1) {
            t.cachedKeys[cslot] = h;
            t.cachedE[cslot] = E;
            t.cachedCount++;
          }
          t.lastH = h;
          t.lastE = E;
        }
      } else {
        this.splitAt(t, h, w0, out);
        return;
      }
    }
    topRows(E, nx, n, w0, out);
    for (let j = nx; j < n; j++) out[j] = w0[j]!;
  }

  private matvec(E: Float64Array, w0: Float64Array, out: Float64Array): void {
    const n = this.n, nx = this.nx;
    topRows(E, nx, n, w0, out);
    for (let j = nx; j < n; j++) out[j] = w0[j]!;
  }

  /**
   * Taylor series of the exact solution over h = hArg[0]: fills taylorV with
   * v_k = (h^k / k!) M^k w0 for k = 0..K, writes w(h) into out and returns K. Used only for
   * normA * h <= 1.
   */
  private taylor(t: Topology, w0: Float64Array, out: Float64Array): number {
    const n = this.n, nx = this.nx, m = t.m;
    const h = this.hArg[0]!;
    // the order of the last duration is kept on the topology: located segments repeat their
    // length every cycle, and a new length's order is searched from it
    let K = t.taylorK;
    if (t.taylorH !== h) {
      K = t.taylorK = taylorOrder(t.normA * h, K);
      t.taylorH = h;
    }
    const V = this.taylorV;
    // two states (the common small stage): the terms beyond the first written out below with
    // the matrix in locals, the same sums in the same order as the general loop
    const K2 = nx === 2 ? 1 : K;
    for (let j = 0; j < n; j++) {
      V[j] = w0[j]!;
      out[j] = w0[j]!;
    }
    for (let k = 1; k <= K2; k++) {
      const prev = (k - 1) * n;
      const cur = k * n;
      const f = h / k;
      for (let i = 0; i < nx; i++) {
        let s = 0;
        const o = i * n;
        // after the first product only the x part of the previous term is non-zero
        const lim = k === 1 ? n : nx;
        for (let j = 0; j < lim; j++) s += m[o + j]! * V[prev + j]!;
        s *= f;
        V[cur + i] = s;
        out[i]! += s;
      }
      // V[cur + j] for j >= nx stays 0 from the allocation: inputs are constant
    }
    if (K2 < K) {
      const a00 = m[0]!, a01 = m[1]!, a10 = m[n]!, a11 = m[n + 1]!;
      let v0 = V[n]!, v1 = V[n + 1]!;
      let o0 = out[0]!, o1 = out[1]!;
      for (let k = 2, cur = 2 * n; k <= K; k++, cur += n) {
        const f = h / k;
        const s0 = (0 + a00 * v0 + a01 * v1) * f;
        const s1 = (0 + a10 * v0 + a11 * v1) * f;
        V[cur] = s0;
        V[cur + 1] = s1;
        o0 += s0;
        o1 += s1;
        v0 = s0;
        v1 = s1;
      }
      out[0] = o0;
      out[1] = o1;
    }
    return K;
  }

  /**
   * The end state of taylor() alone, for callers that do not read the terms: for two states
   * and two inputs in registers, without storing them (the same sums in the same order: the
   * same bits).
   */
  private taylorEnd(t: Topology, w0: Float64Array, out: Float64Array): void {
    if (!(this.n === 4 && this.nx === 2)) {
      this.taylor(t, w0, out);
      return;
    }
    const m = t.m;
    const h = this.hArg[0]!;
    let K = t.taylorK;
    if (t.taylorH !== h) {
      K = t.taylorK = taylorOrder(t.normA * h, K);
      t.taylorH = h;
    }
    const x0 = w0[0]!, x1 = w0[1]!, u0 = w0[2]!, u1 = w0[3]!;
    let v0 = (0 + m[0]! * x0 + m[1]! * x1 + m[2]! * u0 + m[3]! * u1) * h;
    let v1 = (0 + m[4]! * x0 + m[5]! * x1 + m[6]! * u0 + m[7]! * u1) * h;
    let o0 = x0 + v0, o1 = x1 + v1;
    const a00 = m[0]!, a01 = m[1]!, a10 = m[4]!, a11 = m[5]!;
    for (let k = 2; k <= K; k++) {
      const f = h / k;
      const s0 = (0 + a00 * v0 + a01 * v1) * f;
      const s1 = (0 + a10 * v0 + a11 * v1) * f;
      o0 += s0;
      o1 += s1;
      v0 = s0;
      v1 = s1;
    }
    out[0] = o0;
    out[1] = o1;
    out[2] = u0;
    out[3] = u1;
  }

  /** Exact state at offset tau (0 <= tau) from w0 in topology t, into out. */
  private evalAt(t: Topology, tau: number, w0: Float64Array, out: Float64Array): void {
    if (tau === 0) {
      out.set(w0);
      return;
    }
    if (t.normA * tau <= 1) {
      this.hArg[0] = tau;
      this.taylorEnd(t, w0, out);
      return;
    }
    this.splitAt(t, tau, w0, out);
  }

  /**
   * Exact state at offset tau when normA * tau > 1: tau = k * baseStep + r, with E(k baseStep)
   * cached by k and the Taylor series over r (normA * r <= 1).
   */
  private splitAt(t: Topology, tau: number, w0: Float64Array, out: Float64Array): void {
    const hb = t.baseStep;
    const k = Math.floor(tau / hb);
    let Ek = t.multiples.get(k);
    if (Ek === undefined) {
      Ek = t.computeE(k * hb);
      this.counters.exponentials++;
      if (t.multiples.size > 1024) t.multiples.clear();
      t.multiples.set(k, Ek);
    }
    this.hArg[0] = tau - k * hb;
    this.taylorEnd(t, w0, this.splitTmp);
    this.matvec(Ek, this.splitTmp, out);
  }

  // ----------------------------------------------------------------------------------------
  // guard screening and location

  private static dotScale(r: Float64Array, w: Float64Array): number {
    let s = 0;
    for (let j = 0; j < r.length; j++) s += Math.abs(r[j]! * w[j]!);
    return s;
  }

  private static dot(r: Float64Array, w: Float64Array): number {
    // the smallest stage written out (the same sum in the same order)
    if (r.length === 4) return 0 + r[0]! * w[0]! + r[1]! * w[1]! + r[2]! * w[2]! + r[3]! * w[3]!;
    let s = 0;
    for (let j = 0; j < r.length; j++) s += r[j]! * w[j]!;
    return s;
  }

  /**
   * Could the function f (sign-normalised so the event is an upward crossing) have an upward
   * zero crossing in (0, h]? Uses the values and slopes at both ends, the extrema of the cubic
   * Hermite interpolant, and a bound on its error from the fourth derivative at both ends.
   */
  private static maybeRising(v: Float64Array): boolean {
    // arguments come in a scratch array: six doubles passed to a call that is not inlined would
    // each be boxed on the heap
    const f0 = v[0]!, f1 = v[1]!, d0 = v[2]!, d1 = v[3]!, e4 = v[4]!, h = v[5]!;
    if (f0 < 0 && f1 >= 0) return true;
    // Hermite cubic on s in [0, 1]: p(0) = f0, p(1) = f1, p'(0) = d0 h, p'(1) = d1 h
    const m0 = d0 * h, m1 = d1 * h;
    const bound = 2 * ((h * h * h * h) / 384) * e4 + 1e-15 * (Math.abs(f0) + Math.abs(f1));
    let lo = f0 < f1 ? f0 : f1;
    let hi = f0 < f1 ? f1 : f0;
    // stationary points: p'(s) = A s^2 + B s + C = 0 (no closures here: this runs every segment)
    const A = 6 * f0 + 3 * m0 - 6 * f1 + 3 * m1;
    const B = -6 * f0 - 4 * m0 + 6 * f1 - 2 * m1;
    const C = m0;
    let r1 = -1, r2 = -1;
    if (Math.abs(A) > 1e-300) {
      const disc = B * B - 4 * A * C;
      if (disc >= 0) {
        const sq = Math.sqrt(disc);
        r1 = (-B - sq) / (2 * A);
        r2 = (-B + sq) / (2 * A);
      }
    } else if (Math.abs(B) > 1e-300) r1 = -C / B;
    for (let q = 0; q < 2; q++) {
      const x = q === 0 ? r1 : r2;
      if (x > 0 && x < 1) {
        const x2 = x * x, x3 = x2 * x;
        const v = (2 * x3 - 3 * x2 + 1) * f0 + (x3 - 2 * x2 + x) * m0 + (-2 * x3 + 3 * x2) * f1 + (x3 - x2) * m1;
        if (v < lo) lo = v;
        if (v > hi) hi = v;
      }
    }
    if (f0 < 0) return hi + bound >= 0; // starts below: may rise to zero inside
    // starts at or above zero: an upward crossing needs a dip below zero first
    return lo - bound < 0 && f1 + bound >= 0;
  }

  /**
   * Finds the first upward zero crossing of sign * (row . w(tau)) in (0, h] on the exact
   * solution from w0 in topology t, with sign and h in screen[6] and screen[7]. Returns whether
   * it found one, with tau in screen[8] and the state there in locFound.
   * Works in pieces with normA * piece <= 1 on which the guard is the Taylor polynomial of the
   * exact solution (truncated below 1e-17), so a trial time costs a polynomial evaluation, not
   * a fresh exponential. Each piece is sampled to find the first sign change; the root is then
   * polished by safeguarded Newton on the polynomial.
   */
  private locate(t: Topology, g: ActiveGuard, w0: Float64Array, startAbove: boolean): boolean {
    const sc = this.screen;
    let r = -1;
    if (g.anchorE !== null && sc[7] === sc[5] && this.useCache) r = this.locateAnchored(t, g, w0, startAbove);
    if (r === 0) return false;
    if (r < 0 && !this.locateScan(t, g, w0, startAbove)) return false;
    // Anchor the next locations of this guard at this crossing once it has settled (the last
    // one was close) and the anchor is not: a fresh propagator, used while crossings stay near.
    const tau = sc[8]!;
    const near = Math.abs(tau - g.lastRoot) * t.normA <= 0.05;
    g.lastRoot = tau;
    if (this.useCache && near && !(Math.abs(tau - g.anchorH) * t.normA <= 0.05)) {
      g.anchorE = t.computeE(tau);
      g.anchorH = tau;
      this.counters.exponentials++;
    }
    return true;
  }

  /**
   * The guard polynomial's terms 1..K from the Taylor vectors in taylorV: polyC[k] = sign *
   * row . V_k, with the sign in screen[6]. Beyond the first term only the states are non-zero:
   * adding the zero products of the input columns would not change a sum that starts at +0.
   */
  private guardTerms(row: Float64Array, K: number): void {
    const n = this.n, nx = this.nx, V = this.taylorV, pc = this.polyC;
    const sign = this.screen[6]!;
    if (nx === 2) {
      const r0 = row[0]!, r1 = row[1]!;
      for (let k = 1, o = n; k <= K; k++, o += n) pc[k] = sign * (0 + r0 * V[o]! + r1 * V[o + 1]!);
    } else {
      for (let k = 1; k <= K; k++) {
        let s = 0;
        const o = k * n;
        for (let j = 0; j < nx; j++) s += row[j]! * V[o + j]!;
        pc[k] = sign * s;
      }
    }
  }

  /**
   * Locates the crossing from the guard's anchor, when the guard is certified monotone over
   * the segment: g' >= (g'(0) + g'(h) - h max|g''|) / 2 > 0, with max|g''| bounded by
   * |row M^2|_1 exp(normM h) ||w0||_inf (so one crossing at most, and the segment's end
   * values decide whether there is one). The state at the anchor is one product with its
   * propagator; the crossing is then a short Taylor step away (Newton on that polynomial).
   * Returns 1 (found: time in screen[8], state in locFound), 0 (certainly none) or -1 (not
   * applicable: the caller scans).
   */
  private locateAnchored(t: Topology, g: ActiveGuard, w0: Float64Array, startAbove: boolean): number {
    const sc = this.screen;
    const n = this.n, nx = this.nx;
    const sign = sc[6]!, h = sc[7]!;
    const f0 = sc[0]!, f1 = sc[1]!, d0 = sc[2]!, d1 = sc[3]!;
    if (!(d0 + d1 - h * g.d2norm * sc[10]! > 0)) return -1;
    // increasing over the segment: an upward crossing only from below zero to at or above it
    if (startAbove || f0 >= 0 || f1 < 0) return 0;
    const wa = this.locWa, row = g.row, drow = g.drow;
    const E = g.anchorE!;
    let ga = 0, da = 0;
    if (n === 4 && nx === 2) {
      // the smallest stage written out (the same sums in the same order as the loops below)
      const a0 = w0[0]!, a1 = w0[1]!, a2 = w0[2]!, a3 = w0[3]!;
      const b0 = 0 + E[0]! * a0 + E[1]! * a1 + E[2]! * a2 + E[3]! * a3;
      const b1 = 0 + E[4]! * a0 + E[5]! * a1 + E[6]! * a2 + E[7]! * a3;
      wa[0] = b0;
      wa[1] = b1;
      wa[2] = a2;
      wa[3] = a3;
      ga = 0 + row[0]! * b0 + row[1]! * b1 + row[2]! * a2 + row[3]! * a3;
      da = 0 + drow[0]! * b0 + drow[1]! * b1 + drow[2]! * a2 + drow[3]! * a3;
    } else {
      topRows(E, nx, n, w0, wa);
      for (let j = nx; j < n; j++) wa[j] = w0[j]!;
      for (let j = 0; j < n; j++) {
        ga += row[j]! * wa[j]!;
        da += drow[j]! * wa[j]!;
      }
    }
    ga *= sign;
    da *= sign;
    if (!(da > 0)) return -1;
    // twice the Newton step from the anchor spans the polynomial: the root is near s = 1/2
    const span = (-2 * ga) / da;
    if (!(Math.abs(span) * t.normA <= 0.25) || span === 0) return -1;
    if (n === 4 && nx === 2) {
      // Two states: Newton on the Taylor polynomial of the guard about the anchor, each trial
      // x evaluated by running the series at x span in registers (the state w(x) and, from
      // it, p(x) = row . w(x) and p'(x) = span drow . w(x)), so that no term is stored; the
      // last step, below 1e-9 of x, moves the state by its first-order term (the second is
      // below 1e-19 of it).
      let K = t.taylorK;
      if (t.taylorH !== span) {
        K = t.taylorK = taylorOrder(t.normA * span, K);
        t.taylorH = span;
      }
      const m = t.m;
      const a00 = m[0]!, a01 = m[1]!, a10 = m[4]!, a11 = m[5]!;
      const x0 = wa[0]!, x1 = wa[1]!, u0 = wa[2]!, u1 = wa[3]!;
      const mw0 = 0 + a00 * x0 + a01 * x1 + m[2]! * u0 + m[3]! * u1;
      const mw1 = 0 + a10 * x0 + a11 * x1 + m[6]! * u0 + m[7]! * u1;
      const r0 = row[0]!, r1 = row[1]!, r2 = row[2]!, r3 = row[3]!;
      const p0 = drow[0]!, p1 = drow[1]!, p2 = drow[2]!, p3 = drow[3]!;
      let x = 0.5;
      for (let it = 0; it < 8; it++) {
        const hs = x * span;
        let v0 = mw0 * hs, v1 = mw1 * hs;
        let y0 = x0 + v0, y1 = x1 + v1;
        for (let k = 2; k <= K; k++) {
          const f = hs / k;
          const s0 = (0 + a00 * v0 + a01 * v1) * f;
          const s1 = (0 + a10 * v0 + a11 * v1) * f;
          y0 += s0;
          y1 += s1;
          v0 = s0;
          v1 = s1;
        }
        const px = sign * (0 + r0 * y0 + r1 * y1 + r2 * u0 + r3 * u1);
        const dpx = sign * span * (0 + p0 * y0 + p1 * y1 + p2 * u0 + p3 * u1);
        if (!(dpx !== 0)) return -1;
        const step = px / dpx;
        if (!(Math.abs(step) <= 1e-9 * Math.abs(x - step))) {
          x -= step;
          continue;
        }
        x -= step;
        if (!(x >= -0.5 && x <= 1.5)) return -1;
        const tau = g.anchorH + x * span;
        if (!(tau > 0 && tau <= h)) return -1;
        const d = -step * span;
        const out = this.locFound;
        out[0] = y0 + (0 + a00 * y0 + a01 * y1 + m[2]! * u0 + m[3]! * u1) * d;
        out[1] = y1 + (0 + a10 * y0 + a11 * y1 + m[6]! * u0 + m[7]! * u1) * d;
        out[2] = u0;
        out[3] = u1;
        sc[8] = tau;
        this.counters.anchoredLocations++;
        return 1;
      }
      return -1;
    }
    const V = this.taylorV, pc = this.polyC;
    // p(s) = sum pc_k s^k: the first term is the guard at the anchor; beyond it only the
    // states are non-zero
    pc[0] = ga;
    this.hArg[0] = span;
    const K = this.taylor(t, wa, this.locWb);
    this.guardTerms(row, K);
    // Newton from s = 1/2 (increasing in s when span > 0, decreasing when the root lies before
    // the anchor). The step is a fraction normA |span| <= 1/4 of the polynomial's curvature
    // scale, so once a step is below 1e-9 the next one would be below 1e-18: converged.
    let x = 0.5;
    let done = false;
    for (let it = 0; it < 8 && !done; it++) {
      let fx = pc[K]!;
      let dx = 0;
      for (let k = K - 1; k >= 0; k--) {
        dx = dx * x + fx;
        fx = fx * x + pc[k]!;
      }
      if (dx === 0) return -1;
      const step = fx / dx;
      x -= step;
      done = Math.abs(step) <= 1e-9 * Math.abs(x);
    }
    if (!done || !(x >= -0.5 && x <= 1.5)) return -1;
    const tau = g.anchorH + x * span;
    if (!(tau > 0 && tau <= h)) return -1;
    const out = this.locFound;
    for (let j = 0; j < nx; j++) {
      let v = V[K * n + j]!;
      for (let k = K - 1; k >= 0; k--) v = v * x + V[k * n + j]!;
      out[j] = v;
    }
    for (let j = nx; j < n; j++) out[j] = w0[j]!;
    sc[8] = tau;
    this.counters.anchoredLocations++;
    return 1;
  }

  private locateScan(t: Topology, g: ActiveGuard, w0: Float64Array, startAbove: boolean): boolean {
    const n = this.n, nx = this.nx;
    const sc = this.screen;
    const sign = sc[6]!, h = sc[7]!;
    const pieceMax = t.normA > 0 ? 1 / t.normA : h;
    const wa = this.locWa, wb = this.locWb, pc = this.polyC, V = this.taylorV, row = g.row;
    for (let j = 0; j < n; j++) wa[j] = w0[j]!;
    let a = 0;
    let above = startAbove;
    for (let pieces = 0; a < h && pieces < 10_000_000; pieces++) {
      const len = Math.min(pieceMax, h - a);
      this.hArg[0] = len;
      const K = this.taylor(t, wa, wb);
      {
        let s = 0;
        for (let j = 0; j < n; j++) s += row[j]! * V[j]!;
        pc[0] = sign * s;
      }
      this.guardTerms(row, K);
      // A polynomial whose derivative keeps one sign on [0, 1] (the slope term outweighs every
      // other term's largest possible slope, k |c_k|) crosses zero at most once there: its
      // value at s = 1 (the scan's last sample, same bits) then decides the piece, and a
      // crossing is bracketed by [0, 1] without the 16-sample scan. A rigorous test on the
      // polynomial itself, so that double crossings still go to the scan.
      const f0p = pc[0]!;
      let slopeRest = 0;
      let f1p = pc[K]!;
      for (let k = K - 1; k >= 0; k--) f1p = f1p * 1 + pc[k]!;
      for (let k = 2; k <= K; k++) slopeRest += k * Math.abs(pc[k]!);
      const p1 = pc[1]!;
      const margin = slopeRest + 1e-12 * Math.abs(p1);
      const rising = p1 > margin, falling = -p1 > margin;
      let first = 1;
      if (rising || falling) {
        if (above) {
          // from at or above zero, a monotone piece has no upward crossing; it ends below
          // exactly when its last sample does
          if (f0p >= 0 || falling) {
            if (f1p < 0) above = false;
            first = 17;
          }
        } else if (falling || f1p < 0) {
          first = 17; // stays below zero over the piece
        } else {
          first = 16; // one crossing in [0, 1]: the last scan step brackets it from s = 0
        }
      }
      const SAMPLES = 16;
      let sPrev = 0;
      let fPrev = f0p;
      for (let i = first; i <= SAMPLES; i++) {
        const sx = i / SAMPLES;
        let f = pc[K]!;
        for (let k = K - 1; k >= 0; k--) f = f * sx + pc[k]!;
        if (above) {
          if (f < 0) above = false;
        } else if (f >= 0) {
          // bracket [sPrev, sx] with poly(sPrev) < 0 <= poly(sx): safeguarded Newton
          let lo = sPrev, hi = sx;
          let x = lo - (fPrev * (hi - lo)) / (f - fPrev);
          if (!(x > lo && x < hi)) x = 0.5 * (lo + hi);
          for (let it = 0; it < 100; it++) {
            let fx = pc[K]!;
            let dx = 0;
            for (let k = K - 1; k >= 0; k--) {
              dx = dx * x + fx;
              fx = fx * x + pc[k]!;
            }
            if (fx < 0) lo = x;
            else hi = x;
            let xn = dx !== 0 ? x - fx / dx : 0.5 * (lo + hi);
            if (fx === 0) {
              // An exact zero sets hi = x and every later Newton step lands on hi, so the loop
              // used to halve from the far end for dozens of steps before returning a point of
              // the final 1e-15 bracket below the zero; that bracket is taken at once (the same
              // convention: its midpoint ends the loop).
              const lo2 = x - 1e-15 * x;
              if (lo2 > lo) lo = lo2;
              xn = 0.5 * (lo + hi);
            }
            if (!(xn > lo && xn < hi)) xn = 0.5 * (lo + hi);
            const done = Math.abs(xn - x) <= 1e-15 * xn || hi - lo <= 1e-15 * hi;
            x = xn;
            if (done) break;
          }
          // the state at the root from the same Taylor vectors: sum x^k V_k
          const out = this.locFound;
          for (let j = 0; j < nx; j++) {
            let v = V[K * n + j]!;
            for (let k = K - 1; k >= 0; k--) v = v * x + V[k * n + j]!;
            out[j] = v;
          }
          // the same Horner sum for an input: zero terms, then 0 * x + w0[j] (x > 0)
          for (let j = nx; j < n; j++) out[j] = 0 + V[j]!;
          sc[8] = a + x * len;
          return true;
        }
        sPrev = sx;
        fPrev = f;
      }
      a += len;
      for (let j = 0; j < n; j++) wa[j] = wb[j]!;
    }
    return false;
  }

  // ----------------------------------------------------------------------------------------
  // consistent switching

  /** Consistent switching from the current key: flips diodes until every device agrees with the
   * state, and returns the topology it ends in. */
  private settle(): Topology {
    const w = this.w;
    this.visitedCount = 0;
    for (let iter = 0; ; iter++) {
      if (iter > this.maxFlips) this.tooManyFlips();
      let t: Topology;
      try {
        t = this.lookupTopology(this.key);
      } catch (err) {
        this.flip(this.illPosedFlip(err));
        continue;
      }
      // inductors with no path
      const held = t.heldInductors;
      if (held.length === 0 && this.diodeCount === 0) return t;
      let interrupted = -1;
      for (let i = 0; i < held.length; i++) {
        const s = held[i]!;
        if (Math.abs(w[s]!) > this.iTol) {
          interrupted = s;
          break;
        }
      }
      if (interrupted >= 0) {
        // kept on the topology: a current interrupted by a switch recurs every cycle
        let p = t.probeTopology;
        if (p === undefined) p = t.probeTopology = this.model.probe(this.key);
        const best = this.mostForwardBiased(p);
        if (best < 0) this.noFreewheelingPath(interrupted);
        this.flip(best);
        continue;
      }
      for (let i = 0; i < held.length; i++) w[held[i]!] = 0;
      let worst = -1, worstV = 0, turnOn = false;
      for (let q = 0; q < this.diodeCount; q++) {
        const d = this.diodeIdx[q]!;
        if ((this.key >>> d) & 1) {
          const i = Simulation.dot(t.deviceCurrent[d]!, w);
          if (i < -this.iTol && !turnOn && -i > worstV) {
            worst = d;
            worstV = -i;
          }
        } else {
          const v = Simulation.dot(t.deviceVoltage[d]!, w) - this.diodeVf[q]!;
          if (v > this.vTol && (!turnOn || v > worstV)) {
            worst = d;
            worstV = v;
            turnOn = true;
          }
        }
      }
      if (worst < 0) return t;
      this.flip(worst);
    }
  }

  /**
   * The diode to flip when the key is ill-posed (thrown by the topology build), or the error
   * again. A conducting diode in a zero-resistance loop closed by a switch (an ideal diode
   * rectifier when the ideal main switch turns on) commutates off at once; if the loop
   * forward-biases it instead, the flip back is caught as an inconsistent cycle. A current
   * source whose only path runs through an off diode: the diode the probe network
   * forward-biases most takes the current, as for an interrupted inductor. (Kept out of
   * settle(): its closures would make every call of settle allocate a context.)
   */
  private illPosedFlip(err: unknown): number {
    const c = this.c;
    if (err instanceof SimulationError && err.code === 'floating-current-source') {
      const best = this.mostForwardBiased(this.model.probe(this.key));
      if (best < 0) throw new SimulationError(err.code, `${err.message} at t = ${this.timeS} s (no diode can take its current)`, err.elements, this.timeS);
      return best;
    }
    const loop = err instanceof SimulationError && err.code === 'shoot-through' ? err.elements : null;
    const d = loop === null ? -1 : c.devices.findIndex((dev, i) => dev.kind === 'diode' && ((this.key >>> i) & 1) === 1 && loop.includes(dev.id));
    if (d < 0) throw err;
    return d;
  }

  /** The off diode that the probe network p forward-biases most past its threshold (by more
   * than vTol), or -1: the one to take a current that has no other path. */
  private mostForwardBiased(p: Topology): number {
    const w = this.w;
    let best = -1, bestV = this.vTol;
    for (let q = 0; q < this.diodeCount; q++) {
      const d = this.diodeIdx[q]!;
      if ((this.key >>> d) & 1) continue;
      const v = Simulation.dot(p.deviceVoltage[d]!, w) - this.diodeVf[q]!;
      if (v > bestV) {
        bestV = v;
        best = d;
      }
    }
    return best;
  }

  private tooManyFlips(): never {
    const c = this.c;
    throw new SimulationError('inconsistent-switching', `no consistent conduction state found after ${this.maxFlips} device changes at t = ${this.timeS} s (last [${describeKey(c, this.key)}])`, c.devices.map((d) => d.id), this.timeS);
  }

  /** The error for an inductor current that no device can carry (its closures live here, not
   * in settle(), whose every call would otherwise allocate the context they capture). */
  private noFreewheelingPath(state: number): never {
    const c = this.c;
    const ind = c.branches.find((b) => b.stateIndex === state)!;
    const opened = c.devices.filter((_, d) => (this.turnedOff >>> d) & 1).map((d) => d.id);
    throw new SimulationError(
      'no-freewheeling-path',
      `no freewheeling path: inductor ${ind.id} carries ${this.w[state]!.toPrecision(6)} A at t = ${this.timeS} s and ${opened.length ? `opening ${opened.join(', ')}` : 'this topology'} leaves it no path (no diode or body diode can take the current)`,
      [ind.id, ...opened],
      this.timeS,
    );
  }

  private flip(d: number): void {
    if (this.visitedCount === 0) this.visited[this.visitedCount++] = this.key;
    this.key ^= 1 << d;
    for (let i = 0; i < this.visitedCount; i++) if (this.visited[i] === this.key) this.inconsistent(d);
    if (this.visitedCount === this.visited.length) this.visited = grown(this.visited);
    this.visited[this.visitedCount++] = this.key;
  }

  private inconsistent(d: number): never {
    const v = Array.from(this.visited.subarray(0, this.visitedCount));
    const c = this.c;
    const involved = [...new Set(v.map((k) => k ^ this.key).reduce((a, b) => a | b, 0) ? c.devices.filter((_, i) => v.some((k) => ((k ^ this.key) >>> i) & 1)).map((x) => x.id) : [c.devices[d]!.id])];
    throw new SimulationError(
      'inconsistent-switching',
      `consistent switching cycles between conduction states of ${involved.join(', ')} at t = ${this.timeS} s`,
      involved,
      this.timeS,
    );
  }

  // ----------------------------------------------------------------------------------------
  // recording

  private inRecordWindow(t: number): boolean {
    return t >= this.recordFrom;
  }

  private emit(kind: SampleKind): void {
    const sink = this.options.sink;
    if (sink === undefined) return;
    this.fillValues(this.model.topology(this.key), this.w);
    sink.sample(this.timeS, this.recValues, this.key, kind);
  }

  private fillValues(t: Topology, w: Float64Array): void {
    let rows = this.recRows.get(t.key);
    if (rows === undefined) {
      rows = this.recRefs.map((r) => t.row(r));
      this.recRows.set(t.key, rows);
    }
    for (let i = 0; i < rows.length; i++) this.recValues[i] = Simulation.dot(rows[i]!, w);
  }

  /** Emits grid samples with times in (segment start, segment start + h] from w0 in topology t. */
  private emitGridUpTo(t0: number, h: number, t?: Topology, w0?: Float64Array): void {
    if (this.gridS <= 0 || this.options.sink === undefined) return;
    const sink = this.options.sink;
    for (;;) {
      const tg = this.gridIndex * this.gridS;
      if (tg > t0 + h || tg > this.options.stopS) return;
      const tau = Math.max(0, tg - t0);
      if (t === undefined || w0 === undefined) {
        this.fillValues(this.model.topology(this.key), this.w);
      } else {
        this.evalAt(t, tau, w0, this.wtmp);
        this.fillValues(t, this.wtmp);
      }
      sink.sample(tg, this.recValues, t?.key ?? this.key, SampleKind.Grid);
      this.gridIndex++;
    }
  }

  // ----------------------------------------------------------------------------------------
  // integrals (Van Loan, 1978, "Computing integrals involving the matrix exponential", with
  // the doubling G(2h) = G(h) + E(h)^T G(h) E(h) so that no growing exponential is formed)

  private accumulate(t: Topology, h: number, w0: Float64Array): void {
    if (this.intRefs.length === 0 || h <= 0) return;
    let rows = this.intRows.get(t.key);
    if (rows === undefined) {
      rows = this.intRefs.map((r) => ({ a: t.row(r.a), b: r.b ? t.row(r.b) : null }));
      this.intRows.set(t.key, rows);
    }
    // operators per (topology, duration) are cached: periodic operation repeats its durations
    let perTopo = this.intCache.get(t.key);
    if (perTopo === undefined) {
      perTopo = new Map();
      this.intCache.set(t.key, perTopo);
    }
    let ops = perTopo.get(h);
    if (ops === undefined) {
      ops = this.integralOperators(t, h, rows);
      if (perTopo.size >= this.maxCached) perTopo.clear();
      perTopo.set(h, ops);
    }
    const n = this.n;
    const L = ops.L;
    for (let q = 0; q < rows.length; q++) {
      const r = rows[q]!;
      const Gq = ops.G[q];
      let s = 0;
      if (Gq) {
        for (let i = 0; i < n; i++) {
          let row = 0;
          for (let j = 0; j < n; j++) row += Gq[i * n + j]! * w0[j]!;
          s += w0[i]! * row;
        }
      } else {
        for (let i = 0; i < n; i++) {
          let row = 0;
          for (let j = 0; j < n; j++) row += L[i * n + j]! * w0[j]!;
          s += r.a[i]! * row;
        }
      }
      this.intValues[q]! += s;
    }
  }

  /** L(h) = int_0^h E(s) ds and, per quadratic integral, G(h) = int_0^h E(s)^T Q E(s) ds. */
  private integralOperators(t: Topology, h: number, rows: { a: Float64Array; b: Float64Array | null }[]): { L: Float64Array; G: (Float64Array | null)[] } {
    const n = this.n;
    const M = t.fullM();
    let norm = 0;
    for (let i = 0; i < n; i++) {
      let s = 0;
      for (let j = 0; j < n; j++) s += Math.abs(M[i * n + j]!);
      norm = Math.max(norm, s);
    }
    const sq = norm * h > 0.5 ? Math.ceil(Math.log2((norm * h) / 0.5)) : 0;
    const h0 = h / 2 ** sq;
    // base: E0 = expm(M h0); L0 = int_0^h0 E; for each quadratic, G0 = int_0^h0 E^T Q E
    const big = new Float64Array(4 * n * n);
    const n2 = 2 * n;
    for (let i = 0; i < n; i++) for (let j = 0; j < n; j++) {
      big[i * n2 + j] = M[i * n + j]! * h0;
      if (i === j) big[i * n2 + n + j] = h0;
    }
    const F = expm(big, n2);
    this.counters.exponentials++;
    let E: Float64Array = new Float64Array(n * n);
    const L: Float64Array = new Float64Array(n * n);
    for (let i = 0; i < n; i++) for (let j = 0; j < n; j++) {
      E[i * n + j] = F[i * n2 + j]!;
      L[i * n + j] = F[i * n2 + n + j]!;
    }
    const quad = rows.map((r) => {
      if (r.b === null) return null;
      const Q = new Float64Array(n * n);
      for (let i = 0; i < n; i++) for (let j = 0; j < n; j++) Q[i * n + j] = 0.5 * (r.a[i]! * r.b[j]! + r.b[i]! * r.a[j]!);
      const C = new Float64Array(4 * n * n);
      for (let i = 0; i < n; i++) for (let j = 0; j < n; j++) {
        C[i * n2 + j] = -M[j * n + i]! * h0;
        C[i * n2 + n + j] = Q[i * n + j]! * h0;
        C[(n + i) * n2 + n + j] = M[i * n + j]! * h0;
      }
      const FC = expm(C, n2);
      this.counters.exponentials++;
      const Gm = new Float64Array(n * n);
      // G = F22^T F12
      for (let i = 0; i < n; i++) for (let j = 0; j < n; j++) {
        let s = 0;
        for (let k = 0; k < n; k++) s += FC[(n + k) * n2 + n + i]! * FC[k * n2 + n + j]!;
        Gm[i * n + j] = s;
      }
      return Gm;
    });
    const mm = (X: Float64Array, Y: Float64Array): Float64Array => {
      const Z = new Float64Array(n * n);
      for (let i = 0; i < n; i++) for (let k = 0; k < n; k++) {
        const x = X[i * n + k]!;
        if (x === 0) continue;
        for (let j = 0; j < n; j++) Z[i * n + j] += x * Y[k * n + j]!;
      }
      return Z;
    };
    const tr = (X: Float64Array): Float64Array => {
      const Z = new Float64Array(n * n);
      for (let i = 0; i < n; i++) for (let j = 0; j < n; j++) Z[i * n + j] = X[j * n + i]!;
      return Z;
    };
    for (let s = 0; s < sq; s++) {
      const EL = mm(E, L);
      for (let i = 0; i < L.length; i++) L[i] += EL[i]!;
      const Et = tr(E);
      for (let q = 0; q < quad.length; q++) {
        const Gq = quad[q];
        if (!Gq) continue;
        const add = mm(Et, mm(Gq, E));
        for (let i = 0; i < Gq.length; i++) Gq[i] += add[i]!;
      }
      E = mm(E, E);
    }
    return { L, G: quad };
  }

  // ----------------------------------------------------------------------------------------
  // the step

  private fail(err: unknown): void {
    if (err instanceof SimulationError) {
      this.error = err;
      this.finish('failed', err.message);
    } else if (err instanceof RangeError) {
      this.error = new SimulationError('controller', err.message, [], this.timeS);
      this.finish('failed', err.message);
    } else {
      const msg = err instanceof Error ? err.message : String(err);
      this.error = new SimulationError('controller', `a controller or sink callback failed at t = ${this.timeS} s: ${msg}`, [], this.timeS);
      this.finish('failed', this.error.message);
    }
  }

  private finish(status: 'finished' | 'stopped' | 'failed', message: string): void {
    this.status = status;
    this.message = message;
  }

  /**
   * Advances to the next event instant and handles every event there. Returns the status.
   */
  step(): 'running' | 'finished' | 'stopped' | 'failed' {
    if (this.status !== 'running') return this.status;
    try {
      this.advance();
    } catch (err) {
      this.fail(err);
    }
    return this.status;
  }

  /**
   * One step: propagates to the next event instant (the earlier of the next scheduled entry
   * and the first located guard crossing), handles every event there and switches. The whole
   * per-event path is in this one method and the few it calls, so that the optimiser inlines the
   * controller's calls into it; what only observers need (sink, trace, integrals, grid) sits
   * behind one flag.
   */
  private advance(): void {
    if (this.pLen !== 0) this.applyQueued();
    if (this.activeDirty) this.rebuildActive();
    const qi = this.qLen - 1;
    const c1 = this.q[4 * qi]!, o1 = this.q[4 * qi + 1]!;
    const h = (c1 - this.cyc) * this.tb + (o1 - this.off);
    const t = this.topo;
    const w0 = this.w;
    const w1 = this.w1;
    const nx = this.nx, n = this.n;
    const counters = this.counters;
    if (h > 0 && this.smallPlain && t.lastH === h && this.active.length === 0) {
      // The commonest segment of the small stages (cached propagator, nothing to screen or
      // observe) written out into the state itself, for two states and two inputs and for four
      // states and two inputs; the same sums in the same order as topRows() below.
      const E = t.lastE!;
      if (n === 4) {
        const a0 = w0[0]!, a1 = w0[1]!, a2 = w0[2]!, a3 = w0[3]!;
        const s0 = 0 + E[0]! * a0 + E[1]! * a1 + E[2]! * a2 + E[3]! * a3;
        const s1 = 0 + E[4]! * a0 + E[5]! * a1 + E[6]! * a2 + E[7]! * a3;
        if (!Number.isFinite(0 + s0 + s1)) {
          w1[0] = s0;
          w1[1] = s1;
          this.checkFinite(w1, t);
        }
        w0[0] = s0;
        w0[1] = s1;
      } else {
        const a0 = w0[0]!, a1 = w0[1]!, a2 = w0[2]!, a3 = w0[3]!, a4 = w0[4]!, a5 = w0[5]!;
        const s0 = 0 + E[0]! * a0 + E[1]! * a1 + E[2]! * a2 + E[3]! * a3 + E[4]! * a4 + E[5]! * a5;
        const s1 = 0 + E[6]! * a0 + E[7]! * a1 + E[8]! * a2 + E[9]! * a3 + E[10]! * a4 + E[11]! * a5;
        const s2 = 0 + E[12]! * a0 + E[13]! * a1 + E[14]! * a2 + E[15]! * a3 + E[16]! * a4 + E[17]! * a5;
        const s3 = 0 + E[18]! * a0 + E[19]! * a1 + E[20]! * a2 + E[21]! * a3 + E[22]! * a4 + E[23]! * a5;
        if (!Number.isFinite(0 + s0 + s1 + s2 + s3)) {
          w1[0] = s0;
          w1[1] = s1;
          w1[2] = s2;
          w1[3] = s3;
          this.checkFinite(w1, t);
        }
        w0[0] = s0;
        w0[1] = s1;
        w0[2] = s2;
        w0[3] = s3;
      }
      counters.propagatorCacheHits++;
      counters.segments++;
      this.cyc = c1;
      this.off = o1;
      this.instantCount = 1;
      this.instantGuardCount = 0;
      if (this.recordEvents && this.inRecordWindow(this.timeS)) this.emit(SampleKind.Before);
    } else if (h > 0) {
      const E = t.lastH === h && this.useCache ? t.lastE! : null;
      if (E !== null) {
        counters.propagatorCacheHits++;
        if (n === 4 && nx === 2) {
          // the smallest stage written out (same sums, same order as topRows)
          const a0 = w0[0]!, a1 = w0[1]!, a2 = w0[2]!, a3 = w0[3]!;
          w1[0] = 0 + E[0]! * a0 + E[1]! * a1 + E[2]! * a2 + E[3]! * a3;
          w1[1] = 0 + E[4]! * a0 + E[5]! * a1 + E[6]! * a2 + E[7]! * a3;
          w1[2] = a2;
          w1[3] = a3;
        } else {
          topRows(E, nx, n, w0, w1);
          for (let j = nx; j < n; j++) w1[j] = w0[j]!;
        }
      } else {
        this.hArg[0] = h;
        this.propagate(t, w0, w1);
      }
      counters.segments++;
      // h goes in the scratch (a double argument to a call that is not inlined is boxed)
      let gi = -1;
      if (this.active.length !== 0) {
        this.screen[5] = h;
        gi = this.screenGuards(t);
      }
      if (gi >= 0 && this.screen[9]! < h * (1 - 1e-14)) {
        this.guardInside(t, gi);
        return;
      }
      if (this.observed) this.observeSegment(t, h);
      if (nx === 2) {
        const s0 = w1[0]!, s1 = w1[1]!;
        if (!Number.isFinite(0 + s0 + s1)) this.checkFinite(w1, t);
        w0[0] = s0;
        w0[1] = s1;
      } else {
        let sum = 0;
        for (let i = 0; i < nx; i++) sum += w1[i]!;
        if (!Number.isFinite(sum)) this.checkFinite(w1, t);
        for (let i = 0; i < nx; i++) w0[i] = w1[i]!;
      }
      this.cyc = c1;
      this.off = o1;
      this.instantCount = 1;
      this.instantGuardCount = 0;
      if (this.recordEvents && this.inRecordWindow(this.timeS)) this.emit(SampleKind.Before);
      // a guard at the segment end is handled together with the scheduled events there
      if (gi >= 0) this.fireGuard(this.active[gi]!);
    } else {
      this.cyc = c1;
      this.off = o1;
      this.onInstant();
    }
    const before = t.key;
    // Timers due now are handled here (the general handler is a call too large to inline); a
    // source step or the stop goes to the general handler with the rest of the instant.
    const ctrl = this.ctrl;
    for (;;) {
      if (this.pLen !== 0) this.applyQueued();
      const i = this.qLen - 1;
      const q = this.q;
      if (i < 0 || q[4 * i] !== c1 || q[4 * i + 1] !== o1) break;
      if (q[4 * i + 2] !== KIND_TIMER || ctrl === undefined) {
        this.handleScheduled(before);
        return;
      }
      this.qLen = i;
      counters.events++;
      ctrl.onEvent(this.ctx, q[4 * i + 3]!);
    }
    // switching: without diodes, a table lookup unless the new topology holds an inductor
    const key = this.key;
    if (this.plainSwitching) {
      const nt = key === before ? t : this.topoTable![key] ?? this.lookupTopology(key);
      if (nt.heldInductors.length !== 0) this.settleAndSwitch(before);
      else {
        this.turnedOff = 0;
        if (nt !== t) this.enter(nt);
      }
    } else this.settleAndSwitch(before);
    if (this.stopRequest !== null) this.finish('stopped', this.stopRequest);
  }

  /**
   * Screens every active guard over the segment just propagated (w -> w1 over h = screen[5])
   * and locates the earliest crossing. Returns the guard's index in the active list, or -1, with the time
   * in screen[9] and the state there in locBest.
   */
  private screenGuards(t: Topology): number {
    const w0 = this.w, w1 = this.w1;
    const act = this.active;
    const sc = this.screen;
    const h = sc[5]!;
    let guardTau = -1;
    let guardIdx = -1;
    // Pre-screen: over the segment |g(s) - g(0)| <= h max |g'| <= h |drow|_1 max ||w(s)||_inf
    // <= h |drow|_1 exp(normM h) ||w0||_inf, so a guard farther than that from zero cannot
    // cross (the second term covers the rounding of g(0)). One dot product instead of six.
    // (the smallest stage, n = 4, with the start state in locals for the whole screen; its
    // largest magnitude by comparisons, which give Math.max's value for finite states)
    const four = w0.length === 4;
    let a0 = 0, a1 = 0, a2 = 0, a3 = 0;
    let wmax = 0;
    if (four) {
      a0 = w0[0]!;
      a1 = w0[1]!;
      a2 = w0[2]!;
      a3 = w0[3]!;
      const m1 = Math.abs(a1), m2 = Math.abs(a2), m3 = Math.abs(a3);
      wmax = Math.abs(a0);
      if (m1 > wmax) wmax = m1;
      if (m2 > wmax) wmax = m2;
      if (m3 > wmax) wmax = m3;
    } else for (let j = 0; j < w0.length; j++) {
      const a = Math.abs(w0[j]!);
      if (a > wmax) wmax = a;
    }
    // exp(normM h) kept on the topology: fixed-frequency segments repeat their length
    if (t.growH !== h) {
      t.grow = Math.exp(t.normM * h);
      t.growH = h;
    }
    const grow = t.grow * wmax * (1 + 1e-9);
    const reach = h * grow;
    sc[10] = grow;
    for (let gi = 0; gi < act.length; gi++) {
      const g = act[gi]!;
      const row = g.row, drow = g.drow, d4row = g.d4row;
      {
        let f = 0;
        if (four) f = 0 + row[0]! * a0 + row[1]! * a1 + row[2]! * a2 + row[3]! * a3;
        else for (let j = 0; j < row.length; j++) f += row[j]! * w0[j]!;
        if (Math.abs(f) > g.dnorm * reach + 1e-14 * g.rnorm * wmax) continue;
      }
      // the six dot products in one pass (each sum in the order of its own loop)
      let f0 = 0, f1 = 0, d0 = 0, d1 = 0, q0 = 0, q1 = 0;
      if (four) {
        // the smallest stage written out (same sums, same order)
        const b0 = w1[0]!, b1 = w1[1]!, b2 = w1[2]!, b3 = w1[3]!;
        const r0 = row[0]!, r1 = row[1]!, r2 = row[2]!, r3 = row[3]!;
        const p0 = drow[0]!, p1 = drow[1]!, p2 = drow[2]!, p3 = drow[3]!;
        const s0 = d4row[0]!, s1 = d4row[1]!, s2 = d4row[2]!, s3 = d4row[3]!;
        f0 = 0 + r0 * a0 + r1 * a1 + r2 * a2 + r3 * a3;
        f1 = 0 + r0 * b0 + r1 * b1 + r2 * b2 + r3 * b3;
        d0 = 0 + p0 * a0 + p1 * a1 + p2 * a2 + p3 * a3;
        d1 = 0 + p0 * b0 + p1 * b1 + p2 * b2 + p3 * b3;
        q0 = 0 + s0 * a0 + s1 * a1 + s2 * a2 + s3 * a3;
        q1 = 0 + s0 * b0 + s1 * b1 + s2 * b2 + s3 * b3;
      } else for (let j = 0; j < row.length; j++) {
        const a = w0[j]!, b = w1[j]!;
        f0 += row[j]! * a;
        f1 += row[j]! * b;
        d0 += drow[j]! * a;
        d1 += drow[j]! * b;
        q0 += d4row[j]! * a;
        q1 += d4row[j]! * b;
      }
      const e4 = Math.max(Math.abs(q0), Math.abs(q1));
      for (let pass = 0; pass < 2; pass++) {
        const sign = g.dir !== 0 ? g.dir : pass === 0 ? 1 : -1;
        if (g.dir !== 0 && pass === 1) break;
        const sf0 = sign * f0;
        const sd0 = sign * d0;
        // a guard that has just fired sits at zero within the rounding of its own dot product:
        // count it as already crossed when it moves upward
        // (sum |r_j w_j| <= |row|_1 ||w0||_inf: the scale's loop only when the bound allows)
        const startAbove =
          sf0 > 0 ||
          (sf0 === 0 && sd0 >= 0) ||
          (sd0 > 0 && Math.abs(sf0) <= 8.001e-16 * g.rnorm * wmax && Math.abs(sf0) <= 8e-16 * Simulation.dotScale(g.row, w0));
        sc[0] = startAbove ? Math.max(sf0, 0) : sf0;
        sc[1] = sign * f1;
        sc[2] = sd0;
        sc[3] = sign * d1;
        sc[4] = e4;
        if (!Simulation.maybeRising(sc)) continue;
        // sign and limit go in the scratch too, and tau comes back in it (no boxed doubles)
        sc[6] = sign;
        sc[7] = guardTau >= 0 ? guardTau : h;
        const tau = this.locate(t, g, w0, startAbove) ? sc[8]! : -1;
        if (tau >= 0 && (guardTau < 0 || tau < guardTau)) {
          guardTau = tau;
          guardIdx = gi;
          const best = this.locBest;
          this.locBest = this.locFound;
          this.locFound = best;
        }
      }
    }
    sc[9] = guardTau;
    return guardIdx;
  }

  /** A guard event inside the segment: advances to it, fires it and switches. */
  private guardInside(t: Topology, gi: number): void {
    const tau = this.screen[9]!;
    const w0 = this.w, best = this.locBest;
    const prevCyc = this.cyc, prevOff = this.off;
    if (this.observed) this.observeSegment(t, tau);
    this.off += tau;
    if (this.off >= this.tb) {
      const k = Math.floor(this.off / this.tb);
      this.cyc += k;
      this.off -= k * this.tb;
    }
    if (this.cyc !== prevCyc || this.off !== prevOff) {
      this.instantCount = 0;
      this.instantGuardCount = 0;
    }
    // the states (the inputs are constant over the segment: locate copies them unchanged)
    const nx = this.nx;
    if (nx === 2) {
      const b0 = best[0]!, b1 = best[1]!;
      if (!Number.isFinite(0 + b0 + b1)) this.checkFinite(best, t);
      w0[0] = b0;
      w0[1] = b1;
    } else {
      this.checkFinite(best, t);
      for (let j = 0; j < nx; j++) w0[j] = best[j]!;
    }
    this.onInstant();
    if (this.recordEvents && this.inRecordWindow(this.timeS)) this.emit(SampleKind.Before);
    this.fireGuard(this.active[gi]!);
    this.afterEvents(t.key);
  }

  /** What observers see of a segment from the current state over h (before time advances). */
  private observeSegment(t: Topology, h: number): void {
    this.options.trace?.segment?.(t.key, h, this.w);
    if (this.intRefs.length !== 0) this.accumulate(t, h, this.w);
    if (this.gridS > 0) this.emitGridUpTo(this.timeS, h, t, this.w);
  }

  /** Handles every scheduled event at the current instant, in the defined order, then switches. */
  private handleScheduled(before: number): void {
    for (;;) {
      if (this.pLen !== 0) this.applyQueued();
      const i = this.qLen - 1;
      if (i < 0) break;
      const q = this.q;
      if (q[4 * i] !== this.cyc || q[4 * i + 1] !== this.off) break;
      const kind = q[4 * i + 2]!;
      const tag = q[4 * i + 3]!;
      this.qLen = i;
      this.counters.events++;
      if (kind === KIND_STOP) {
        this.settleAndSwitch(before);
        this.finish('finished', 'reached the stop time');
        return;
      }
      if (kind === KIND_STEP) {
        const st = this.stepTimes[tag]!;
        this.w[this.nx + st.input] = st.value;
      } else if (this.ctrl) {
        this.ctrl.onEvent(this.ctx, tag);
      }
    }
    this.afterEvents(before);
  }

  private onInstant(): void {
    this.instantCount++;
    if (this.instantCount > this.maxPerInstant) {
      const names: string[] = [];
      for (let i = 0; i < this.instantGuardCount; i++) {
        const o = this.instantGuards[i]!;
        const name = o < 0 ? this.c.devices[-o - 1]!.id : `controller guard ${o}`;
        if (!names.includes(name)) names.push(name);
      }
      throw new SimulationError(
        'chattering',
        `chattering: more than ${this.maxPerInstant} events at t = ${this.timeS} s without time advancing${names.length ? ` (guards: ${names.join(', ')})` : ''}`,
        names,
        this.timeS,
      );
    }
  }

  private noteInstantGuard(owner: number): void {
    if (this.instantGuardCount === this.instantGuards.length) this.instantGuards = grown(this.instantGuards);
    this.instantGuards[this.instantGuardCount++] = owner;
  }

  private fireGuard(g: ActiveGuard): void {
    this.counters.guardEvents++;
    this.counters.events++;
    const tr = this.options.trace;
    if (g.owner < 0) {
      const d = -g.owner - 1;
      this.noteInstantGuard(g.owner);
      tr?.guard?.({ timeS: this.timeS, before: this.key, row: g.row, which: 'device', index: d });
      this.key ^= 1 << d;
    } else {
      this.noteInstantGuard(g.owner);
      tr?.guard?.({ timeS: this.timeS, before: this.key, row: g.row, which: 'controller', index: g.owner });
      this.ctrl?.onEvent(this.ctx, this.guardTag[g.owner]!);
    }
  }

  private settleAndSwitch(before: number): void {
    // With diodes the key before settling may be ill-posed (a switch closing onto a conducting
    // diode): look it up only after settle() has resolved the diodes.
    let t: Topology | undefined = this.key === this.topo.key ? this.topo : undefined;
    if (this.diodeCount !== 0 || (t ??= this.lookupTopology(this.key)).heldInductors.length !== 0) {
      t = this.settle();
    }
    this.turnedOff = 0;
    if (t !== this.topo) this.enter(t);
    // (the observers' part in its own method keeps this one small enough to be inlined into
    // advance() next to the controller's calls)
    if (this.switchWatched) this.switchObserved(before);
  }

  private switchObserved(before: number): void {
    if (this.key !== before) this.options.trace?.switched?.(this.timeS, before, this.key, this.w);
    if (this.recordEvents && this.inRecordWindow(this.timeS)) this.emit(SampleKind.After);
  }

  /** Makes t the topology in force, with its active guard list when one is cached for the armed
   * set (else rebuilt before the next segment). */
  private enter(t: Topology): void {
    this.topo = t;
    if (this.guardless) return; // the active list stays the empty one
    const dense = this.activeDense;
    if (dense !== null && this.activeDenseArm[t.key] === this.armKey) this.active = dense[t.key]!;
    else this.activeDirty = true;
  }

  private afterEvents(before: number): void {
    this.settleAndSwitch(before);
    if (this.stopRequest !== null) this.finish('stopped', this.stopRequest);
  }

  private checkFinite(w: Float64Array, t: Topology): void {
    let s = 0;
    for (let i = 0; i < this.nx; i++) s += w[i]!;
    if (!Number.isFinite(s)) this.nonFinite(w, t);
  }

  /** The error for a non-finite state (a closure captures w: kept out of checkFinite, whose
   * every call would otherwise allocate the context for it). */
  private nonFinite(w: Float64Array, t: Topology): never {
    const bad = this.c.stateNames.filter((_, i) => !Number.isFinite(w[i]!));
    throw new SimulationError(
      'non-finite',
      `non-finite state (${bad.join(', ')}) after a segment in topology [${describeKey(this.c, t.key)}] ending at t = ${this.timeS} s`,
      bad,
      this.timeS,
    );
  }

  /** Runs to the end and returns the result. */
  run(): RunResult {
    // one try around the loop (a failure ends the run)
    try {
      while (this.status === 'running') this.advance();
    } catch (err) {
      this.fail(err);
    }
    return this.result();
  }

  /** The result so far. */
  result(): RunResult {
    const ints: Record<string, number> = {};
    (this.options.integrals ?? []).forEach((s, i) => {
      ints[s.name] = this.intValues[i]!;
    });
    return {
      status: this.status === 'running' ? 'stopped' : this.status,
      message: this.message,
      ...(this.error ? { error: this.error } : {}),
      timeS: this.timeS,
      state: new Float64Array(this.w),
      stateNames: this.c.stateNames,
      counters: { ...this.counters, topologies: this.model.topologyCount },
      integrals: ints,
      topologyKey: this.key,
      topology: describeKey(this.c, this.key),
    };
  }
}

/** Runs a circuit to the stop time: a short loop over {@link Simulation.step}. */
export function simulate(model: CircuitModel | CircuitSpec, options: RunOptions): RunResult {
  return new Simulation(model, options).run();
}
