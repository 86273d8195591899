import { CircuitError, type CircuitIssue } from './errors.ts';

/** A change of a source's value at a given time. */
export interface SourceStep {
  /** Time of the step, seconds from the start of the run. */
  readonly atS: number;
  /** New value from that time on (volts or amperes, as the source). */
  readonly value: number;
}

/** A sinusoidal component added to a source: amplitude * sin(2 pi f t + phase). */
export interface SineSpec {
  /** Peak amplitude, volts or amperes. */
  readonly amplitude: number;
  /** Frequency, hertz. */
  readonly frequencyHz: number;
  /** Phase at t = 0, radians (default 0). */
  readonly phaseRad?: number;
}

/** Linear resistor between nodes a and b; current flows a -> b. */
export interface ResistorSpec {
  readonly kind: 'resistor';
  readonly id: string;
  readonly a: string;
  readonly b: string;
  /** Resistance, ohms (> 0). */
  readonly ohms: number;
}

/** Inductor from a to b (current a -> b is its state), with optional series resistance. */
export interface InductorSpec {
  readonly kind: 'inductor';
  readonly id: string;
  readonly a: string;
  readonly b: string;
  /** Inductance, henries (> 0). */
  readonly henries: number;
  /** Series (winding) resistance, ohms (default 0). */
  readonly seriesOhms?: number;
  /** Current at t = 0, amperes (default 0). */
  readonly initialAmps?: number;
}

/** Capacitor from a to b (voltage a - b), with optional equivalent series resistance. */
export interface CapacitorSpec {
  readonly kind: 'capacitor';
  readonly id: string;
  readonly a: string;
  readonly b: string;
  /** Capacitance, farads (> 0). */
  readonly farads: number;
  /** Equivalent series resistance, ohms (default 0). */
  readonly esrOhms?: number;
  /** Voltage of the ideal capacitance at t = 0, volts (default 0). */
  readonly initialVolts?: number;
}

/** Independent voltage source: v(pos) - v(neg) = volts (+ steps, + sine), with optional series resistance. */
export interface VoltageSourceSpec {
  readonly kind: 'voltage-source';
  readonly id: string;
  readonly pos: string;
  readonly neg: string;
  /** Value at t = 0, volts. */
  readonly volts: number;
  /** Piecewise-constant changes of the value. */
  readonly steps?: readonly SourceStep[];
  /** Optional sinusoid added to the value. */
  readonly sine?: SineSpec;
  /** Internal series resistance, ohms (default 0). */
  readonly seriesOhms?: number;
}

/** Independent current source pushing `amps` from node `from` through itself into node `to`. */
export interface CurrentSourceSpec {
  readonly kind: 'current-source';
  readonly id: string;
  readonly from: string;
  readonly to: string;
  /** Value at t = 0, amperes. */
  readonly amps: number;
  readonly steps?: readonly SourceStep[];
  readonly sine?: SineSpec;
}

/** Body diode of a switch: anode at the switch's source terminal, cathode at its drain. */
export interface BodyDiodeSpec {
  /** Forward voltage, volts (default 0.7). */
  readonly forwardVolts?: number;
  /** On resistance, ohms (default 0). */
  readonly onOhms?: number;
}

/**
 * Controlled switch between drain and source, driven by the gate signal named `gate`.
 * On: a short (onOhms = 0) or onOhms; off: an open (offOhms absent) or offOhms (leakage).
 * Its current is counted drain -> source.
 */
export interface SwitchSpec {
  readonly kind: 'switch';
  readonly id: string;
  readonly drain: string;
  readonly source: string;
  /** Name of the gate signal set by controllers. */
  readonly gate: string;
  /** On resistance, ohms (default 0: ideal). */
  readonly onOhms?: number;
  /** Off resistance, ohms (default: open). */
  readonly offOhms?: number;
  /** Body diode (source -> drain), if any. */
  readonly bodyDiode?: BodyDiodeSpec;
  /** Gate state at t = 0 (default off). */
  readonly initiallyOn?: boolean;
}

