import { LuDecomposition, Matrix } from 'ml-matrix';
import { BranchKind, type Branch, type CompiledCircuit } from './circuit.ts';
import { SimulationError } from './errors.ts';
import { expm } from './expm.ts';
import type { LinearRef, SignalResolver } from './signals.ts';

/** Resistance given to open devices around a floating island, and when probing interrupted currents, ohms. */
export const PROBE_OHMS = 1e9;

const enum Cls {
  Conn, // resistive or voltage-defining with resistance: connects nodes
  V0, // voltage-defining with zero resistance
  I, // current-defining
}

interface BranchState {
  cls: Cls;
  ohms: number;
  held: boolean; // inductor held at zero (no path)
  leaky: boolean; // open device given PROBE_OHMS
}

/** Slots of the duration tables of a topology (a power of two; kept at most half full). */
export const DURATION_SLOTS = 2048;

/** Describes the conduction state of every device of a topology key. */
export function describeKey(c: CompiledCircuit, key: number): string {
  return c.devices.map((d, i) => `${d.id}=${(key >>> i) & 1 ? 'on' : 'off'}`).join(' ');
}

/**
 * One topology: the linear time-invariant system dw/dt = M w that holds while every device
 * keeps its conduction state. w = [x; u] (states, then inputs with u[0] = 1); the last nu rows
 * of M are zero, so only the first nx rows are stored.
 */
export class Topology {
  readonly key: number;
  readonly nx: number;
  readonly n: number;
  /** Top nx rows of M, row-major nx x n. */
  readonly m: Float64Array;
  /** Infinity norm of the state block A. */
  readonly normA: number;
  /** The infinity norm of the state rows of the extended matrix M = [A B; 0 0] (inputs are
   * constant states): ||exp(M t) w||_inf <= exp(normM t) ||w||_inf. */
  readonly normM: number;
  /** A power of two with normA * baseStep <= 1 (Infinity when A = 0). */
  readonly baseStep: number;
  /** state indices of inductors held at zero current (no path in this topology) */
  readonly heldInductors: Int32Array;
  /** per device: row over w of the device current (channel / diode) */
  readonly deviceCurrent: Float64Array[];
  /** per device: row over w of the device voltage (p - n) */
  readonly deviceVoltage: Float64Array[];
  /** unknowns solution rows: (N + Nb) x n */
  private readonly sol: Float64Array;
  private readonly N: number;
  /** propagator cache: duration -> top nx rows of expm(M h) */
  readonly cache = new Map<number, Float64Array>();
  /** the diode guards of this topology (built by the simulator, shared by runs) */
  deviceGuards: unknown = undefined;
  /** the same key with open devices given PROBE_OHMS (set by the simulator when first needed) */
  probeTopology: Topology | undefined = undefined;
  /**
   * Durations seen once (a second sighting caches their propagator), and the durations of
   * `cache` that the simulator put there with their propagators: open-addressed tables over the
   * bits of the duration (NaN marks an empty slot, see DURATION_SLOTS), so that the lookup of a
   * fresh duration at every event-terminated segment neither allocates nor boxes the double, as
   * a Set or Map keyed by numbers does.
   */
  readonly seenKeys = new Float64Array(DURATION_SLOTS).fill(Number.NaN);
  seenCount = 0;
  readonly cachedKeys = new Float64Array(DURATION_SLOTS).fill(Number.NaN);
  readonly cachedE: (Float64Array | null)[] = new Array<Float64Array | null>(DURATION_SLOTS).fill(null);
  cachedCount = 0;
  lastH = Number.NaN;
  /** the duration of the last Taylor series taken in this topology and its order (simulator) */
  taylorH = Number.NaN;
  taylorK = 0;
  /** the duration of the guard screen's last growth bound in this topology and exp(normM h) (simulator) */
  growH = Number.NaN;
  grow = 1;
  lastE: Float64Array | null = null;
  /** cached E(k * baseStep) by k */
  readonly multiples = new Map<number, Float64Array>();

