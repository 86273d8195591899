/**
 * Benchmark (not a test): prints measured ratios, side by side.
 * 1. Periodic steady state of a lightly damped (high-Q) buck: shooting versus a brute-force
 *    transient run until its state is within 1e-9 (relative) of the orbit; periods simulated and
 *    wall time of each, and their ratios.
 * 2. Wall time of a 50-point efficiency-versus-load sweep.
 * Run: cd packages/models && npx tsx bench/analyses.bench.ts
 */
import { CircuitModel, simulate } from '@edgewise/engine';
import { efficiencySweep, periodicSteadyState } from '../src/analyses/index.ts';
import { boostOpenLoop, buckVm } from '../test/analyses-fixtures.ts';

function bestOf<T>(k: number, f: () => T): { ms: number; value: T } {
  let best = Infinity;
  let value!: T;
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
const shoot = bestOf(3, () => {
  const model = new CircuitModel(base.circuit);
  const r = periodicSteadyState({ ...base, circuit: model });
  if (r.status !== 'converged') throw new Error(r.message);
  return r;
});
const ss = shoot.value;
// periods the shooting simulated: warm-up + one per Newton trial + the final trace
const shootPeriods = 5 + ss.iterations + 1;
const iL = ss.stateNames.indexOf('L.current'), vC = ss.stateNames.indexOf('C.charge');
const brute = bestOf(3, () => {
  const model = new CircuitModel(base.circuit);
  let w: Float64Array | undefined;
  let periods = 0;
  const chunk = 100;
  for (;;) {
    const r = simulate(model, { stopS: chunk * T, timeBaseS: T, controller: base.createController(), ...(w ? { initialState: w } : {}) });
    w = r.state;
    periods += chunk;
    const scale = Math.max(Math.abs(ss.state[iL]!), Math.abs(ss.state[vC]!));
    const err = Math.max(Math.abs(w[iL]! - ss.state[iL]!), Math.abs(w[vC]! - ss.state[vC]!)) / scale;
    if (err <= 1e-9 || periods > 200_000) return periods;
  }
});
console.log('steady state of a high-Q CCM buck (Q = 15.8, dominant multiplier magnitude', ss.spectralRadius.toFixed(5), ')');
console.log(`  shooting:    ${shootPeriods} periods, ${shoot.ms.toFixed(1)} ms (${ss.iterations} Newton iterations, residual ${ss.residual.toExponential(1)})`);
console.log(`  brute force: ${brute.value} periods, ${brute.ms.toFixed(1)} ms (to 1e-9 relative, checked every 100 periods)`);
console.log(`  ratio: ${(brute.value / shootPeriods).toFixed(1)}x periods, ${(brute.ms / shoot.ms).toFixed(1)}x wall time`);

const loads = Array.from({ length: 50 }, (_, i) => 5 + i);
const sweep = bestOf(2, () => efficiencySweep((r) => boostOpenLoop({ duty: 0.5, r, rl: 0.1, l: 1e-3 }), loads, { inputs: ['VIN'], loads: ['R'] }));
const ok = sweep.value.filter((p) => p.report !== null).length;
console.log(`efficiency sweep: 50 load points (${ok} converged) in ${sweep.ms.toFixed(1)} ms, ${(sweep.ms / 50).toFixed(2)} ms per point`);
