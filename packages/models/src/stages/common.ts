import type { BodyDiodeSpec, CircuitSpec, ElementSpec, MeasurementSpec, SourceStep } from '@edgewise/engine';
import type { Rectification, Stage, StageGates, StageKind, StageSignals } from '../stage.ts';

// ---------------------------------------------------------------------------------------------
// Parameter errors shared by stage builders and control laws

/** One problem found in model parameters: the parameter's path, the value received and why it is rejected. */
export interface ParameterIssue {
  /** Dotted path of the parameter, e.g. `inductor.henries` or `load.steps[1].ohms`. */
  readonly path: string;
  /** Why the value is rejected. */
  readonly message: string;
  /** The value received. */
  readonly received: unknown;
}

/** Thrown when stage or control-law parameters are invalid; carries every issue found, not only the first. */
export class ParameterError extends Error {
  readonly issues: readonly ParameterIssue[];
  constructor(what: string, issues: readonly ParameterIssue[]) {
    super(
      issues.length === 1
        ? `invalid ${what}: ${issues[0]!.path}: ${issues[0]!.message} (got ${show(issues[0]!.received)})`
        : `invalid ${what} (${issues.length} issues):\n` +
            issues.map((i) => `  - ${i.path}: ${i.message} (got ${show(i.received)})`).join('\n'),
    );
    this.name = 'ParameterError';
    this.issues = issues;
  }
}

function show(v: unknown): string {
  if (typeof v === 'number' || typeof v === 'boolean' || v === undefined || v === null) return String(v);
  try {
    const s = JSON.stringify(v);
    return s.length > 60 ? `${s.slice(0, 57)}...` : s;
  } catch {
    return String(v);
  }
}

/** Collects parameter issues; `done()` throws them all at once. @internal */
export class Issues {
  readonly list: ParameterIssue[] = [];
  constructor(private readonly what: string) {}
  add(path: string, message: string, received: unknown): void {
    this.list.push({ path, message, received });
  }
  /** A finite number > 0 (or undefined when optional and absent). */
  positive(path: string, v: unknown, optional = false): number {
    if (v === undefined && optional) return Number.NaN;
    if (typeof v !== 'number' || !Number.isFinite(v) || v <= 0) {
      this.add(path, 'must be a finite number > 0', v);
      return Number.NaN;
    }
    return v;
  }
  /** A finite number >= 0; `dflt` when absent. */
  nonNegative(path: string, v: unknown, dflt: number): number {
    if (v === undefined) return dflt;
    if (typeof v !== 'number' || !Number.isFinite(v) || v < 0) {
      this.add(path, 'must be a finite number >= 0', v);
      return dflt;
    }
    return v;
  }
  /** A finite number; `dflt` when absent. */
  finite(path: string, v: unknown, dflt: number): number {
    if (v === undefined) return dflt;
    if (typeof v !== 'number' || !Number.isFinite(v)) {
      this.add(path, 'must be a finite number', v);
      return dflt;
    }
    return v;
  }
  /** A number in [lo, hi]. */
  inRange(path: string, v: unknown, lo: number, hi: number, dflt: number): number {
    if (v === undefined) return dflt;
    if (typeof v !== 'number' || !Number.isFinite(v) || v < lo || v > hi) {
      this.add(path, `must be a number in [${lo}, ${hi}]`, v);
      return dflt;
    }
    return v;
  }
  object(path: string, v: unknown, optional = false): boolean {
    if (v === undefined && optional) return false;
    if (v === null || typeof v !== 'object' || Array.isArray(v)) {
      this.add(path, 'must be an object', v);
      return false;
    }
    return true;
  }
  done(): void {
    if (this.list.length > 0) throw new ParameterError(this.what, this.list);
  }
}

// ---------------------------------------------------------------------------------------------
// Stage parameters (all SI)

