import { seededNormal } from '../random'
import type { GasSystem, Measured, SequenceItem, SequenceRole } from './types'

// A δ sequence from first principles, so that the engine can be tested against a known truth:
// true δ on the scale → atomic ratios (17O mass-dependent, Brand et al. 2010) → exact
// isotopologue abundances (random distribution of isotopes over a molecule's atoms) → ion beams
// through an instrument with its own scale compression (memory of a background gas mixed into
// the sample path), offset (sample-path fractionation per mass unit), linear drift of that
// fractionation, a procedural blank, H3+ formation (∝ i2²), and noise: ion shot noise
// (Schottky, Ann. Phys. 57 (1918) 541: σ² = e·I/t) and the feedback resistor's Johnson–Nyquist
// noise (Johnson, Phys. Rev. 32 (1928) 97: σ² = 2kT/(R·t) for a mean over t).

// The simulator's own constants, typed here from their sources and NOT imported from the
// engine, so that an error in the engine's constants shows as a difference (all from memory):
// the IUPAC 17O set, Brand, Assonov & Coplen, Pure Appl. Chem. 82 (2010) 1719: K, λ, 13R_VPDB,
// 18R_VPDB-CO2; VSMOW 2R Hagemann et al., Tellus 22 (1970) 712; 18R Baertschi, EPSL 31 (1976)
// 341; 17R Li et al., Chin. Sci. Bull. 33 (1988) 1610; air 15R Junk & Svec, GCA 14 (1958) 234;
// δ18O VPDB → VSMOW 1.03092, 30.92 (Brand et al., Pure Appl. Chem. 86 (2014) 425).
const SIM = {
  K: 0.01022461, lambda: 0.528, r13VPDB: 0.011180, r18VPDBCO2: 0.002088349,
  r2VSMOW: 155.76e-6, r18VSMOW: 2005.20e-6, r17VSMOW: 379.9e-6, r15AIR: 0.0036765,
  vsmowFactor: 1.03092, vsmowOffset: 30.92,
} as const
const K_VSMOW = SIM.r17VSMOW / SIM.r18VSMOW ** SIM.lambda

const E_C = 1.602176634e-19 // elementary charge, C (exact, 2019 SI; CODATA 2022)
const K_B = 1.380649e-23 // Boltzmann constant, J/K (exact, 2019 SI; CODATA 2022)

export type DeltaGasSystem = Exclude<GasSystem, 'Ar'>

export interface SimulatedInstrument {
  /** Fraction of a background gas mixed into every sample-path acquisition (scale compression). */
  memoryFraction: number
  /** The background gas's true δ, by quantity. */
  background: Record<string, number>
  /** Sample-path fractionation at t = 0, ‰ per mass unit (scale offset). */
  fractionationPermilPerU: number
  /** Its linear drift, ‰ per mass unit per hour. */
  driftPermilPerUPerHour: number
  /**
   * Run-to-run reproducibility: a fractionation drawn afresh for every sample-path acquisition,
   * N(0, σ) in ‰ per mass unit, on top of the noise the engine is told about (a real
   * instrument's scatter between acquisitions is usually several times its counting noise;
   * made-up test magnitude, no source). 0 or absent: none.
   */
  scatterPermilPerU?: number
  /** Procedural blank in every sample-path acquisition: its major-beam current (A) and δ. */
  blank?: { majorA: number, delta: Record<string, number> }
  /** H2: H3+ current = K·i2², K in 1/A. */
  h3FactorPerA?: number
  integrationS: number
  /** Feedback resistors: major beam and minor beams (common practice, no source: 3e8–1e12 Ω). */
  resistorMajorOhm: number
  resistorMinorOhm: number
  temperatureK: number
  noise: boolean
}

export interface SimulatedAcquisition {
  role: SequenceRole
  material?: string
  /** True δ on the scale by quantity (unused for blanks). */
  truth: Record<string, number>
  /** Current of the major beam (m/z 44, 28, 32 or 2), A. */
  majorA: number
}

export interface SequenceSimulation {
  gas: DeltaGasSystem
  seed: number
  instrument: SimulatedInstrument
  acquisitions: SimulatedAcquisition[]
  /** CO2: δ18O truths on VPDB (default) or VSMOW. */
  oxygenScale?: 'VPDB' | 'VSMOW'
  startMs?: number
  spacingMs?: number
}

export const defaultSimulatedInstrument: SimulatedInstrument = {
  memoryFraction: 0.015,
  background: {},
  fractionationPermilPerU: -1.2,
  driftPermilPerUPerHour: 0.01,
  integrationS: 20,
  resistorMajorOhm: 3e8,
  resistorMinorOhm: 1e11,
  temperatureK: 293.15,
  noise: true,
}

