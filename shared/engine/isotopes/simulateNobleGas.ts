import { isotope } from '../species'
import { seededNormal, seededRandom } from '../random'
import { ATMOSPHERIC_ARGON } from './massBias'
import type { SequenceItem, SequenceRole } from './types'

// A static-vacuum argon measurement from first principles, so that the ratio engine can be
// tested against a known truth:
//  - the gas in the source at inlet (t = 0): the aliquot's argon plus the procedural blank
//    (atmospheric composition), as ion currents at the source's sensitivity;
//  - instrumental mass fractionation, by default the exponential law, I_meas,i = I_i·(m_i/m_36)^(−β)
//    (Russell et al., Geochim. Cosmochim. Acta 42 (1978) 1075), or the power law I_meas,i =
//    I_i·(1 + β)^(−(m_i − m_36)) or the linear law I_meas,i = I_i/(1 + β·(m_i − m_36)) (same source;
//    typed here on the measured side, apart from the engine's massBias.ts), with one β per sequence drawn
//    at random unless given (0.1–0.7, about 0.3–2 ‰ per u at argon's masses: the range of gas
//    source noble-gas instruments, common practice, no source); AME2020 masses;
//  - with time since inlet, either first-order consumption by the source, I_i(t) = I_i(0)·e^(−λ_i t),
//    faster for the lighter isotope as molecular (Knudsen) flow goes as 1/√m, λ_i = λ·√(m_40/m_i)
//    (Knudsen, Ann. Phys. 28 (1909) 75, from memory), or linear ingrowth of atmospheric argon
//    from memory effects, I_i(t) = I_i(0) + g_i·t;
//  - on each Faraday reading over τ: ion shot noise σ² = e·I/τ (Schottky, Ann. Phys. 57 (1918) 541)
//    and the feedback resistor's Johnson–Nyquist noise σ² = 2kT/(R·τ) (Johnson, Phys. Rev. 32
//    (1928) 97; Nyquist, Phys. Rev. 32 (1928) 110), as in shared/engine/simulateStatic.ts.

/** Boltzmann constant k in J/K and elementary charge e in C (exact since the 2019 SI; CODATA 2022). */
const BOLTZMANN_J_PER_K = 1.380649e-23
const E_C = 1.602176634e-19
const MASSES = { 36: isotope('36Ar').mass, 38: isotope('38Ar').mass, 40: isotope('40Ar').mass } as const
type Mass = keyof typeof MASSES
const BEAMS: Mass[] = [36, 38, 40]

export interface ArgonTruth { '40/36': number, '38/36': number }

export interface SimulatedArgonItem {
  role: SequenceRole
  material?: string
  /** True ratios of the aliquot; air's for standards unless given. Blanks carry only the blank. */
  truth?: ArgonTruth
  /** 40Ar ion current of the aliquot at inlet before fractionation, in A; default 1e-11 A. */
  current40A?: number
}

export interface ArgonSequenceSimulation {
  seed: number
  items: SimulatedArgonItem[]
  /** The law's parameter: exponential β, or power/linear fractionation per u; exponential β drawn in [0.1, 0.7] when omitted. */
  beta?: number
  /** Fractionation law of the source; default exponential. */
  law?: 'exponential' | 'power' | 'linear'
  /** β changing linearly with the acquisition's start time, per hour (a source drifting within the sequence); default 0. */
  betaDriftPerHour?: number
  /** True atmospheric ratios of the air standards and the blank; Lee et al. (2006) values when omitted. */
  air?: ArgonTruth
  /** Procedural blank's 40Ar current at inlet, in A; default 0. */
  blank40A?: number
  /**
   * Run-to-run relative standard deviation of the blank: every acquisition (blank or not) gets its
   * own draw blank40A·(1 + spread·N(0, 1)), as an extraction line's blank varies between runs; default 0.
   * With `blankSpreadPerBeam` each beam draws on its own (a background at one m/z, such as H35Cl+ at 36,
   * that varies apart from the atmospheric blank); otherwise one draw scales the blank's atmospheric composition.
   */
  blankSpreadRel?: number
  blankSpreadPerBeam?: boolean
  evolution?: { kind: 'consumption', ratePerS: number } | { kind: 'ingrowth', current40APerS: number } | { kind: 'none' }
  cycles?: number
  firstCycleS?: number
  cycleSpacingS?: number
  integrationS?: number
  /** Feedback resistor per beam, Ω; default 1e11 Ω on 40 and 1e12 Ω on 36 and 38. */
  resistorOhm?: Partial<Record<Mass, number>>
  temperatureK?: number
  startAt?: number
  /** Time between acquisitions in ms; default 30 min. */
  spacingMs?: number
}

export interface SimulatedArgonSequence {
  items: SequenceItem[]
  beta: number
  /** True ratios of each item's aliquot (before blank and fractionation); null for blanks. */
  truth: (ArgonTruth | null)[]
}