/** Input source: an ideal source with optional internal resistance and optional input LC filter. */
export interface InputParams {
  /** Source voltage, volts (> 0). */
  readonly volts: number;
  /** Internal resistance of the source, ohms (default 0). */
  readonly sourceOhms?: number;
  /** Steps of the source voltage (line steps), volts at given times. */
  readonly steps?: readonly SourceStep[];
  /**
   * Input LC filter between the source terminals and the converter: series inductor (with
   * winding resistance) from the source to the converter input, shunt capacitor (with ESR) at
   * the converter input. The filter capacitor starts charged to the source voltage.
   */
  readonly filter?: {
    /** Filter inductance, henries (> 0). */
    readonly henries: number;
    /** Filter inductor winding resistance (DCR), ohms (default 0). */
    readonly seriesOhms?: number;
    /** Filter capacitance, farads (> 0). */
    readonly farads: number;
    /** Filter capacitor ESR, ohms (default 0). */
    readonly esrOhms?: number;
  };
}

/** Power inductor. */
export interface InductorParams {
  /** Inductance, henries (> 0). */
  readonly henries: number;
  /** Winding resistance (DCR), ohms (default 0). */
  readonly seriesOhms?: number;
}

/** Output capacitor. */
export interface CapacitorParams {
  /** Capacitance, farads (> 0). */
  readonly farads: number;
  /** Equivalent series resistance, ohms (default 0). */
  readonly esrOhms?: number;
}

/**
 * Load at the output. Load steps happen at given times: current steps are source steps of the
 * engine; resistance steps switch between resistors (one switch per level, gates driven by the
 * stage's gate schedule, which {@link closeLoop} applies).
 */
export type LoadParams =
  | {
      readonly kind: 'resistor';
      /** Load resistance, ohms (> 0). */
      readonly ohms: number;
      /** Steps to a new resistance, ohms, at `atS` seconds (times strictly increasing). */
      readonly steps?: readonly { readonly atS: number; readonly ohms: number }[];
    }
  | {
      readonly kind: 'current';
      /**
       * Load current, amperes, in the power-consuming sense (> 0 draws power from the output,
       * < 0 pushes current into the output: a sinking load that the converter must absorb).
       */
      readonly amps: number;
      /** Steps to a new current, amperes, at `atS` seconds. */
      readonly steps?: readonly { readonly atS: number; readonly amps: number }[];
    };

/** Piecewise-linear diode. */
export interface DiodeParams {
  /** Forward voltage, volts (default 0: ideal). */
  readonly forwardVolts?: number;
  /** On resistance, ohms (default 0). */
  readonly onOhms?: number;
  /** Off (leakage) resistance, ohms (default: open). */
  readonly offOhms?: number;
}

/** Body diode of a switch. */
export interface BodyDiodeParams {
  /** Forward voltage, volts (default 0.7). */
  readonly forwardVolts?: number;
  /** On resistance, ohms (default 0). */
  readonly onOhms?: number;
}

/** Controlled switch: ideal (onOhms 0, open when off) or lossy. */
export interface SwitchParams {
  /** On resistance, ohms (default 0: ideal). */
  readonly onOhms?: number;
  /** Off (leakage) resistance, ohms (default: open). */
  readonly offOhms?: number;
  /**
   * Body diode. Synchronous stages always give both switches a body diode (defaults: 0.7 V,
   * 0 ohm); on the main switch of a diode-rectified stage the body diode is present only when given.
   */
  readonly bodyDiode?: BodyDiodeParams;
}

