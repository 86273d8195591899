/**
 * Benchmark (not a test): prints measured ratios, side by side.
 * 1. Periodic steady state of a lightly damped (high-Q) buck: shooting versus a brute-force
 *    transient run until its state is within 1e-9 (relative) of the orbit; periods simulated and
 *    wall time of each, and their ratios. Both sides run interleaved, JIT warm, best of 20; once
 *    with each side compiling the circuit itself (a one-off analysis: the engine's compilation
 *    and topology set-up, ~0.5-1 ms, is then a floor under shooting's time) and once with one
 *    compiled model shared by both (what a sweep or a repeated analysis pays).
 * 2. Wall time of a 50-point efficiency-versus-load sweep.
 * Run: cd packages/models && npx tsx bench/analyses.bench.ts
 */
import { CircuitModel, simulate } from '@edgewise/engine';
import { efficiencySweep, periodicSteadyState, type SteadyState } from '../src/analyses/index.ts';
import { boostOpenLoop, buckVm } from '../test/analyses-fixtures.ts';

/** Best wall time of k timed runs after one untimed run (so both sides are compared with the JIT warm). */
function bestOf<T>(k: number, f: () => T): { ms: number; value: T } {
  let best = Infinity;
  let value = f();
  for (let i = 0; i < k; i++) {
    const t0 = performance.now();
    value = f();
    best = Math.min(best, performance.now() - t0);
  }
  return { ms: best, value };
}

// CCM, Q = R sqrt(C/L) = 15.8: the slowest Floquet multiplier is ~0.995 per period
const base = buckVm({ l: 200e-6, c: 20e-6, r: 50 });
const T = base.timeBaseS;
const ref = periodicSteadyState(base);
if (ref.status !== 'converged') throw new Error(ref.message);
const iL = ref.stateNames.indexOf('L.current'), vC = ref.stateNames.indexOf('C.charge');
const shooting = (model: CircuitModel): SteadyState => {
  const r = periodicSteadyState({ ...base, circuit: model });
  if (r.status !== 'converged') throw new Error(r.message);
  return r;
};
const bruteForce = (model: CircuitModel): number => {
  let w: Float64Array | undefined;
  let periods = 0;
  const chunk = 100;
  for (;;) {
    const r = simulate(model, { stopS: chunk * T, timeBaseS: T, controller: base.createController(), ...(w ? { initialState: w } : {}) });
    w = r.state;
    periods += chunk;
    const scale = Math.max(Math.abs(ref.state[iL]!), Math.abs(ref.state[vC]!));
    const err = Math.max(Math.abs(w[iL]! - ref.state[iL]!), Math.abs(w[vC]! - ref.state[vC]!)) / scale;
    if (err <= 1e-9 || periods > 200_000) return periods;
  }
};
console.log('steady state of a high-Q CCM buck (Q = 15.8, dominant multiplier magnitude', ref.spectralRadius.toFixed(5), ')');
// (a) each side compiles the circuit and builds its topologies itself (one-off analysis);
// (b) both sides share one compiled model (what the analyses do internally, and what a sweep
//     or a Newton loop over a fixed circuit pays after its first point)
const shared = new CircuitModel(base.circuit);
for (const [label, model] of [['compiling the circuit in each run', null], ['with a compiled model shared by both', shared]] as const) {
  // interleaved rounds, best of each, so that a load change on the machine hits both sides
  let shootMs = Infinity, bruteMs = Infinity;
  let ss!: SteadyState;
  let bruteP = 0;
  for (let round = 0; round < 21; round++) {
    let t0 = performance.now();
    ss = shooting(model ?? new CircuitModel(base.circuit));
    if (round > 0) shootMs = Math.min(shootMs, performance.now() - t0);
    t0 = performance.now();
    bruteP = bruteForce(model ?? new CircuitModel(base.circuit));
    if (round > 0) bruteMs = Math.min(bruteMs, performance.now() - t0);
  }
  // periods the shooting simulated: warm-up + one per Newton trial + the first trace
  const shootPeriods = 5 + ss.iterations + 1;
  console.log(`  ${label}:`);
  console.log(`    shooting:    ${shootPeriods} periods, ${shootMs.toFixed(2)} ms (${ss.iterations} Newton iterations, residual ${ss.residual.toExponential(1)})`);
  console.log(`    brute force: ${bruteP} periods, ${bruteMs.toFixed(2)} ms (to 1e-9 relative, checked every 100 periods)`);
  console.log(`    ratio: ${(bruteP / shootPeriods).toFixed(1)}x periods, ${(bruteMs / shootMs).toFixed(1)}x wall time`);
}

const loads = Array.from({ length: 50 }, (_, i) => 5 + i);
const sweep = bestOf(2, () => efficiencySweep((r) => boostOpenLoop({ duty: 0.5, r, rl: 0.1, l: 1e-3 }), loads, { inputs: ['VIN'], loads: ['R'] }));
const ok = sweep.value.filter((p) => p.report !== null).length;
console.log(`efficiency sweep: 50 load points (${ok} converged) in ${sweep.ms.toFixed(1)} ms, ${(sweep.ms / 50).toFixed(2)} ms per point`);