  constructor(
    readonly circuit: CompiledCircuit,
    key: number,
    sol: Float64Array,
    m: Float64Array,
    held: number[],
    private readonly resolver: SignalResolver,
  ) {
    this.key = key;
    this.nx = circuit.nx;
    this.n = circuit.nx + circuit.nu;
    this.N = circuit.nodes.length;
    this.sol = sol;
    this.m = m;
    this.heldInductors = Int32Array.from(held);
    const nx = this.nx, n = this.n;
    // infinity norms of A (the state columns) and of the state rows of M (all columns)
    let norm = 0, normM = 0;
    for (let i = 0; i < nx; i++) {
      let sa = 0, sb = 0;
      for (let j = 0; j < nx; j++) sa += Math.abs(m[i * n + j]!);
      for (let j = nx; j < n; j++) sb += Math.abs(m[i * n + j]!);
      norm = Math.max(norm, sa);
      normM = Math.max(normM, sa + sb);
    }
    this.normA = norm;
    this.normM = normM;
    this.baseStep = norm === 0 ? Infinity : 2 ** Math.floor(Math.log2(1 / norm));
    this.deviceCurrent = circuit.devices.map((d) => this.unknownRow(this.N + d.branch));
    this.deviceVoltage = circuit.devices.map((d) => {
      const b = circuit.branches[d.branch]!;
      const r = new Float64Array(n);
      if (b.p >= 0) for (let j = 0; j < n; j++) r[j] += sol[b.p * n + j]!;
      if (b.n >= 0) for (let j = 0; j < n; j++) r[j] -= sol[b.n * n + j]!;
      return r;
    });
  }

  private unknownRow(k: number): Float64Array {
    return this.sol.slice(k * this.n, (k + 1) * this.n);
  }

  /** Row over w of a linear reference in this topology. */
  row(ref: LinearRef): Float64Array {
    const n = this.n;
    const r = new Float64Array(n);
    ref.mna.forEach((g, k) => {
      for (let j = 0; j < n; j++) r[j] += g * this.sol[k * n + j]!;
    });
    ref.w.forEach((g, k) => {
      r[k] += g;
    });
    return r;
  }

  /** Row over w of a named signal in this topology. */
  signalRow(name: string): Float64Array {
    return this.row(this.resolver.resolve(name));
  }

  /** The full n x n matrix M (bottom nu rows zero). */
  fullM(): Float64Array {
    const n = this.n;
    const f = new Float64Array(n * n);
    f.set(this.m);
    return f;
  }

  /** Top nx rows of expm(M h), computed fresh. */
  computeE(h: number): Float64Array {
    const n = this.n;
    const f = this.fullM();
    for (let i = 0; i < f.length; i++) f[i]! *= h;
    const e = expm(f, n);
    return e.slice(0, this.nx * n);
  }

  /** State matrix A (nx x nx) and input matrix B (nx x nu), row-major. */
  matrices(): { a: Float64Array; b: Float64Array } {
    const nx = this.nx, n = this.n, nu = n - nx;
    const a = new Float64Array(nx * nx);
    const b = new Float64Array(nx * nu);
    for (let i = 0; i < nx; i++) {
      for (let j = 0; j < nx; j++) a[i * nx + j] = this.m[i * n + j]!;
      for (let j = 0; j < nu; j++) b[i * nu + j] = this.m[i * n + nx + j]!;
    }
    return { a, b };
  }
}

function unionFind(size: number): { find: (i: number) => number; union: (a: number, b: number) => boolean } {
  const parent = Int32Array.from({ length: size }, (_, i) => i);
  const find = (i: number): number => {
    while (parent[i] !== i) {
      parent[i] = parent[parent[i]!]!;
      i = parent[i]!;
    }
    return i;
  };
  return {
    find,
    union: (a, b) => {
      const ra = find(a), rb = find(b);
      if (ra === rb) return false;
      parent[ra] = rb;
      return true;
    },
  };
}

function baseState(b: Branch, on: boolean, probe: boolean): BranchState {
  switch (b.kind) {
    case BranchKind.Resistor:
      return { cls: Cls.Conn, ohms: b.ohms, held: false, leaky: false };
    case BranchKind.Inductor:
    case BranchKind.ISource:
    case BranchKind.CtrlI:
      return { cls: Cls.I, ohms: 0, held: false, leaky: false };
    case BranchKind.Capacitor:
    case BranchKind.VSource:
      return { cls: b.ohms > 0 ? Cls.Conn : Cls.V0, ohms: b.ohms, held: false, leaky: false };
    case BranchKind.CtrlV:
      return { cls: Cls.V0, ohms: 0, held: false, leaky: false };
    case BranchKind.Channel:
    case BranchKind.Diode:
      if (on) return { cls: b.ohms > 0 ? Cls.Conn : Cls.V0, ohms: b.ohms, held: false, leaky: false };
      if (Number.isFinite(b.offOhms)) return { cls: Cls.Conn, ohms: b.offOhms, held: false, leaky: false };
      if (probe) return { cls: Cls.Conn, ohms: PROBE_OHMS, held: false, leaky: true };
      return { cls: Cls.I, ohms: 0, held: false, leaky: false };
  }
}