/** Parameters common to every stage kind (SI units). */
export interface ConverterParams {
  /** Rectification (default 'diode'). */
  readonly rectification?: Rectification;
  /** Switching frequency, hertz (> 0). */
  readonly switchingHz: number;
  readonly input: InputParams;
  readonly inductor: InductorParams;
  readonly outputCapacitor: CapacitorParams;
  readonly load: LoadParams;
  /** Main switch Q1 (default ideal). */
  readonly mainSwitch?: SwitchParams;
  /** Rectifier diode D1 of diode-rectified stages (default ideal). */
  readonly diode?: DiodeParams;
  /** Synchronous switch Q2 of synchronous stages (default ideal with a 0.7 V body diode). */
  readonly syncSwitch?: SwitchParams;
  /** Initial conditions (default: discharged output, no inductor current). */
  readonly initial?: {
    /** Output capacitor voltage at t = 0, volts (negative for the inverting buck-boost). */
    readonly outputVolts?: number;
    /** Inductor current at t = 0, amperes (positive in the normal power-flow direction). */
    readonly inductorAmps?: number;
  };
}

/** Parameters of any stage, with its kind. */
export type StageParams = ConverterParams & { readonly kind: StageKind };

/** Gate switching of the stage itself (resistive load steps), applied by {@link closeLoop}. */
export interface StageGateEvent {
  /** Time, seconds. */
  readonly atS: number;
  readonly gate: string;
  readonly on: boolean;
}

/**
 * Where each power device sits (node names). The topology builders give this; the shared
 * assembly adds the source, filter, capacitor, load and signals.
 * @internal
 */
export interface Wiring {
  /** Converter input node is always `vin`; output node `out`; switch node `sw`. */
  readonly main: { readonly drain: string; readonly source: string };
  /** Rectifier in the forward (conducting) direction: anode -> cathode. */
  readonly rectifier: { readonly anode: string; readonly cathode: string };
  readonly inductor: { readonly a: string; readonly b: string };
  /** Output polarity: +1 (buck, boost) or -1 (inverting buck-boost). */
  readonly polarity: 1 | -1;
}

/** Node names used by every stage. */
export const NODES = {
  /** Source terminals (after the source's internal resistance) when an input filter is present. */
  source: 'vsrc',
  /** Converter input (after the input filter; the source terminals themselves without a filter). */
  input: 'vin',
  switchNode: 'sw',
  output: 'out',
} as const;

/** Gate names used by every stage. */
export const GATES = { main: 'Q1', sync: 'Q2' } as const;

const ENGINE_BODY_DEFAULT: BodyDiodeParams = {};

function bodySpec(b: BodyDiodeParams): BodyDiodeSpec {
  return {
    ...(b.forwardVolts !== undefined ? { forwardVolts: b.forwardVolts } : {}),
    ...(b.onOhms !== undefined ? { onOhms: b.onOhms } : {}),
  };
}

function checkSwitch(is: Issues, path: string, s: SwitchParams | undefined): void {
  if (!is.object(path, s, true)) return;
  is.nonNegative(`${path}.onOhms`, s!.onOhms, 0);
  if (s!.offOhms !== undefined) is.positive(`${path}.offOhms`, s!.offOhms);
  if (s!.bodyDiode !== undefined) {
    if (is.object(`${path}.bodyDiode`, s!.bodyDiode)) {
      is.finite(`${path}.bodyDiode.forwardVolts`, s!.bodyDiode.forwardVolts, 0.7);
      is.nonNegative(`${path}.bodyDiode.onOhms`, s!.bodyDiode.onOhms, 0);
    }
  }
}

function checkSteps<K extends 'ohms' | 'amps'>(
  is: Issues,
  path: string,
  steps: readonly ({ readonly atS: number } & Record<K, number>)[] | undefined,
  field: K,
): void {
  if (steps === undefined) return;
  if (!Array.isArray(steps)) {
    is.add(path, `must be an array of { atS, ${field} }`, steps);
    return;
  }
  let last = 0;
  steps.forEach((s, i) => {
    const p = `${path}[${i}]`;
    if (!is.object(p, s)) return;
    const t = s.atS;
    if (typeof t !== 'number' || !Number.isFinite(t) || t <= 0) is.add(`${p}.atS`, 'must be a time > 0 s', t);
    else if (t <= last) is.add(`${p}.atS`, 'must be later than the step before it', t);
    else last = t;
    if (field === 'ohms') is.positive(`${p}.ohms`, s[field]);
    else is.finite(`${p}.amps`, s[field], 0);
  });
}

