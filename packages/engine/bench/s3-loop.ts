// A hand-written loop for S3 alone: the engine's own propagators and the same location method
// (Newton on the Taylor series of the guard about an anchored propagator, evaluated in
// registers), with none of the engine's generality: no controller, queue, guard list or
// consistent-switching search; the cycle's shape (on, off until the diode current reaches
// zero, then the inductor held at zero) is known in advance. It measures how far below the
// engine the method itself goes on this machine, so that the engine's cost can be read as
// method plus generality. A benchmark reference only, not part of the library.
//
// Driven by 'controller', the same loop takes its switching instants from the scenario's own
// controller (openLoop, the one the engine runs) through a minimal context and timer queue, and
// checks that they are the fixed ones: the least any implementation that keeps the controller
// interface pays on top of the method.
import type { ControlContext } from '../src/index.ts';
import { CircuitModel } from '../src/index.ts';
import { taylorOrder } from '../src/simulator.ts';
import { DUTY, PERIOD_S, SCENARIOS, openLoop } from './scenarios.ts';

export interface S3Loop {
  /** Runs `cycles` cycles from the circuit's initial state; returns the final [L1 current, C1 charge] (one array, overwritten by the next run). */
  run(cycles: number): [number, number];
}

/** The part of the controller context that openLoop uses, over a queue of (cycle, offset, tag)
 * records kept with the earliest last. */
class MiniContext {
  key = 0;
  cyc = 0;
  len = 0;
  readonly q = new Float64Array(3 * 8);
  constructor(private readonly gates: readonly string[], private readonly masks: Int32Array) {}
  get cycle(): number {
    return this.cyc;
  }
  gate(name: string): number {
    return this.gates.indexOf(name);
  }
  setGate(g: number, on: boolean): void {
    this.key = on ? this.key | this.masks[g]! : this.key & ~this.masks[g]!;
  }
  at(tag: number, cycle: number, offsetS: number): void {
    const q = this.q;
    let n = this.len;
    for (let i = 0; i < n; i++) {
      if (q[3 * i + 2] !== tag) continue;
      q.copyWithin(3 * i, 3 * i + 3, 3 * n);
      n--;
      break;
    }
    let i = n;
    while (i > 0 && (q[3 * i - 3]! < cycle || (q[3 * i - 3] === cycle && q[3 * i - 2]! < offsetS))) {
      q[3 * i] = q[3 * i - 3]!;
      q[3 * i + 1] = q[3 * i - 2]!;
      q[3 * i + 2] = q[3 * i - 1]!;
      i--;
    }
    q[3 * i] = cycle;
    q[3 * i + 1] = offsetS;
    q[3 * i + 2] = tag;
    this.len = n + 1;
  }
  /** Hands the controller every timer due at (cycle, offsetS); throws unless the next one is at
   * (nextCycle, nextOffsetS) and the gates give `key`. */
  due(ctrl: ReturnType<typeof openLoop>, cycle: number, offsetS: number, key: number, nextCycle: number, nextOffsetS: number): void {
    this.cyc = cycle;
    const q = this.q;
    while (this.len > 0 && q[3 * this.len - 3] === cycle && q[3 * this.len - 2] === offsetS) {
      this.len--;
      ctrl.onEvent(this as unknown as ControlContext, q[3 * this.len + 2]!);
    }
    const i = 3 * this.len - 3;
    if (this.key !== key || q[i] !== nextCycle || q[i + 1] !== nextOffsetS) throw new Error('S3 loop: the controller did not switch at the fixed instants');
  }
}

