import { BranchKind, type CompiledCircuit } from './circuit.ts';

/**
 * A signal as a linear combination of network unknowns (node voltages, then branch currents,
 * as numbered by the network solve) and of entries of the extended state w = [x; u].
 */
export interface LinearRef {
  readonly mna: ReadonlyMap<number, number>;
  readonly w: ReadonlyMap<number, number>;
}

/** Physical unit of a signal, for headers. */
export type SignalUnit = 'V' | 'A' | '1';

/** A signal known to the circuit, with its unit and a one-line description. */
export interface SignalInfo {
  readonly name: string;
  readonly unit: SignalUnit;
  readonly description: string;
}

function add(target: Map<number, number>, key: number, gain: number): void {
  if (gain === 0) return;
  target.set(key, (target.get(key) ?? 0) + gain);
}

/** Resolves signal names of a compiled circuit to linear references. */
export class SignalResolver {
  private readonly cache = new Map<string, LinearRef>();
  private readonly visiting = new Set<string>();
  private readonly byElement = new Map<string, number[]>();
  readonly list: SignalInfo[] = [];
  private readonly known = new Map<string, SignalInfo>();

  constructor(private readonly c: CompiledCircuit) {
    c.branches.forEach((b, i) => {
      const arr = this.byElement.get(b.element) ?? [];
      arr.push(i);
      this.byElement.set(b.element, arr);
    });
    const info = (name: string, unit: SignalUnit, description: string): void => {
      const s = { name, unit, description };
      this.list.push(s);
      this.known.set(name, s);
    };
    for (const nd of c.nodes) info(nd, 'V', `voltage of node ${nd} to ground`);
    for (const b of c.branches) {
      if (b.id !== b.element) continue;
      if (b.kind === BranchKind.Channel) {
        info(`${b.id}.current`, 'A', `current drain -> source of switch ${b.id} (channel and body diode)`);
        info(`${b.id}.voltage`, 'V', `drain-source voltage of switch ${b.id}`);
        info(`${b.id}.channel.current`, 'A', `channel current of switch ${b.id}`);
        if (this.byElement.get(b.id)!.length > 1) {
          info(`${b.id}.body.current`, 'A', `body diode current (source -> drain) of ${b.id}`);
          info(`${b.id}.body.voltage`, 'V', `body diode voltage (source - drain) of ${b.id}`);
        }
      } else {
        info(`${b.id}.current`, 'A', `current of ${b.id}`);
        info(`${b.id}.voltage`, 'V', `voltage across ${b.id}`);
        if (b.kind === BranchKind.Capacitor) info(`${b.id}.charge`, 'V', `voltage of the ideal capacitance of ${b.id} (without ESR drop)`);
      }
    }
    for (const blk of c.blocks) {
      if (blk.id.includes('#')) continue;
      info(`${blk.id}.out`, '1', `output of block ${blk.id}`);
      for (let i = 0; i < blk.order; i++) info(c.stateNames[blk.firstState + i]!, '1', `state ${i} of block ${blk.id}`);
    }
    for (const m of c.measurements) info(m.name, '1', `measurement ${m.name}`);
  }

  /** Info of a known signal, or undefined. */
  info(name: string): SignalInfo | undefined {
    return this.known.get(name);
  }

  /** Resolves a signal name; throws an Error naming the signal when it is unknown. */
  resolve(name: string): LinearRef {
    const hit = this.cache.get(name);
    if (hit !== undefined) return hit;
    if (this.visiting.has(name)) throw new Error(`signal "${name}" depends on itself through block feedthrough (algebraic loop)`);
    this.visiting.add(name);
    try {
      const r = this.build(name);
      this.cache.set(name, r);
      return r;
    } finally {
      this.visiting.delete(name);
    }
  }

  private build(name: string): LinearRef {
    const c = this.c;
    const N = c.nodes.length;
    const mna = new Map<number, number>();
    const w = new Map<number, number>();
    if (name === c.ground) return { mna, w };
    const ni = c.nodeIndex.get(name);
    if (ni !== undefined) {
      mna.set(ni, 1);
      return { mna, w };
    }
    const si = c.stateNames.indexOf(name);
    if (si >= 0) {
      w.set(si, 1);
      return { mna, w };
    }
    const meas = c.measurements.find((m) => m.name === name);
    if (meas !== undefined) {
      for (const t of meas.terms) {
        const r = this.resolve(t.signal);
        r.mna.forEach((g, k) => add(mna, k, g * t.gain));
        r.w.forEach((g, k) => add(w, k, g * t.gain));
      }
      if (meas.offset) add(w, c.nx, meas.offset);
      return { mna, w };
    }
    const dot = name.indexOf('.');
    if (dot > 0) {
      const owner = name.slice(0, dot);
      const what = name.slice(dot + 1);
      const brs = this.byElement.get(owner);
      if (brs !== undefined) {
        const main = brs[0]!;
        const mb = c.branches[main]!;
        const body = brs.length > 1 ? brs[1]! : -1;
        const volt = (bi: number): void => {
          const b = c.branches[bi]!;
          if (b.p >= 0) add(mna, b.p, 1);
          if (b.n >= 0) add(mna, b.n, -1);
        };
        switch (what) {
          case 'current':
            add(mna, N + main, 1);
            if (body >= 0) add(mna, N + body, -1);
            return { mna, w };
          case 'voltage':
            volt(main);
            return { mna, w };
          case 'channel.current':
            if (mb.kind === BranchKind.Channel) {
              add(mna, N + main, 1);
              return { mna, w };
            }
            break;
          case 'body.current':
            if (body >= 0) {
              add(mna, N + body, 1);
              return { mna, w };
            }
            break;
          case 'body.voltage':
            if (body >= 0) {
              volt(body);
              return { mna, w };
            }
            break;
        }
      }
      const blk = c.blocks.find((b) => b.id === owner);
      if (blk !== undefined && what === 'out') {
        for (let i = 0; i < blk.order; i++) add(w, blk.firstState + i, blk.c[i]!);
        if (blk.outOffset) add(w, c.nx, blk.outOffset);
        for (let j = 0; j < blk.inputs.length; j++) {
          const dj = blk.d[j]! * blk.inputGains[j]!;
          if (dj === 0) continue;
          const r = this.resolve(blk.inputs[j]!);
          r.mna.forEach((g, k) => add(mna, k, g * dj));
          r.w.forEach((g, k) => add(w, k, g * dj));
        }
        return { mna, w };
      }
    }
    throw new Error(`unknown signal "${name}"; known signals: ${this.list.map((s) => s.name).join(', ')}`);
  }
}