/** Validates the parameters shared by every stage kind; throws {@link ParameterError} with every issue. */
export function validateConverterParams(kind: StageKind, p: ConverterParams): void {
  const is = new Issues(`${kind} stage parameters`);
  if (p === null || typeof p !== 'object') {
    is.add('params', 'must be an object', p);
    is.done();
  }
  const rect = p.rectification ?? 'diode';
  if (rect !== 'diode' && rect !== 'synchronous') is.add('rectification', "must be 'diode' or 'synchronous'", p.rectification);
  is.positive('switchingHz', p.switchingHz);
  if (is.object('input', p.input)) {
    is.positive('input.volts', p.input.volts);
    is.nonNegative('input.sourceOhms', p.input.sourceOhms, 0);
    if (p.input.steps !== undefined) {
      if (!Array.isArray(p.input.steps)) is.add('input.steps', 'must be an array of { atS, value }', p.input.steps);
      else {
        let last = 0;
        p.input.steps.forEach((s, i) => {
          if (!is.object(`input.steps[${i}]`, s)) return;
          if (typeof s.atS !== 'number' || !Number.isFinite(s.atS) || s.atS < last) is.add(`input.steps[${i}].atS`, 'must be a time >= 0 s, not earlier than the step before it', s.atS);
          else last = s.atS;
          is.finite(`input.steps[${i}].value`, s.value, 0);
        });
      }
    }
    if (is.object('input.filter', p.input.filter, true)) {
      const f = p.input.filter!;
      is.positive('input.filter.henries', f.henries);
      is.nonNegative('input.filter.seriesOhms', f.seriesOhms, 0);
      is.positive('input.filter.farads', f.farads);
      is.nonNegative('input.filter.esrOhms', f.esrOhms, 0);
    }
  }
  if (is.object('inductor', p.inductor)) {
    is.positive('inductor.henries', p.inductor.henries);
    is.nonNegative('inductor.seriesOhms', p.inductor.seriesOhms, 0);
  }
  if (is.object('outputCapacitor', p.outputCapacitor)) {
    is.positive('outputCapacitor.farads', p.outputCapacitor.farads);
    is.nonNegative('outputCapacitor.esrOhms', p.outputCapacitor.esrOhms, 0);
  }
  if (is.object('load', p.load)) {
    const l = p.load;
    if (l.kind === 'resistor') {
      is.positive('load.ohms', l.ohms);
      checkSteps(is, 'load.steps', l.steps, 'ohms');
      if (l.steps !== undefined && Array.isArray(l.steps) && new Set([l.ohms, ...l.steps.map((s) => s.ohms)]).size > 12) {
        is.add('load.steps', 'at most 12 distinct load resistances (each is a switched resistor)', l.steps.length);
      }
    } else if (l.kind === 'current') {
      is.finite('load.amps', l.amps, 0);
      if (l.amps === undefined) is.add('load.amps', 'is required', l.amps);
      checkSteps(is, 'load.steps', l.steps, 'amps');
    } else {
      is.add('load.kind', "must be 'resistor' or 'current'", (l as { kind?: unknown }).kind);
    }
  }
  checkSwitch(is, 'mainSwitch', p.mainSwitch);
  if (rect === 'synchronous') {
    checkSwitch(is, 'syncSwitch', p.syncSwitch);
    if (p.diode !== undefined) is.add('diode', "applies to rectification 'diode' only (use syncSwitch)", p.diode);
  } else {
    if (p.syncSwitch !== undefined) is.add('syncSwitch', "applies to rectification 'synchronous' only (use diode)", p.syncSwitch);
    if (is.object('diode', p.diode, true)) {
      is.finite('diode.forwardVolts', p.diode!.forwardVolts, 0);
      is.nonNegative('diode.onOhms', p.diode!.onOhms, 0);
      if (p.diode!.offOhms !== undefined) is.positive('diode.offOhms', p.diode!.offOhms);
    }
  }
  if (is.object('initial', p.initial, true)) {
    is.finite('initial.outputVolts', p.initial!.outputVolts, 0);
    is.finite('initial.inductorAmps', p.initial!.inductorAmps, 0);
  }
  is.done();
}