export function makeS3Loop(driver: 'fixed' | 'controller' = 'fixed'): S3Loop {
  const model = new CircuitModel(SCENARIOS.S3.circuit);
  const c = model.circuit;
  const ids = c.devices.map((d) => d.id);
  const hs = ids.indexOf('HS'), d1 = ids.indexOf('D1');
  const on = model.topology(1 << hs), off = model.topology(1 << d1), dcm = model.topology(0);
  if (c.nx !== 2 || c.nu !== 2 || dcm.heldInductors.length !== 1) throw new Error('S3 loop: unexpected circuit shape');
  const tOn = DUTY * PERIOD_S, tOff = PERIOD_S - tOn;
  const Eon = on.computeE(tOn), Eoff = off.computeE(tOff);
  const row = off.deviceCurrent[d1]!; // diode current over w in the off topology
  const mo = off.m, md = dcm.m;
  const normOff = off.normA, normDcm = dcm.normA;
  const w0 = Float64Array.from(c.initialState);
  // the anchor: a propagator of the off topology to a recent crossing, renewed as the engine does
  let anchorE = Eoff, anchorH = tOff, lastRoot = -1;
  let kLoc = 2, kDcm = 2;
  // the result goes in one array made here: an array literal at the return of a loop the
  // optimiser compiled on the stack (before any run returned) has no feedback and deoptimises
  const result: [number, number] = [0, 0];
  const controlled = driver === 'controller';
  const masks = new Int32Array(c.gates.length);
  c.devices.forEach((d, i) => {
    if (d.gate >= 0) masks[d.gate]! |= 1 << i;
  });
  const ctx = new MiniContext(c.gates, masks);
  const ctrl = openLoop(false); // its start() sets it up afresh for every run
  return {
    run(cycles: number): [number, number] {
      if (controlled) {
        ctx.key = ctx.len = ctx.cyc = 0;
        ctrl.start(ctx as unknown as ControlContext);
      }
      let x0 = w0[0]!, x1 = w0[1]!;
      const u0 = w0[2]!, u1 = w0[3]!;
      const a00 = mo[0]!, a01 = mo[1]!, a10 = mo[4]!, a11 = mo[5]!, b0 = mo[2]! * u0 + mo[3]! * u1, b1 = mo[6]! * u0 + mo[7]! * u1;
      const r0 = row[0]!, r1 = row[1]!, rc = row[2]! * u0 + row[3]! * u1;
      const dcm01 = md[1]!, dcm11 = md[5]!, dcmB0 = md[2]! * u0 + md[3]! * u1, dcmB1 = md[6]! * u0 + md[7]! * u1;
      for (let k = 0; k < cycles; k++) {
        if (controlled) ctx.due(ctrl, k, 0, 1 << hs, k, tOn);
        // on
        let y0 = Eon[0]! * x0 + Eon[1]! * x1 + Eon[2]! * u0 + Eon[3]! * u1;
        let y1 = Eon[4]! * x0 + Eon[5]! * x1 + Eon[6]! * u0 + Eon[7]! * u1;
        if (controlled) ctx.due(ctrl, k, tOn, 0, k + 1, 0);
        // off, to the period's end: does the diode current reach zero?
        const e0 = Eoff[0]! * y0 + Eoff[1]! * y1 + Eoff[2]! * u0 + Eoff[3]! * u1;
        const e1 = Eoff[4]! * y0 + Eoff[5]! * y1 + Eoff[6]! * u0 + Eoff[7]! * u1;
        if (r0 * e0 + r1 * e1 + rc >= 0) {
          x0 = e0;
          x1 = e1;
          continue;
        }
        // the crossing: Newton from the anchor, twice its first step spanning the polynomial
        const E = anchorE;
        const p0 = E[0]! * y0 + E[1]! * y1 + E[2]! * u0 + E[3]! * u1;
        const p1 = E[4]! * y0 + E[5]! * y1 + E[6]! * u0 + E[7]! * u1;
        const m0 = a00 * p0 + a01 * p1 + b0, m1 = a10 * p0 + a11 * p1 + b1;
        const span = (-2 * (r0 * p0 + r1 * p1 + rc)) / (r0 * m0 + r1 * m1);
        const K = (kLoc = taylorOrder(normOff * span, kLoc));
        let x = 0.5, z0 = p0, z1 = p1;
        for (let it = 0; it < 30; it++) {
          const hs2 = x * span;
          let v0 = m0 * hs2, v1 = m1 * hs2;
          z0 = p0 + v0;
          z1 = p1 + v1;
          for (let j = 2; j <= K; j++) {
            const f = hs2 / j;
            const s0 = (a00 * v0 + a01 * v1) * f, s1 = (a10 * v0 + a11 * v1) * f;
            z0 += s0;
            z1 += s1;
            v0 = s0;
            v1 = s1;
          }
          const dz0 = a00 * z0 + a01 * z1 + b0, dz1 = a10 * z0 + a11 * z1 + b1;
          const step = (r0 * z0 + r1 * z1 + rc) / (span * (r0 * dz0 + r1 * dz1));
          x -= step;
          if (Math.abs(step) <= 1e-9 * Math.abs(x)) {
            z0 -= dz0 * step * span;
            z1 -= dz1 * step * span;
            break;
          }
        }
        const tau = anchorH + x * span;
        if (Math.abs(tau - lastRoot) * normOff <= 0.05 && !(Math.abs(tau - anchorH) * normOff <= 0.05)) {
          anchorE = off.computeE(tau);
          anchorH = tau;
        }
        lastRoot = tau;
        // the inductor held at zero for the rest of the period (Taylor series in registers)
        const h = tOff - tau;
        const Kd = (kDcm = taylorOrder(normDcm * h, kDcm));
        let v0 = (dcm01 * z1 + dcmB0) * h, v1 = (dcm11 * z1 + dcmB1) * h;
        let o0 = v0, o1 = z1 + v1;
        for (let j = 2; j <= Kd; j++) {
          const f = h / j;
          const s0 = (md[0]! * v0 + dcm01 * v1) * f, s1 = (md[4]! * v0 + dcm11 * v1) * f;
          o0 += s0;
          o1 += s1;
          v0 = s0;
          v1 = s1;
        }
        x0 = o0;
        x1 = o1;
      }
      result[0] = x0;
      result[1] = x1;
      return result;
    },
  };
}