/** Builds the network solve for one topology key. */
export function buildTopology(c: CompiledCircuit, resolver: SignalResolver, key: number, probe = false): Topology {
  const N = c.nodes.length;
  const Nb = c.branches.length;
  const G = N; // ground index in union-find
  const on = (b: Branch): boolean => b.device >= 0 && ((key >>> b.device) & 1) === 1;
  const st = c.branches.map((b) => baseState(b, on(b), probe));

  // Resolve floating islands: hold path-less inductors; give open devices around other islands a probe resistance.
  for (let guard = 0; guard < 4 * Nb + 4; guard++) {
    const uf = unionFind(N + 1);
    c.branches.forEach((b, k) => {
      if (st[k]!.cls !== Cls.I) uf.union(b.p < 0 ? G : b.p, b.n < 0 ? G : b.n);
    });
    const gr = uf.find(G);
    let changed = false;
    const islandRoots = new Set<number>();
    for (let i = 0; i < N; i++) if (uf.find(i) !== gr) islandRoots.add(uf.find(i));
    if (islandRoots.size === 0) break;
    for (const root of islandRoots) {
      const inside = (node: number): boolean => node >= 0 && uf.find(node) === root;
      const crossing: number[] = [];
      c.branches.forEach((b, k) => {
        if (st[k]!.cls === Cls.I && inside(b.p) !== inside(b.n)) crossing.push(k);
      });
      const inductors = crossing.filter((k) => c.branches[k]!.kind === BranchKind.Inductor);
      if (inductors.length > 0) {
        for (const k of inductors) st[k] = { cls: Cls.V0, ohms: 0, held: true, leaky: false };
        changed = true;
        continue;
      }
      const sources = crossing.filter((k) => c.branches[k]!.kind === BranchKind.ISource || c.branches[k]!.kind === BranchKind.CtrlI);
      if (sources.length > 0) {
        const ids = sources.map((k) => c.branches[k]!.element);
        throw new SimulationError(
          'floating-current-source',
          `current source ${ids.join(', ')} has no path in topology [${describeKey(c, key)}]`,
          ids,
        );
      }
      for (const k of crossing) {
        st[k] = { cls: Cls.Conn, ohms: PROBE_OHMS, held: false, leaky: true };
        changed = true;
      }
    }
    if (!changed) break;
  }

  // Loops of zero-resistance voltage-defining branches make the network singular.
  {
    const uf = unionFind(N + 1);
    const adj: { to: number; k: number }[][] = Array.from({ length: N + 1 }, () => []);
    c.branches.forEach((b, k) => {
      if (st[k]!.cls !== Cls.V0) return;
      const a = b.p < 0 ? G : b.p;
      const z = b.n < 0 ? G : b.n;
      if (!uf.union(a, z)) {
        // find the path a -> z in the forest of V0 branches
        const prev = new Map<number, { from: number; k: number }>([[a, { from: -1, k: -1 }]]);
        const queue = [a];
        while (queue.length > 0) {
          const v = queue.shift()!;
          if (v === z) break;
          for (const e of adj[v]!) if (!prev.has(e.to)) {
            prev.set(e.to, { from: v, k: e.k });
            queue.push(e.to);
          }
        }
        const loop = [k];
        for (let v = z; v !== a && prev.has(v); v = prev.get(v)!.from) loop.push(prev.get(v)!.k);
        const ids = [...new Set(loop.map((i) => c.branches[i]!.id))];
        const hasDevice = loop.some((i) => c.branches[i]!.device >= 0);
        throw new SimulationError(
          hasDevice ? 'shoot-through' : 'voltage-loop',
          hasDevice
            ? `shoot-through: ${ids.join(', ')} form a loop of voltage sources, capacitors and conducting zero-resistance devices (topology [${describeKey(c, key)}])`
            : `${ids.join(', ')} form a loop of voltage sources and capacitors with zero resistance; add series resistance`,
          ids,
        );
      }
      adj[a]!.push({ to: z, k });
      adj[z]!.push({ to: a, k });
    });
  }

  // Modified nodal analysis with every branch current as an unknown.
  const nx = c.nx, nu = c.nu, n = nx + nu;
  const size = N + Nb;
  const S = Matrix.zeros(size, size);
  const R = Matrix.zeros(size, n);
  const held: number[] = [];
  c.branches.forEach((b, k) => {
    const row = N + k;
    const col = N + k;
    if (b.p >= 0) S.set(b.p, col, S.get(b.p, col) + 1);
    if (b.n >= 0) S.set(b.n, col, S.get(b.n, col) - 1);
    const s = st[k]!;
    const vpn = (g: number): void => {
      if (b.p >= 0) S.set(row, b.p, S.get(row, b.p) + g);
      if (b.n >= 0) S.set(row, b.n, S.get(row, b.n) - g);
    };
    const ctrl = (gain: number): void => {
      const ref = resolver.resolve(b.control);
      ref.mna.forEach((g, u) => S.set(row, u, S.get(row, u) - gain * g));
      ref.w.forEach((g, u) => R.set(row, u, R.get(row, u) + gain * g));
    };
    if (b.kind === BranchKind.CtrlV) {
      vpn(1);
      ctrl(b.gain);
      return;
    }
    if (b.kind === BranchKind.CtrlI) {
      S.set(row, col, 1);
      ctrl(b.gain);
      return;
    }
    if (s.cls === Cls.I) {
      S.set(row, col, 1);
      if (b.kind === BranchKind.Inductor) R.set(row, b.stateIndex, 1);
      else if (b.kind === BranchKind.ISource) {
        R.set(row, nx + b.inputIndex, 1);
        if (b.sineState >= 0) R.set(row, b.sineState, b.sineAmplitude);
      }
      return;
    }
    vpn(1);
    S.set(row, col, -s.ohms);
    if (s.held) {
      held.push(b.stateIndex);
      return;
    }
    if (b.kind === BranchKind.Capacitor) R.set(row, b.stateIndex, 1);
    else if (b.kind === BranchKind.VSource) {
      R.set(row, nx + b.inputIndex, 1);
      if (b.sineState >= 0) R.set(row, b.sineState, b.sineAmplitude);
    } else if (b.kind === BranchKind.Diode && on(b)) R.set(row, nx, b.forwardVolts);
  });
  const lu = new LuDecomposition(S);
  if (lu.isSingular()) {
    throw new SimulationError('singular-network', `the network equations are singular in topology [${describeKey(c, key)}]`, c.devices.map((d) => d.id));
  }
  const X = lu.solve(R);
  const sol = new Float64Array(size * n);
  for (let i = 0; i < size; i++) for (let j = 0; j < n; j++) sol[i * n + j] = X.get(i, j);
  // Guard against a near-singular solve.
  for (let i = 0; i < sol.length; i++) {
    if (!Number.isFinite(sol[i]!)) throw new SimulationError('singular-network', `the network equations are singular in topology [${describeKey(c, key)}]`, c.devices.map((d) => d.id));
  }

  // State derivative rows.
  const m = new Float64Array(nx * n);
  const nodeRow = (node: number, j: number): number => (node < 0 ? 0 : sol[node * n + j]!);
  c.branches.forEach((b, k) => {
    if (b.kind === BranchKind.Inductor) {
      if (st[k]!.held) return;
      const s = b.stateIndex;
      for (let j = 0; j < n; j++) m[s * n + j] = (nodeRow(b.p, j) - nodeRow(b.n, j)) / b.henries;
      m[s * n + s]! -= b.ohms / b.henries;
    } else if (b.kind === BranchKind.Capacitor) {
      const s = b.stateIndex;
      for (let j = 0; j < n; j++) m[s * n + j] = sol[(N + k) * n + j]! / b.farads;
    }
  });
  const topo = new Topology(c, key, sol, m, held, resolver);
  for (const blk of c.blocks) {
    const f = blk.firstState;
    if (blk.kind === 'ramp') {
      m[f * n + nx] = blk.slope;
    } else if (blk.kind === 'sine') {
      m[f * n + f + 1] = blk.slope;
      m[(f + 1) * n + f] = -blk.slope;
    } else {
      const ord = blk.order;
      const ni = blk.inputs.length;
      const rows = blk.inputs.map((name) => topo.signalRow(name));
      for (let i = 0; i < ord; i++) {
        for (let j = 0; j < ord; j++) m[(f + i) * n + f + j]! += blk.a[i * ord + j]!;
        for (let q = 0; q < ni; q++) {
          const g = blk.b[i * ni + q]! * blk.inputGains[q]!;
          if (g === 0) continue;
          const r = rows[q]!;
          for (let j = 0; j < n; j++) m[(f + i) * n + j]! += g * r[j]!;
        }
      }
    }
  }
  // Recompute the norm and base step now that block rows are in.
  return new Topology(c, key, sol, m, held, resolver);
}
