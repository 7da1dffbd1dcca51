import { poissonDeviate, seededNormal, seededRandom } from './random'

// The forward model of a static multi-collector measurement, from first principles, so that
// the cycle statistics can be tested against a known truth:
//  - one beam whose intensity fluctuates from cycle to cycle by a common relative amount
//    (source and focusing drift act on every isotope at once);
//  - on each Faraday cup, ion shot noise (Schottky, Ann. Phys. 57 (1918) 541:
//    σ_I² = e·I / t for a mean over t) and the Johnson–Nyquist noise of the feedback resistor
//    (Johnson, Phys. Rev. 32 (1928) 97; Nyquist, Phys. Rev. 32 (1928) 110: voltage noise
//    density 4kTR, so σ_I² = 2kT / (R·t) for a mean over t, bandwidth 1/(2t));
//  - a constant amplifier offset per cup, which on-peak-zero or off-peak readings measure;
//  - on an ion counter, Poisson counts (the true rate times the dwell time) lost to a
//    non-paralysable or paralysable dead time (Knoll, Radiation Detection and Measurement,
//    4th ed., Wiley 2010, §4.VII).

/** Boltzmann constant k in J/K (exact since the 2019 SI; CODATA 2022). */
const BOLTZMANN_J_PER_K = 1.380649e-23
/** Elementary charge e in C (exact since the 2019 SI; CODATA 2022). */
const E_C = 1.602176634e-19

export interface SimCup {
  id: string
  /** True mean signal relative to the first cup's (the ratio to the light isotope). */
  relative: number
  detector:
    | { type: 'faraday', resistorOhm: number, offsetA: number, readAs?: 'A' | 'V', /** True relative gain of the cup's amplifier: V = I·R·g. */ gain?: number }
    | { type: 'ion-counter', deadTimeS: number, model: 'non-paralysable' | 'paralysable', darkCps?: number }
}

export interface StaticSimulation {
  seed: number
  cycles: number
  /** Integration time per cycle in s (also the ion counter's dwell). */
  integrationS: number
  /** True signal of the first cup: A for Faraday cups, counts/s for ion counters. */
  lightSignal: number
  /** Relative standard deviation of the beam from cycle to cycle, common to every cup. */
  commonFluctuation: number
  cups: SimCup[]
  /** Resistor temperature for Johnson–Nyquist noise; default 293.15 K, room temperature (common practice, no source). */
  temperatureK?: number
  /** Baseline readings: one per cycle (on-peak zero), a block of n after the cycles, or none. */
  baseline?: { mode: 'per-cycle' } | { mode: 'block', readings: number } | { mode: 'none' }
  /** Probability that a cycle carries a spike (a discharge) of +spikeSize relative on one cup. */
  spikeRate?: number
  /** Default 0.05 (5 %): a made-up discharge size for the tests (common practice, no source). */
  spikeSize?: number
}

export interface SimulatedStatic {
  detectors: { collector: string, unit: string, values: number[], dwell?: { value: number, unit: string }, baseline?: number[] }[]
}

/** Counts recorded in `dwell` s at true rate n: Poisson(n·t) thinned by the dead-time model's loss. */
function recordedCounts(n: number, dwell: number, tau: number, model: 'non-paralysable' | 'paralysable', uniform: () => number, normal: () => number): number {
  const trueCounts = poissonDeviate(n * dwell, uniform)
  // The expected recorded rate: m = n/(1+nτ) (non-paralysable) or m = n·exp(−nτ) (paralysable), Knoll §4.VII.
  const keep = model === 'non-paralysable' ? 1 / (1 + n * tau) : Math.exp(-n * tau)
  // Binomial thinning by its normal approximation (counts are large where dead time matters).
  const mean = trueCounts * keep
  return Math.max(0, Math.round(mean + Math.sqrt(mean * (1 - keep)) * normal()))
}

export function simulateStatic(sim: StaticSimulation): SimulatedStatic {
  const normal = seededNormal(sim.seed)
  const uniform = seededRandom(sim.seed * 7919 + 1)
  const T = sim.temperatureK ?? 293.15
  const t = sim.integrationS
  const mode = sim.baseline?.mode ?? 'none'
  const beam = Array.from({ length: sim.cycles }, () => 1 + sim.commonFluctuation * normal())
  return {
    detectors: sim.cups.map((cup) => {
      const d = cup.detector
      const values: number[] = []
      const baseline: number[] = []
      if (d.type === 'faraday') {
        const johnson = Math.sqrt(2 * BOLTZMANN_J_PER_K * T / (d.resistorOhm * t))
        const read = (currentA: number) => (d.readAs === 'V' ? currentA * d.resistorOhm * (d.gain ?? 1) : currentA)
        for (let i = 0; i < sim.cycles; i++) {
          let I = sim.lightSignal * cup.relative * beam[i]!
          if (sim.spikeRate && uniform() < sim.spikeRate) I *= 1 + (sim.spikeSize ?? 0.05)
          const shot = Math.sqrt(E_C * I / t)
          values.push(read(I + d.offsetA + shot * normal() + johnson * normal()))
          if (mode === 'per-cycle') baseline.push(read(d.offsetA + johnson * normal()))
        }
        if (sim.baseline?.mode === 'block') for (let i = 0; i < sim.baseline.readings; i++) baseline.push(read(d.offsetA + johnson * normal()))
        return { collector: cup.id, unit: d.readAs ?? 'A', values, ...(mode === 'none' ? {} : { baseline }) }
      }
      const dark = d.darkCps ?? 0
      for (let i = 0; i < sim.cycles; i++) {
        const n = sim.lightSignal * cup.relative * beam[i]! + dark
        values.push(recordedCounts(n, t, d.deadTimeS, d.model, uniform, normal))
        if (mode === 'per-cycle') baseline.push(recordedCounts(dark, t, d.deadTimeS, d.model, uniform, normal))
      }
      if (sim.baseline?.mode === 'block') for (let i = 0; i < sim.baseline.readings; i++) baseline.push(recordedCounts(dark, t, d.deadTimeS, d.model, uniform, normal))
      return { collector: cup.id, unit: 'counts', values, dwell: { value: t, unit: 's' }, ...(mode === 'none' ? {} : { baseline }) }
    }),
  }
}