/**
 * Assembles a stage from validated parameters and the topology's wiring: source VIN (with
 * internal resistance), optional input filter LF1/CF1, main switch Q1, rectifier D1 or
 * synchronous switch Q2, inductor L1, output capacitor C1, load RLOAD (switched levels
 * RLOAD, RLOAD1, ... when the resistance steps) or ILOAD.
 * @internal
 */
export function assembleStage(kind: StageKind, p: ConverterParams, wiring: Wiring): Stage {
  validateConverterParams(kind, p);
  const rect: Rectification = p.rectification ?? 'diode';
  const sync = rect === 'synchronous';
  const { source, input: bus, output } = NODES;
  const pol = wiring.polarity;
  const elements: ElementSpec[] = [];
  const measurements: MeasurementSpec[] = [];
  const gateSchedule: StageGateEvent[] = [];
  const srcNode = p.input.filter ? source : bus;

  elements.push({
    kind: 'voltage-source', id: 'VIN', pos: srcNode, neg: '0', volts: p.input.volts,
    ...(p.input.sourceOhms ? { seriesOhms: p.input.sourceOhms } : {}),
    ...(p.input.steps ? { steps: p.input.steps } : {}),
  });
  if (p.input.filter) {
    const f = p.input.filter;
    elements.push({ kind: 'inductor', id: 'LF1', a: source, b: bus, henries: f.henries, ...(f.seriesOhms ? { seriesOhms: f.seriesOhms } : {}) });
    elements.push({ kind: 'capacitor', id: 'CF1', a: bus, b: '0', farads: f.farads, ...(f.esrOhms ? { esrOhms: f.esrOhms } : {}), initialVolts: p.input.volts });
  }

  const ms = p.mainSwitch ?? {};
  const mainBody = ms.bodyDiode ?? (sync ? ENGINE_BODY_DEFAULT : undefined);
  elements.push({
    kind: 'switch', id: 'Q1', drain: wiring.main.drain, source: wiring.main.source, gate: GATES.main,
    ...(ms.onOhms ? { onOhms: ms.onOhms } : {}),
    ...(ms.offOhms !== undefined ? { offOhms: ms.offOhms } : {}),
    ...(mainBody ? { bodyDiode: bodySpec(mainBody) } : {}),
  });
  if (sync) {
    const ss = p.syncSwitch ?? {};
    // The synchronous switch conducts from anode to cathode of the rectifier position: its
    // drain sits at the cathode, so its body diode points the way a rectifier diode would.
    elements.push({
      kind: 'switch', id: 'Q2', drain: wiring.rectifier.cathode, source: wiring.rectifier.anode, gate: GATES.sync,
      ...(ss.onOhms ? { onOhms: ss.onOhms } : {}),
      ...(ss.offOhms !== undefined ? { offOhms: ss.offOhms } : {}),
      bodyDiode: bodySpec(ss.bodyDiode ?? ENGINE_BODY_DEFAULT),
    });
  } else {
    const d = p.diode ?? {};
    elements.push({
      kind: 'diode', id: 'D1', anode: wiring.rectifier.anode, cathode: wiring.rectifier.cathode,
      ...(d.forwardVolts ? { forwardVolts: d.forwardVolts } : {}),
      ...(d.onOhms ? { onOhms: d.onOhms } : {}),
      ...(d.offOhms !== undefined ? { offOhms: d.offOhms } : {}),
    });
  }
  elements.push({
    kind: 'inductor', id: 'L1', a: wiring.inductor.a, b: wiring.inductor.b, henries: p.inductor.henries,
    ...(p.inductor.seriesOhms ? { seriesOhms: p.inductor.seriesOhms } : {}),
    ...(p.initial?.inductorAmps ? { initialAmps: p.initial.inductorAmps } : {}),
  });
  elements.push({
    kind: 'capacitor', id: 'C1', a: output, b: '0', farads: p.outputCapacitor.farads,
    ...(p.outputCapacitor.esrOhms ? { esrOhms: p.outputCapacitor.esrOhms } : {}),
    ...(p.initial?.outputVolts ? { initialVolts: p.initial.outputVolts } : {}),
  });

  // Load: loadCurrent is the current from the output node through the load to ground, so that
  // outputVoltage * loadCurrent is the load power for every topology.
  const load = p.load;
  if (load.kind === 'resistor') {
    const levels = [load.ohms, ...(load.steps ?? []).map((s) => s.ohms)];
    const distinct = [...new Set(levels)];
    if (distinct.length === 1) {
      elements.push({ kind: 'resistor', id: 'RLOAD', a: output, b: '0', ohms: load.ohms });
      measurements.push({ name: 'iload', terms: [{ signal: 'RLOAD.current', gain: 1 }] });
    } else {
      const ids = distinct.map((_, i) => (i === 0 ? 'RLOAD' : `RLOAD${i}`));
      distinct.forEach((ohms, i) => {
        elements.push({ kind: 'switch', id: ids[i]!, drain: output, source: '0', gate: ids[i]!, onOhms: ohms, initiallyOn: i === 0 });
      });
      let active = 0;
      for (const s of load.steps ?? []) {
        const next = distinct.indexOf(s.ohms);
        if (next === active) continue;
        gateSchedule.push({ atS: s.atS, gate: ids[active]!, on: false }, { atS: s.atS, gate: ids[next]!, on: true });
        active = next;
      }
      measurements.push({ name: 'iload', terms: ids.map((id) => ({ signal: `${id}.current`, gain: 1 })) });
    }
  } else {
    // A consuming load draws current out of the output terminal, whose sign follows the polarity.
    const from = pol === 1 ? output : '0';
    const to = pol === 1 ? '0' : output;
    elements.push({
      kind: 'current-source', id: 'ILOAD', from, to, amps: load.amps,
      ...(load.steps && load.steps.length > 0 ? { steps: load.steps.map((s) => ({ atS: s.atS, value: s.amps })) } : {}),
    });
    measurements.push({ name: 'iload', terms: [{ signal: 'ILOAD.current', gain: pol }] });
  }

  // Input current: the engine counts a source's current from pos to neg through the source.
  measurements.push({ name: 'iin', terms: [{ signal: 'VIN.current', gain: -1 }] });
  // Rectifier: current in its conducting direction and voltage in its blocking direction.
  if (sync) {
    measurements.push({ name: 'irect', terms: [{ signal: 'Q2.current', gain: -1 }] });
  } else {
    measurements.push({ name: 'vrect', terms: [{ signal: 'D1.voltage', gain: -1 }] });
  }

  const signals: StageSignals = {
    inductorCurrent: 'L1.current',
    outputVoltage: output,
    switchNode: NODES.switchNode,
    inputCurrent: 'iin',
    inputVoltage: srcNode,
    loadCurrent: 'iload',
    mainSwitchCurrent: 'Q1.current',
    mainSwitchVoltage: 'Q1.voltage',
    rectifierCurrent: sync ? 'irect' : 'D1.current',
    rectifierVoltage: sync ? 'Q2.voltage' : 'vrect',
  };
  const gates: StageGates = sync ? { main: GATES.main, sync: GATES.sync } : { main: GATES.main };
  const circuit: CircuitSpec = { ground: '0', elements, measurements };
  return {
    kind,
    rectification: rect,
    circuit,
    signals,
    gates,
    periodS: 1 / p.switchingHz,
    inputVolts: p.input.volts,
    ...(gateSchedule.length > 0 ? { gateSchedule } : {}),
  };
}