/** Piecewise-linear diode: off = open (or offOhms), on = forwardVolts in series with onOhms. */
export interface DiodeSpec {
  readonly kind: 'diode';
  readonly id: string;
  readonly anode: string;
  readonly cathode: string;
  /** Forward voltage, volts (default 0). */
  readonly forwardVolts?: number;
  /** On resistance, ohms (default 0). */
  readonly onOhms?: number;
  /** Off resistance, ohms (default: open). */
  readonly offOhms?: number;
}

/**
 * Linear controlled source: value = gain * (value of the control signal). The control signal is
 * any measurable signal: a node name, `<element>.current`, `<element>.voltage`, `<block>.out`.
 */
export interface ControlledSourceSpec {
  readonly kind: 'controlled-voltage-source' | 'controlled-current-source';
  readonly id: string;
  /** Voltage source: positive terminal; current source: current leaves this node into the source. */
  readonly pos: string;
  readonly neg: string;
  /** Name of the controlling signal. */
  readonly control: string;
  /** Gain, V/V, V/A, A/V or A/A according to the signals. */
  readonly gain: number;
}

/** Any circuit element. */
export type ElementSpec =
  | ResistorSpec
  | InductorSpec
  | CapacitorSpec
  | VoltageSourceSpec
  | CurrentSourceSpec
  | SwitchSpec
  | DiodeSpec
  | ControlledSourceSpec;

/** Ramp: a state z with dz/dt = slopePerS, which controllers may reset at events. Output `<id>.out`. */
export interface RampBlockSpec {
  readonly kind: 'ramp';
  readonly id: string;
  /** Slope, units per second. */
  readonly slopePerS: number;
  /** Value at t = 0 (default 0). */
  readonly initial?: number;
}

/**
 * Linear block dz/dt = A z + B v, out = C z + D v, where v are the named input signals.
 * Given either as state space or as a proper transfer function num(s)/den(s) of one input
 * (coefficients in descending powers of s).
 */
export interface LinearBlockSpec {
  readonly kind: 'linear-block';
  readonly id: string;
  /** Names of the input signals. */
  readonly inputs: readonly string[];
  /** Gains applied to each input before the block (default 1 each): v_i = gain_i * signal_i. */
  readonly inputGains?: readonly number[];
  readonly stateSpace?: {
    readonly a: readonly (readonly number[])[];
    readonly b: readonly (readonly number[])[];
    readonly c: readonly number[];
    readonly d?: readonly number[];
  };
  readonly transferFunction?: { readonly num: readonly number[]; readonly den: readonly number[] };
  /** Initial block state (default zeros). */
  readonly initial?: readonly number[];
}

/** Sine generator with two states (an undamped oscillator); output `<id>.out` = offset + amplitude sin(2 pi f t + phase). */
export interface SineBlockSpec {
  readonly kind: 'sine';
  readonly id: string;
  readonly amplitude: number;
  readonly frequencyHz: number;
  readonly phaseRad?: number;
  readonly offset?: number;
}

/** Signal block held in the state. */
export type BlockSpec = RampBlockSpec | LinearBlockSpec | SineBlockSpec;

/** A named linear combination of signals: sum(gain * signal) + offset. */
export interface MeasurementSpec {
  readonly name: string;
  readonly terms: readonly { readonly signal: string; readonly gain: number }[];
  readonly offset?: number;
}

/** Description of a circuit: immutable data. */
export interface CircuitSpec {
  /** Name of the ground node (default "0"). */
  readonly ground?: string;
  readonly elements: readonly ElementSpec[];
  readonly blocks?: readonly BlockSpec[];
  readonly measurements?: readonly MeasurementSpec[];
}

// ---------------------------------------------------------------------------------------------
// Internal compiled form

/** Branch behaviour classes used by the network solve. */
export const enum BranchKind {
  Resistor,
  Inductor,
  Capacitor,
  VSource,
  ISource,
  Channel,
  Diode,
  CtrlV,
  CtrlI,
}

