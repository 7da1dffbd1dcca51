// The demo consortium's instruments and what each one measures: invented for the demo,
// simulated with the engine's forward model (shared/engine/simulate.ts).
import { fitCalibration, formulaSpecies, geometry, isotope, processReadings, simulateFieldSweep, type Geometry, type SimulatedSpecies } from '../../shared/engine'
import type { AcquisitionInput } from '../../shared/schemas/acquisitions'

export interface DemoInstrument {
  lab: string
  slug: string
  name: string
  geometry: Geometry
  /** The species the instrument is registered to measure (none: every candidate). */
  measuredSpecies?: string[]
  /** Builds one acquisition as that lab's system would post it. */
  acquisition: (runId: string, acquiredAt: Date, seed: number) => AcquisitionInput
}

const co2Lab = geometry.parse({ kind: 'potential-sector', analyzerRadius: { value: 27, unit: 'cm', u: 0.005 } })
const argonLab = geometry.parse({ kind: 'potential-sector', analyzerRadius: { value: 12, unit: 'cm', u: 0.002 } })
const heliumLab = geometry.parse({ kind: 'wien-sector', analyzerRadius: { value: 60, unit: 'mm', u: 0.05 }, plateGap: { value: 4, unit: 'mm', u: 0.002 } })

function sweepBody(instrument: string, runId: string, acquiredAt: Date, sample: string, sim: Parameters<typeof simulateFieldSweep>[0], processing: AcquisitionInput['processing']): AcquisitionInput {
  const raw = simulateFieldSweep(sim)
  const settings: AcquisitionInput['settings'] = {}
  for (const [name, s] of Object.entries(raw.settings)) if (s) settings[name as keyof typeof settings] = { value: s.value, unit: s.unit, u: s.value * 2e-4 }
  return {
    instrument, runId, acquiredAt: acquiredAt.toISOString(), sampleRef: sample, settings,
    sweep: { reading: 'field', unit: raw.sweep!.unit, u: 1e-6, values: Array.from(raw.sweep!.values, v => Number(v.toPrecision(9))) },
    detectors: [{ unit: raw.detectors[0]!.unit, values: Array.from(raw.detectors[0]!.values, v => Number(v.toPrecision(6))) }],
    processing,
  }
}

// Carbonate and water samples: δ13C of CO2 drifting around −8 ‰ to −30 ‰ from run to run.
function co2Species(seed: number): SimulatedSpecies[] {
  const delta = -8 - (seed % 23)
  return [
    { species: formulaSpecies('CO2'), currentA: 3e-9 },
    { species: formulaSpecies('[13C]O2'), currentA: 3e-9 * 0.0111802 * (1 + delta / 1000) },
    { species: formulaSpecies('N2'), currentA: 4e-11 },
    { species: isotope('40Ar'), currentA: 2e-12 },
  ]
}