/** Relative isotopologue abundances by nominal m/z for a gas of true δ (‰ on the scale). */
export function isotopologueAbundances(gas: DeltaGasSystem, d: Record<string, number>, oxygenScale: 'VPDB' | 'VSMOW' = 'VPDB'): Record<string, number> {
  const frac = (r: number[]) => { const s = 1 + r.reduce((a, b) => a + b, 0); return [1 / s, ...r.map(x => x / s)] }
  if (gas === 'CO2') {
    // δ18O on VPDB(-CO2); on VSMOW it is the carbonate-equivalent value (shared/schemas/methods.ts).
    const d18VPDB = oxygenScale === 'VSMOW' ? ((d['δ18O'] ?? 0) - SIM.vsmowOffset) / SIM.vsmowFactor : (d['δ18O'] ?? 0)
    const r13 = SIM.r13VPDB * (1 + (d['δ13C'] ?? 0) / 1000)
    const r18 = SIM.r18VPDBCO2 * (1 + d18VPDB / 1000)
    const [c12, c13] = frac([r13]) as [number, number]
    const [o16, o17, o18] = frac([SIM.K * r18 ** SIM.lambda, r18]) as [number, number, number]
    return {
      44: c12 * o16 * o16,
      45: c13 * o16 * o16 + 2 * c12 * o16 * o17,
      46: 2 * c12 * o16 * o18 + c12 * o17 * o17 + 2 * c13 * o16 * o17,
    }
  }
  if (gas === 'N2') {
    const [n14, n15] = frac([SIM.r15AIR * (1 + (d['δ15N'] ?? 0) / 1000)]) as [number, number]
    return { 28: n14 * n14, 29: 2 * n14 * n15, 30: n15 * n15 }
  }
  if (gas === 'O2') {
    const r18 = SIM.r18VSMOW * (1 + (d['δ18O'] ?? 0) / 1000)
    const r17 = d['δ17O'] !== undefined ? SIM.r17VSMOW * (1 + d['δ17O'] / 1000) : K_VSMOW * r18 ** SIM.lambda
    const [o16, o17, o18] = frac([r17, r18]) as [number, number, number]
    return { 32: o16 * o16, 33: 2 * o16 * o17, 34: 2 * o16 * o18 + o17 * o17 }
  }
  const [h, dd] = frac([SIM.r2VSMOW * (1 + (d['δ2H'] ?? 0) / 1000)]) as [number, number]
  return { 2: h * h, 3: 2 * h * dd }
}

const MAJOR: Record<DeltaGasSystem, string> = { CO2: '44', N2: '28', O2: '32', H2: '2' }

/** Beam currents (A) of one gas at its major-beam current, optionally fractionated per mass unit. */
function beamsOf(abundances: Record<string, number>, major: string, majorA: number, fractionationPermil = 0): Record<string, number> {
  const out: Record<string, number> = {}
  for (const [mz, a] of Object.entries(abundances)) {
    out[mz] = majorA * a / abundances[major]! * (1 + fractionationPermil / 1000) ** (Number(mz) - Number(major))
  }
  return out
}

export function simulateSequence(sim: SequenceSimulation): SequenceItem[] {
  const ins = sim.instrument
  const normal = seededNormal(sim.seed)
  const major = MAJOR[sim.gas]
  const start = sim.startMs ?? Date.UTC(2026, 0, 5, 8)
  const spacing = sim.spacingMs ?? 15 * 60_000
  const abundances = (d: Record<string, number>) => isotopologueAbundances(sim.gas, d, sim.oxygenScale)
  const background = abundances(ins.background)
  return sim.acquisitions.map((acq, i) => {
    const t = i * spacing
    const hours = t / 3_600_000
    const samplePath = acq.role !== 'reference-gas'
    let beams: Record<string, number> = {}
    if (acq.role !== 'blank') {
      const a = abundances(acq.truth)
      // Memory: the background gas mixed in at the molecular level (linear in abundances).
      const mixed = samplePath ? Object.fromEntries(Object.keys(a).map(k => [k, (1 - ins.memoryFraction) * a[k]! + ins.memoryFraction * background[k]!])) : a
      const scatter = samplePath && ins.scatterPermilPerU ? ins.scatterPermilPerU * normal() : 0
      const phi = samplePath ? ins.fractionationPermilPerU + ins.driftPermilPerUPerHour * hours + scatter : 0
      beams = beamsOf(mixed, major, acq.majorA, phi)
    }
    if (ins.blank && acq.role !== 'reference-gas') {
      const b = beamsOf(abundances(ins.blank.delta), major, ins.blank.majorA)
      for (const [mz, v] of Object.entries(b)) beams[mz] = (beams[mz] ?? 0) + v
    }
    if (sim.gas === 'H2' && ins.h3FactorPerA) beams['3'] = (beams['3'] ?? 0) + ins.h3FactorPerA * beams['2']! ** 2
    const measured: Record<string, Measured> = {}
    for (const [mz, current] of Object.entries(beams)) {
      const resistor = mz === major ? ins.resistorMajorOhm : ins.resistorMinorOhm
      const sigma = Math.sqrt(E_C * Math.abs(current) / ins.integrationS + 2 * K_B * ins.temperatureK / (resistor * ins.integrationS))
      measured[mz] = { value: current + (ins.noise ? sigma * normal() : 0), u: sigma }
    }
    const ratios: Record<string, Measured> = {}
    for (const mz of Object.keys(measured)) {
      if (mz === major || acq.role === 'blank') continue
      const h = measured[mz]!, l = measured[major]!
      const r = h.value / l.value
      ratios[`${mz}/${major}`] = { value: r, u: Math.abs(r) * Math.hypot(h.u / h.value, l.u / l.value) }
    }
    return {
      position: i + 1,
      role: acq.role,
      ...(acq.material ? { material: acq.material } : {}),
      acquiredAt: start + t,
      beams: measured,
      ratios,
    }
  })
}