export interface Branch {
  readonly id: string; // element id, or `<switch>.body` for a body diode, `<switch>` for the channel
  readonly element: string; // owning element id
  readonly kind: BranchKind;
  readonly p: number; // node index, -1 = ground
  readonly n: number;
  readonly ohms: number; // series/on resistance where meaningful
  readonly offOhms: number; // Infinity = open
  readonly forwardVolts: number;
  readonly stateIndex: number; // inductor / capacitor state, or -1
  readonly inputIndex: number; // independent source input index, or -1
  readonly sineState: number; // first state of the sine oscillator of a source, or -1
  readonly sineAmplitude: number;
  readonly device: number; // device bit for switch channels and diodes, or -1
  readonly henries: number;
  readonly farads: number;
  readonly control: string;
  readonly gain: number;
}

export interface Device {
  readonly id: string; // branch id
  readonly element: string;
  readonly kind: 'channel' | 'diode';
  readonly branch: number;
  /** gate index for channels, -1 for diodes */
  readonly gate: number;
}

export interface CompiledBlock {
  readonly id: string;
  readonly kind: BlockSpec['kind'];
  readonly firstState: number;
  readonly order: number;
  readonly a: Float64Array; // order x order
  readonly b: Float64Array; // order x inputs
  readonly c: Float64Array; // order
  readonly d: Float64Array; // inputs
  readonly inputs: readonly string[];
  readonly inputGains: Float64Array;
  /** for ramps: slope on the unity input; for sines: angular frequency */
  readonly slope: number;
  readonly outOffset: number;
}

export interface CompiledCircuit {
  readonly spec: CircuitSpec;
  readonly ground: string;
  readonly nodes: readonly string[]; // non-ground nodes
  readonly nodeIndex: ReadonlyMap<string, number>;
  readonly branches: readonly Branch[];
  readonly devices: readonly Device[];
  readonly gates: readonly string[];
  readonly blocks: readonly CompiledBlock[];
  readonly stateNames: readonly string[];
  readonly inputNames: readonly string[]; // inputNames[0] = "1" (unity)
  readonly nx: number;
  readonly nu: number;
  readonly initialState: Float64Array; // length nx + nu: x then u at t = 0
  readonly sourceSteps: readonly { readonly atS: number; readonly input: number; readonly value: number }[];
  readonly measurements: readonly MeasurementSpec[];
}

function isFiniteNumber(x: unknown): x is number {
  return typeof x === 'number' && Number.isFinite(x);
}

/** Transfer function num/den (descending powers) to controllable canonical state space. */
export function transferFunctionToStateSpace(
  num: readonly number[],
  den: readonly number[],
): { a: number[][]; b: number[][]; c: number[]; d: number[] } {
  let k = 0;
  while (k < den.length && den[k] === 0) k++;
  const dd = den.slice(k);
  if (dd.length === 0) throw new Error('denominator is zero');
  let j = 0;
  while (j < num.length - 1 && num[j] === 0) j++;
  const nn = num.slice(j);
  const order = dd.length - 1;
  if (nn.length - 1 > order) throw new Error(`improper: numerator degree ${nn.length - 1} exceeds denominator degree ${order}`);
  const a0 = dd[0]!;
  const den1 = dd.map((v) => v / a0);
  const padded = new Array<number>(order + 1 - nn.length).fill(0).concat(nn.map((v) => v / a0));
  const d = padded[0]!;
  // strictly proper remainder: num - d*den
  const r = padded.map((v, i) => v - d * den1[i]!);
  const a: number[][] = [];
  for (let i = 0; i < order; i++) {
    const row = new Array<number>(order).fill(0);
    if (i < order - 1) row[i + 1] = 1;
    else for (let m = 0; m < order; m++) row[m] = -den1[order - m]!;
    a.push(row);
  }
  const b: number[][] = [];
  for (let i = 0; i < order; i++) b.push([i === order - 1 ? 1 : 0]);
  const c: number[] = [];
  for (let m = 0; m < order; m++) c.push(r[order - m]!);
  return { a, b, c, d: [d] };
}

/**
 * Validates a circuit description and compiles it into the internal form. Throws a
 * {@link CircuitError} listing every issue (element id and reason).
 */