export const demoInstruments: DemoInstrument[] = [
  {
    lab: 'saltmarsh-isotopes', slug: 'irms-north', name: 'North bench IRMS', geometry: co2Lab,
    // The bench registers CO (a fragment of CO2) but, with its CO2 trapped cryogenically, measures
    // only CO2, its isotopologues (m/z 45 and, for the δ18O of its sequences, 46) and the air-leak monitors: at R 950 CO+ and N2+ (Δm/z 0.011)
    // share one peak, so the species registered on the instrument are what tell m/z 28 apart.
    measuredSpecies: ['CO2', '[13C]O2', 'C[18O]O', 'N2', '[40Ar]', 'O2'],
    acquisition: (runId, at, seed) => sweepBody('irms-north', runId, at, `CARB-${1000 + seed}`, {
      geometry: co2Lab, acceleratingVoltageV: 3000, mzFrom: 26, mzTo: 47, points: 12_000, resolvingPower: 950,
      species: co2Species(seed), baselineA: 8e-15, noiseA: 2e-15, seed, currentUnit: 'fA',
    }, { formulas: ['CO2', '[13C]O2', 'N2', '[40Ar]', 'CO', 'O2'], ratios: [{ id: 'VPDB:13C/12C', heavy: '[13C]O2', light: 'CO2' }] }),
  },
  {
    lab: 'halvard-ridge', slug: 'noble-gas-1', name: 'Noble-gas sector', geometry: argonLab,
    acquisition: (runId, at, seed) => sweepBody('noble-gas-1', runId, at, `AIR-STD-${seed}`, {
      geometry: argonLab, acceleratingVoltageV: 4500, mzFrom: 35, mzTo: 41, points: 9_000, resolvingPower: 600,
      species: [
        { species: isotope('36Ar'), currentA: 1.2e-13 * (1 + (seed % 5) * 0.002) },
        { species: isotope('38Ar'), currentA: 1.2e-13 * 0.1885 },
        { species: isotope('40Ar'), currentA: 1.2e-13 * 298.56 * (1 + (seed % 7) * 0.001) },
      ],
      baselineA: 3e-16, noiseA: 1e-16, seed, currentUnit: 'fA',
    }, { formulas: ['[36Ar]', '[38Ar]', '[40Ar]'], ratios: [{ id: 'AIR:40Ar/36Ar', heavy: '[40Ar]', light: '[36Ar]' }] }),
  },
  {
    lab: 'kestrel-leaktest', slug: 'he-leak-2', name: 'Helium leak detector', geometry: heliumLab,
    acquisition: (runId, at, seed) => sweepBody('he-leak-2', runId, at, `VALVE-${4200 + seed}`, {
      geometry: heliumLab, plateVoltageV: 800, filterFieldT: 0.05, mzFrom: 1.5, mzTo: 5, points: 4_000, resolvingPower: 120,
      species: [
        { species: isotope('4He'), currentA: 5e-12 * (1 + (seed % 9)) },
        { species: formulaSpecies('H2'), currentA: 2e-12 },
        { species: formulaSpecies('HD'), currentA: 5e-15 },
      ],
      baselineA: 1e-15, noiseA: 4e-16, seed, currentUnit: 'fA',
    }, { formulas: ['[4He]', 'H2', 'HD', '[3He]'], maxCharge: 1, tolerancePpm: 500 }),
  },
]

/**
 * The demo's calibration of an instrument: the engine's fit to a simulated run of a
 * reference gas, as the console's "calibrate from a reference acquisition" makes one.
 */
export function demoCalibration(inst: DemoInstrument, degree = 1) {
  const body = inst.acquisition('reference', new Date(), 0)
  const engine = processReadings(inst.geometry, { settings: body.settings, sweep: body.sweep, detectors: body.detectors }, { formulas: body.processing?.formulas, measuredSpecies: inst.measuredSpecies, tolerance: { ppm: 200 } })
  const points = engine.peaks.filter(p => p.assignment && !p.ambiguous).map(p => ({ measuredMz: p.centroid, referenceMz: p.assignment!.mz, label: p.assignment!.species }))
  return { points, fit: fitCalibration(points, degree) }
}

/**
 * One of the instrument's acquisitions with its sweep cut to 1,000 points that still hold real
 * work for the engine: for the carbonate bench, the strongest line (CO2, m/z 44) 250 points
 * in and [13C]O2 at m/z 45 about 500 points on. The benchmarks post it.
 */
export function thousandPointAcquisition(inst: DemoInstrument, runId: string): AcquisitionInput {
  const body = inst.acquisition(runId, new Date(), 5)
  const detector = body.detectors[0]!.values
  const strongest = detector.reduce((best, v, i) => (v > detector[best]! ? i : best), 0)
  const start = Math.max(0, strongest - 250)
  return {
    ...body,
    sweep: { ...body.sweep!, values: body.sweep!.values.slice(start, start + 1000) },
    detectors: [{ ...body.detectors[0]!, values: detector.slice(start, start + 1000) }],
  }
}