/** Simulates an argon sequence; the items carry cycles (for time-zero), beam means and ratio means. */
export function simulateArgonSequence(sim: ArgonSequenceSimulation): SimulatedArgonSequence {
  const normal = seededNormal(sim.seed)
  const uniform = seededRandom(sim.seed * 104729 + 7)
  const beta = sim.beta ?? 0.1 + 0.6 * uniform()
  const air = sim.air ?? { '40/36': ATMOSPHERIC_ARGON.values['40Ar/36Ar']!.value, '38/36': ATMOSPHERIC_ARGON.values['38Ar/36Ar']!.value }
  const n = sim.cycles ?? 15
  const first = sim.firstCycleS ?? 15
  const spacing = sim.cycleSpacingS ?? 10
  const tau = sim.integrationS ?? 1
  const T = sim.temperatureK ?? 293.15
  const resistor: Record<Mass, number> = { 36: 1e12, 38: 1e12, 40: 1e11, ...sim.resistorOhm }
  const evolution = sim.evolution ?? { kind: 'none' }
  const law = sim.law ?? 'exponential'
  const bias = (m: Mass, b: number) => {
    const dm = MASSES[m] - MASSES[36]
    if (law === 'power') return (1 + b) ** -dm
    if (law === 'linear') return 1 / (1 + b * dm)
    return (MASSES[m] / MASSES[36]) ** -b
  }
  const currents = (r: ArgonTruth, i40: number): Record<Mass, number> => ({ 40: i40, 36: i40 / r['40/36'], 38: (i40 / r['40/36']) * r['38/36'] })
  // A separate stream, so that sequences simulated without a blank spread keep their draws.
  const blankNormal = seededNormal(sim.seed * 7919 + 11)
  const spread = sim.blankSpreadRel ?? 0
  const airShare = currents(air, 1)
  const truth: (ArgonTruth | null)[] = []
  const items = sim.items.map((spec, index): SequenceItem => {
    const isBlank = spec.role === 'blank'
    const r = isBlank ? null : spec.truth ?? (spec.material === ATMOSPHERIC_ARGON.id ? air : null)
    if (!isBlank && !r) throw new Error(`simulated item ${index} needs its true ratios`)
    truth.push(r)
    const aliquot = r ? currents(r, spec.current40A ?? 1e-11) : { 36: 0, 38: 0, 40: 0 }
    const acquiredAt = (sim.startAt ?? Date.UTC(2026, 0, 5, 8)) + index * (sim.spacingMs ?? 30 * 60_000)
    const betaHere = beta + (sim.betaDriftPerHour ?? 0) * (index * (sim.spacingMs ?? 30 * 60_000)) / 3_600_000
    const common = spread > 0 ? 1 + spread * blankNormal() : 1
    const atmospheric = currents(air, sim.blank40A ?? 0)
    const blank = Object.fromEntries(BEAMS.map(m => [m, atmospheric[m] * (sim.blankSpreadPerBeam && spread > 0 ? 1 + spread * blankNormal() : common)])) as Record<Mass, number>
    const cycles: { t: number, beams: Record<string, number> }[] = []
    for (let c = 0; c < n; c++) {
      const t = first + c * spacing
      const beams: Record<string, number> = {}
      for (const m of BEAMS) {
        let I = (aliquot[m] + blank[m]) * bias(m, betaHere)
        if (evolution.kind === 'consumption') I *= Math.exp(-evolution.ratePerS * Math.sqrt(MASSES[40] / MASSES[m]) * t)
        else if (evolution.kind === 'ingrowth') I += evolution.current40APerS * airShare[m] * bias(m, betaHere) * t
        const sd = Math.sqrt(E_C * Math.max(I, 0) / tau + 2 * BOLTZMANN_J_PER_K * T / (resistor[m] * tau))
        beams[String(m)] = I + sd * normal()
      }
      cycles.push({ t, beams })
    }
    const meanSe = (v: number[]) => {
      const mean = v.reduce((s, x) => s + x, 0) / v.length
      const s2 = v.reduce((s, x) => s + (x - mean) ** 2, 0) / (v.length - 1)
      return { value: mean, u: Math.sqrt(s2 / v.length) }
    }
    const beams = Object.fromEntries(BEAMS.map(m => [String(m), meanSe(cycles.map(c => c.beams[String(m)]!))]))
    const ratios = isBlank
      ? {}
      : Object.fromEntries((['40/36', '38/36'] as const).map(k => [k, meanSe(cycles.map(c => c.beams[k.split('/')[0]!]! / c.beams['36']!))]))
    return {
      position: index + 1,
      role: spec.role,
      ...(spec.material ? { material: spec.material } : {}),
      acquiredAt,
      beams,
      ratios,
      cycles,
    }
  })
  return { items, beta, truth }
}