export function compileCircuit(spec: CircuitSpec): CompiledCircuit {
  const issues: CircuitIssue[] = [];
  const bad = (element: string, code: string, message: string): void => {
    issues.push({ element, code, message });
  };
  if (spec === null || typeof spec !== 'object' || !Array.isArray(spec.elements)) {
    throw new CircuitError([{ element: 'circuit', code: 'shape', message: 'expected an object with an elements array' }]);
  }
  const ground = spec.ground ?? '0';
  const ids = new Set<string>();
  const nodeIndex = new Map<string, number>();
  const nodes: string[] = [];
  const node = (name: unknown, owner: string, field: string): number => {
    if (typeof name !== 'string' || name.length === 0) {
      bad(owner, 'node', `${field} must be a non-empty node name, got ${JSON.stringify(name)}`);
      return -1;
    }
    if (name === ground) return -1;
    let i = nodeIndex.get(name);
    if (i === undefined) {
      i = nodes.length;
      nodes.push(name);
      nodeIndex.set(name, i);
    }
    return i;
  };
  const positive = (owner: string, field: string, v: unknown): number => {
    if (!isFiniteNumber(v) || v <= 0) {
      bad(owner, 'value', `${field} must be a finite number > 0, got ${String(v)}`);
      return 1;
    }
    return v;
  };
  const nonNegative = (owner: string, field: string, v: unknown, dflt: number): number => {
    if (v === undefined) return dflt;
    if (typeof v !== 'number' || Number.isNaN(v) || v < 0) {
      bad(owner, 'value', `${field} must be a number >= 0, got ${String(v)}`);
      return dflt;
    }
    return v;
  };
  const finite = (owner: string, field: string, v: unknown, dflt: number): number => {
    if (v === undefined) return dflt;
    if (!isFiniteNumber(v)) {
      bad(owner, 'value', `${field} must be a finite number, got ${String(v)}`);
      return dflt;
    }
    return v;
  };

  const stateNames: string[] = [];
  const inputNames: string[] = ['1'];
  const x0: number[] = [];
  const u0: number[] = [1];
  const branches: Branch[] = [];
  const devices: Device[] = [];
  const gates: string[] = [];
  const gateIndex = new Map<string, number>();
  const sourceSteps: { atS: number; input: number; value: number }[] = [];
  const sineStates: { id: string; state: number; omega: number; phase: number }[] = [];
  const blocksPre: CompiledBlock[] = [];

  const baseBranch = {
    ohms: 0,
    offOhms: Infinity,
    forwardVolts: 0,
    stateIndex: -1,
    inputIndex: -1,
    sineState: -1,
    sineAmplitude: 0,
    device: -1,
    henries: 0,
    farads: 0,
    control: '',
    gain: 0,
  };

  const addSine = (owner: string, sine: SineSpec | undefined): { state: number; amplitude: number } => {
    if (sine === undefined) return { state: -1, amplitude: 0 };
    const f = positive(owner, 'sine.frequencyHz', sine.frequencyHz);
    const amp = finite(owner, 'sine.amplitude', sine.amplitude, 0);
    const ph = finite(owner, 'sine.phaseRad', sine.phaseRad, 0);
    const s = stateNames.length;
    stateNames.push(`${owner}.sin`, `${owner}.cos`);
    x0.push(Math.sin(ph), Math.cos(ph));
    sineStates.push({ id: owner, state: s, omega: 2 * Math.PI * f, phase: ph });
    return { state: s, amplitude: amp };
  };
  const addSteps = (owner: string, steps: readonly SourceStep[] | undefined, input: number): void => {
    if (steps === undefined) return;
    if (!Array.isArray(steps)) {
      bad(owner, 'steps', 'steps must be an array of { atS, value }');
      return;
    }
    let last = 0;
    steps.forEach((s, i) => {
      if (!isFiniteNumber(s?.atS) || s.atS < 0) bad(owner, 'steps', `steps[${i}].atS must be a time >= 0 s, got ${String(s?.atS)}`);
      else if (s.atS < last) bad(owner, 'steps', `steps[${i}].atS must not be earlier than the step before it`);
      else last = s.atS;
      if (!isFiniteNumber(s?.value)) bad(owner, 'steps', `steps[${i}].value must be a finite number, got ${String(s?.value)}`);
      else if (isFiniteNumber(s.atS) && s.atS >= 0) sourceSteps.push({ atS: s.atS, input, value: s.value });
    });
  };

  for (const [k, e] of spec.elements.entries()) {
    const id = typeof e?.id === 'string' && e.id.length > 0 ? e.id : `elements[${k}]`;
    if (typeof e?.id !== 'string' || e.id.length === 0) bad(id, 'id', 'every element needs a non-empty string id');
    else if (ids.has(id)) bad(id, 'duplicate-id', `duplicate id "${id}"`);
    else if (/[.\s]/.test(id)) bad(id, 'id', 'ids may not contain dots or spaces (dots separate signal names)');
    ids.add(id);
    switch (e?.kind) {
      case 'resistor':
        branches.push({ ...baseBranch, id, element: id, kind: BranchKind.Resistor, p: node(e.a, id, 'a'), n: node(e.b, id, 'b'), ohms: positive(id, 'ohms', e.ohms) });
        break;
      case 'inductor': {
        const s = stateNames.length;
        stateNames.push(`${id}.current`);
        x0.push(finite(id, 'initialAmps', e.initialAmps, 0));
        branches.push({
          ...baseBranch, id, element: id, kind: BranchKind.Inductor, p: node(e.a, id, 'a'), n: node(e.b, id, 'b'),
          ohms: nonNegative(id, 'seriesOhms', e.seriesOhms, 0), stateIndex: s, henries: positive(id, 'henries', e.henries),
        });
        break;
      }
      case 'capacitor': {
        const s = stateNames.length;
        stateNames.push(`${id}.charge`);
        x0.push(finite(id, 'initialVolts', e.initialVolts, 0));
        branches.push({
          ...baseBranch, id, element: id, kind: BranchKind.Capacitor, p: node(e.a, id, 'a'), n: node(e.b, id, 'b'),
          ohms: nonNegative(id, 'esrOhms', e.esrOhms, 0), stateIndex: s, farads: positive(id, 'farads', e.farads),
        });
        break;
      }
      case 'voltage-source':
      case 'current-source': {
        const isV = e.kind === 'voltage-source';
        const input = inputNames.length;
        inputNames.push(id);
        u0.push(finite(id, isV ? 'volts' : 'amps', isV ? e.volts : e.amps, 0));
        if (isV ? e.volts === undefined : e.amps === undefined) bad(id, 'value', `${isV ? 'volts' : 'amps'} is required`);
        addSteps(id, e.steps, input);
        const sine = addSine(id, e.sine);
        branches.push({
          ...baseBranch, id, element: id, kind: isV ? BranchKind.VSource : BranchKind.ISource,
          p: isV ? node(e.pos, id, 'pos') : node(e.from, id, 'from'),
          n: isV ? node(e.neg, id, 'neg') : node(e.to, id, 'to'),
          ohms: isV ? nonNegative(id, 'seriesOhms', e.seriesOhms, 0) : 0,
          inputIndex: input, sineState: sine.state, sineAmplitude: sine.amplitude,
        });
        break;
      }
      case 'switch': {
        if (typeof e.gate !== 'string' || e.gate.length === 0) bad(id, 'gate', 'gate must name a gate signal');
        let g = gateIndex.get(e.gate);
        if (g === undefined) {
          g = gates.length;
          gates.push(e.gate);
          gateIndex.set(e.gate, g);
        }
        const p = node(e.drain, id, 'drain');
        const n = node(e.source, id, 'source');
        const offOhms = e.offOhms === undefined ? Infinity : positive(id, 'offOhms', e.offOhms);
        devices.push({ id, element: id, kind: 'channel', branch: branches.length, gate: g });
        branches.push({
          ...baseBranch, id, element: id, kind: BranchKind.Channel, p, n,
          ohms: nonNegative(id, 'onOhms', e.onOhms, 0), offOhms, device: devices.length - 1,
        });
        if (e.bodyDiode !== undefined) {
          const bid = `${id}.body`;
          devices.push({ id: bid, element: id, kind: 'diode', branch: branches.length, gate: -1 });
          branches.push({
            ...baseBranch, id: bid, element: id, kind: BranchKind.Diode, p: n, n: p,
            ohms: nonNegative(id, 'bodyDiode.onOhms', e.bodyDiode.onOhms, 0),
            forwardVolts: finite(id, 'bodyDiode.forwardVolts', e.bodyDiode.forwardVolts, 0.7),
            device: devices.length - 1,
          });
        }
        break;
      }
      case 'diode': {
        const offOhms = e.offOhms === undefined ? Infinity : positive(id, 'offOhms', e.offOhms);
        devices.push({ id, element: id, kind: 'diode', branch: branches.length, gate: -1 });
        branches.push({
          ...baseBranch, id, element: id, kind: BranchKind.Diode, p: node(e.anode, id, 'anode'), n: node(e.cathode, id, 'cathode'),
          ohms: nonNegative(id, 'onOhms', e.onOhms, 0), offOhms, forwardVolts: finite(id, 'forwardVolts', e.forwardVolts, 0),
          device: devices.length - 1,
        });
        break;
      }
      case 'controlled-voltage-source':
      case 'controlled-current-source':
        if (typeof e.control !== 'string' || e.control.length === 0) bad(id, 'control', 'control must name a signal');
        branches.push({
          ...baseBranch, id, element: id, kind: e.kind === 'controlled-voltage-source' ? BranchKind.CtrlV : BranchKind.CtrlI,
          p: node(e.pos, id, 'pos'), n: node(e.neg, id, 'neg'), control: String(e.control), gain: finite(id, 'gain', e.gain, 0),
        });
        break;
      default:
        bad(id, 'kind', `unknown element kind ${JSON.stringify((e as { kind?: unknown })?.kind)}`);
    }
  }
  if (devices.length > 30) bad('circuit', 'devices', `at most 30 switching devices (channels and diodes) are supported, got ${devices.length}`);

  // Blocks
  for (const [k, blk] of (spec.blocks ?? []).entries()) {
    const id = typeof blk?.id === 'string' && blk.id.length > 0 ? blk.id : `blocks[${k}]`;
    if (ids.has(id)) bad(id, 'duplicate-id', `duplicate id "${id}"`);
    else if (/[.\s]/.test(id)) bad(id, 'id', 'ids may not contain dots or spaces');
    ids.add(id);
    const first = stateNames.length;
    switch (blk?.kind) {
      case 'ramp':
        stateNames.push(`${id}.state`);
        x0.push(finite(id, 'initial', blk.initial, 0));
        blocksPre.push({
          id, kind: 'ramp', firstState: first, order: 1, a: new Float64Array(1), b: new Float64Array(0),
          c: Float64Array.of(1), d: new Float64Array(0), inputs: [], inputGains: new Float64Array(0),
          slope: finite(id, 'slopePerS', blk.slopePerS, 0), outOffset: 0,
        });
        if (blk.slopePerS === undefined) bad(id, 'slopePerS', 'slopePerS is required');
        break;
      case 'sine': {
        const f = positive(id, 'frequencyHz', blk.frequencyHz);
        const ph = finite(id, 'phaseRad', blk.phaseRad, 0);
        stateNames.push(`${id}.sin`, `${id}.cos`);
        x0.push(Math.sin(ph), Math.cos(ph));
        blocksPre.push({
          id, kind: 'sine', firstState: first, order: 2, a: new Float64Array(4), b: new Float64Array(0),
          c: Float64Array.of(finite(id, 'amplitude', blk.amplitude, 0), 0), d: new Float64Array(0), inputs: [],
          inputGains: new Float64Array(0), slope: 2 * Math.PI * f, outOffset: finite(id, 'offset', blk.offset, 0),
        });
        break;
      }
      case 'linear-block': {
        const inputs = Array.isArray(blk.inputs) ? blk.inputs.map(String) : [];
        if (!Array.isArray(blk.inputs) || inputs.length === 0) bad(id, 'inputs', 'inputs must list at least one signal');
        let ss = blk.stateSpace;
        if (blk.transferFunction !== undefined) {
          if (ss !== undefined) bad(id, 'form', 'give either stateSpace or transferFunction, not both');
          if (inputs.length !== 1) bad(id, 'inputs', 'a transfer function takes exactly one input');
          try {
            const num = blk.transferFunction.num, den = blk.transferFunction.den;
            if (!Array.isArray(num) || !Array.isArray(den) || ![...num, ...den].every(isFiniteNumber)) throw new Error('num and den must be arrays of finite numbers');
            const t = transferFunctionToStateSpace(num, den);
            ss = t;
          } catch (err) {
            bad(id, 'transferFunction', (err as Error).message);
          }
        }
        if (ss === undefined) {
          bad(id, 'form', 'a linear block needs stateSpace or transferFunction');
          break;
        }
        const order = Array.isArray(ss.a) ? ss.a.length : 0;
        const ni = inputs.length;
        const a = new Float64Array(order * order);
        const b = new Float64Array(order * ni);
        const c = new Float64Array(order);
        const d = new Float64Array(ni);
        let shapeOk = Array.isArray(ss.b) && ss.b.length === order && Array.isArray(ss.c) && ss.c.length === order;
        for (let i = 0; shapeOk && i < order; i++) {
          const ra = ss.a[i], rb = ss.b[i];
          if (!Array.isArray(ra) || ra.length !== order || !Array.isArray(rb) || rb.length !== ni) shapeOk = false;
          else {
            for (let j = 0; j < order; j++) a[i * order + j] = ra[j]!;
            for (let j = 0; j < ni; j++) b[i * ni + j] = rb[j]!;
            c[i] = ss.c[i]!;
          }
        }
        if (ss.d !== undefined) {
          if (!Array.isArray(ss.d) || ss.d.length !== ni) shapeOk = false;
          else for (let j = 0; j < ni; j++) d[j] = ss.d[j]!;
        }
        if (!shapeOk) bad(id, 'stateSpace', `state-space matrices must be a: ${order}x${order}, b: ${order}x${ni}, c: ${order}, d: ${ni}`);
        else if (![...a, ...b, ...c, ...d].every(Number.isFinite)) bad(id, 'stateSpace', 'state-space entries must be finite numbers');
        const gains = new Float64Array(ni).fill(1);
        if (blk.inputGains !== undefined) {
          if (!Array.isArray(blk.inputGains) || blk.inputGains.length !== ni || !blk.inputGains.every(isFiniteNumber)) bad(id, 'inputGains', `inputGains must be ${ni} finite numbers`);
          else gains.set(blk.inputGains);
        }
        for (let i = 0; i < order; i++) {
          stateNames.push(`${id}.state${i}`);
          x0.push(0);
        }
        if (blk.initial !== undefined) {
          if (!Array.isArray(blk.initial) || blk.initial.length !== order || !blk.initial.every(isFiniteNumber)) bad(id, 'initial', `initial must be ${order} finite numbers`);
          else for (let i = 0; i < order; i++) x0[first + i] = blk.initial[i]!;
        }
        blocksPre.push({ id, kind: 'linear-block', firstState: first, order, a, b, c, d, inputs, inputGains: gains, slope: 0, outOffset: 0 });
        break;
      }
      default:
        bad(id, 'kind', `unknown block kind ${JSON.stringify((blk as { kind?: unknown })?.kind)}`);
    }
  }

  // Sine oscillators of sources become blocks too (two states each).
  for (const s of sineStates) {
    blocksPre.push({
      id: `${s.id}#sine`, kind: 'sine', firstState: s.state, order: 2, a: new Float64Array(4), b: new Float64Array(0),
      c: Float64Array.of(1, 0), d: new Float64Array(0), inputs: [], inputGains: new Float64Array(0), slope: s.omega, outOffset: 0,
    });
  }

  // Connectivity: every node must be reachable from ground through elements (any state).
  if (issues.length === 0) {
    const parent = nodes.map((_, i) => i);
    const find = (i: number): number => {
      while (parent[i] !== i) {
        parent[i] = parent[parent[i]!]!;
        i = parent[i]!;
      }
      return i;
    };
    const G = nodes.length; // virtual index of ground
    parent.push(G);
    for (const br of branches) {
      const a = br.p < 0 ? G : br.p;
      const b = br.n < 0 ? G : br.n;
      parent[find(a)] = find(b);
    }
    for (let i = 0; i < nodes.length; i++) {
      if (find(i) !== find(G)) {
        const touching = branches.filter((b) => b.p === i || b.n === i).map((b) => b.element);
        bad(nodes[i]!, 'floating-node', `node "${nodes[i]}" has no chain of elements to ground "${ground}" (it touches ${touching.length ? [...new Set(touching)].join(', ') : 'nothing'})`);
      }
    }
    for (const br of branches) {
      if (br.p === br.n && br.kind !== BranchKind.Resistor) bad(br.element, 'self-loop', `both terminals on the same node "${br.p < 0 ? ground : nodes[br.p]}"`);
    }
    // A node with a single element terminal carries no current and is almost always a
    // misspelt node name.
    const touches = new Array<number>(nodes.length).fill(0);
    const owners: string[][] = nodes.map(() => []);
    for (const br of branches) {
      if (br.id !== br.element) continue; // a body diode shares its switch's terminals
      for (const nd of [br.p, br.n]) if (nd >= 0) {
        touches[nd]!++;
        owners[nd]!.push(br.element);
      }
    }
    for (let i = 0; i < nodes.length; i++) {
      if (touches[i] === 1) bad(nodes[i]!, 'dangling-node', `node "${nodes[i]}" is connected only to ${owners[i]![0]}: a misspelt node name? (every node needs two element terminals)`);
    }
    // Sources and capacitors that are always zero-resistance voltage constraints must not form
    // a loop (a source shorted by such elements): the network would have no solution.
    {
      const par = Array.from({ length: nodes.length + 1 }, (_, i) => i);
      const find = (i: number): number => {
        while (par[i] !== i) {
          par[i] = par[par[i]!]!;
          i = par[i]!;
        }
        return i;
      };
      for (const br of branches) {
        const hard = (br.kind === BranchKind.VSource || br.kind === BranchKind.Capacitor) && br.ohms === 0;
        if (!hard || br.p === br.n) continue;
        const a = find(br.p < 0 ? nodes.length : br.p), b = find(br.n < 0 ? nodes.length : br.n);
        if (a === b) bad(br.element, 'voltage-loop', `closes a loop of voltage sources and capacitors with zero resistance (a shorted source); add series resistance or ESR`);
        else par[a] = b;
      }
    }
    if (nodes.length === 0) bad('circuit', 'empty', 'the circuit has no node other than ground');
  }
  // Steps of the initial source values are sorted by time.
  sourceSteps.sort((p, q) => p.atS - q.atS);

  // Measurements: unique names, terms checked after signal resolution by the topology layer.
  const mnames = new Set<string>();
  for (const [k, m] of (spec.measurements ?? []).entries()) {
    if (typeof m?.name !== 'string' || m.name.length === 0) bad(`measurements[${k}]`, 'name', 'a measurement needs a name');
    else if (mnames.has(m.name) || ids.has(m.name) || nodeIndex.has(m.name)) bad(m.name, 'duplicate-id', `measurement name "${m.name}" is already used`);
    else mnames.add(m.name);
    if (!Array.isArray(m?.terms) || m.terms.length === 0) bad(m?.name ?? `measurements[${k}]`, 'terms', 'a measurement needs at least one term');
    else for (const [j, t] of m.terms.entries()) if (typeof t?.signal !== 'string' || !isFiniteNumber(t?.gain)) bad(m.name, 'terms', `terms[${j}] needs a signal name and a finite gain`);
  }

  if (issues.length > 0) throw new CircuitError(issues);

  const nx = stateNames.length;
  const nu = inputNames.length;
  const initialState = new Float64Array(nx + nu);
  initialState.set(x0, 0);
  initialState.set(u0, nx);
  return {
    spec,
    ground,
    nodes,
    nodeIndex,
    branches,
    devices,
    gates,
    blocks: blocksPre,
    stateNames,
    inputNames,
    nx,
    nu,
    initialState,
    sourceSteps,
    measurements: spec.measurements ?? [],
  };
}
