// Bias and coverage of the engine's peak numbers on data simulated from first principles
// (Gaussian peaks, flat baseline, Gaussian or Poisson noise, seeded) with the truth known.
// The engine is a parameter so the same harness measures the engine of any commit.
import type * as Engine from '../../shared/engine'
import { seededPoisson } from '../../shared/engine/random'

type EngineModule = Pick<typeof Engine, 'processReadings' | 'processMzSpectrum' | 'simulateFieldSweep' | 'geometry' | 'isotope'>

export interface Coverage {
  /** Seeds in which the engine reported the quantity. */
  found: number
  trials: number
  /** Mean of (estimate − truth), and the mean stated standard uncertainty. */
  meanBias: number
  meanU: number
  /** Share of found seeds with |estimate − truth| ≤ 2u. */
  within2u: number
  /** Relative bias, (mean estimate − truth) / truth. */
  relBias: number
}

function summarise(errors: number[], us: number[], truth: number, trials: number): Coverage {
  const n = errors.length
  const meanBias = errors.reduce((a, b) => a + b, 0) / Math.max(1, n)
  const meanU = us.reduce((a, b) => a + b, 0) / Math.max(1, n)
  const within = errors.filter((e, i) => Math.abs(e) <= 2 * us[i]!).length
  return { found: n, trials, meanBias, meanU, within2u: n ? within / n : 0, relBias: meanBias / truth }
}

const FWHM_TO_SIGMA = 1 / (2 * Math.sqrt(2 * Math.LN2))

/** The argon instrument of the demo: a 12 cm potential sector at 4.5 kV, R = 600. */
function argonGeometry(e: EngineModule) {
  return e.geometry.parse({ kind: 'potential-sector', analyzerRadius: { value: 12, unit: 'cm', u: 0 } })
}

/**
 * Area of one 40Ar peak at a given S/N (height over the noise σ) in a field sweep: the truth
 * is H·σ·√(2π) for a Gaussian of height H and standard deviation σ = (m/z / R) / 2.3548.
 */
export function areaCoverage(e: EngineModule, snr: number, seeds: number, points = 1500): Coverage {
  const geo = argonGeometry(e)
  const ar40 = e.isotope('40Ar')
  const noise = 1e-16
  const height = snr * noise
  const R = 600
  const errors: number[] = []
  const us: number[] = []
  let truth = 0
  for (let seed = 1; seed <= seeds; seed++) {
    const raw = e.simulateFieldSweep({ geometry: geo, acceleratingVoltageV: 4500, mzFrom: 38.5, mzTo: 41.5, points, resolvingPower: R, species: [{ species: ar40, currentA: height }], baselineA: 3e-16, noiseA: noise, seed, currentUnit: 'A' })
    const result = e.processReadings(geo, raw, { isotopes: false, formulas: ['[40Ar]'], minSnr: 5 })
    const centre = (ar40.mass - 5.48579909065e-4)
    truth = height * (centre / R) * FWHM_TO_SIGMA * Math.sqrt(2 * Math.PI)
    const peak = result.peaks.find(p => Math.abs(p.centroid - centre) < 0.05)
    if (!peak) continue
    errors.push(peak.area - truth)
    us.push(peak.areaU)
  }
  return summarise(errors, us, truth, seeds)
}

/**
 * Centroid of one 40Ar peak at a given S/N in a field sweep, against the fit's own stated u
 * (`centroidUFit`: the geometry's share is zero here, its radius being exact). The truth is the
 * ion's m/z, the AME2020 atomic mass of 40Ar less one electron mass (CODATA 2022), as the
 * simulator places it.
 */
export function centroidCoverage(e: EngineModule, snr: number, seeds: number, points = 1500): Coverage {
  const geo = argonGeometry(e)
  const ar40 = e.isotope('40Ar')
  const noise = 1e-16
  const errors: number[] = []
  const us: number[] = []
  const centre = ar40.mass - 5.48579909065e-4
  for (let seed = 1; seed <= seeds; seed++) {
    const raw = e.simulateFieldSweep({ geometry: geo, acceleratingVoltageV: 4500, mzFrom: 38.5, mzTo: 41.5, points, resolvingPower: 600, species: [{ species: ar40, currentA: snr * noise }], baselineA: 3e-16, noiseA: noise, seed, currentUnit: 'A' })
    const result = e.processReadings(geo, raw, { isotopes: false, formulas: ['[40Ar]'], minSnr: 5 })
    const peak = result.peaks.find(p => Math.abs(p.centroid - centre) < 0.05)
    if (!peak || peak.centroidUFit === null) continue
    errors.push(peak.centroid - centre)
    us.push(peak.centroidUFit)
  }
  return summarise(errors, us, centre, seeds)
}

/**
 * 40Ar/36Ar of air argon (298.56, Lee et al., Geochim. Cosmochim. Acta 70 (2006) 4507) from a
 * field sweep over m/z 35..41 with 36Ar at a given S/N; 38Ar/36Ar = 0.1885 (Lee et al. 2006).
 */
export function argonRatioCoverage(e: EngineModule, snr36: number, seeds: number): Coverage {
  const geo = argonGeometry(e)
  const noise = 1e-16
  const h36 = snr36 * noise
  const errors: number[] = []
  const us: number[] = []
  const truth = 298.56
  for (let seed = 1; seed <= seeds; seed++) {
    const raw = e.simulateFieldSweep({
      geometry: geo, acceleratingVoltageV: 4500, mzFrom: 35, mzTo: 41, points: 9000, resolvingPower: 600,
      species: [{ species: e.isotope('36Ar'), currentA: h36 }, { species: e.isotope('38Ar'), currentA: h36 * 0.1885 }, { species: e.isotope('40Ar'), currentA: h36 * truth }],
      baselineA: 3e-16, noiseA: noise, seed, currentUnit: 'A',
    })
    const result = e.processReadings(geo, raw, { isotopes: false, formulas: ['[36Ar]', '[38Ar]', '[40Ar]'], minSnr: 5, ratios: [{ id: 'AIR:40Ar/36Ar', heavy: '[40Ar]', light: '[36Ar]' }] })
    const r = result.ratios[0]
    if (!r) continue
    errors.push(r.ratio - truth)
    us.push(r.ratioU)
  }
  return summarise(errors, us, truth, seeds)
}

export interface CountingOutcome extends Coverage {
  /** Mean number of peaks found per sweep where one 36Ar peak was simulated. */
  meanPeaks: number
}

/**
 * Ion counting: a 36Ar peak of `peakCps` at its apex over a dark rate of `darkCps`, counted for
 * `dwellS` per point; each point's count is a Poisson deviate of its expected count.
 */
export function countingCoverage(e: EngineModule, seeds: number, { peakCps = 2000, darkCps = 0.5, dwellS = 0.1, points = 2000 } = {}): CountingOutcome {
  const geo = argonGeometry(e)
  const ar36 = e.isotope('36Ar')
  const R = 600
  const centre = ar36.mass - 5.48579909065e-4
  const truth = peakCps * (centre / R) * FWHM_TO_SIGMA * Math.sqrt(2 * Math.PI)
  const errors: number[] = []
  const us: number[] = []
  let peaks = 0
  for (let seed = 1; seed <= seeds; seed++) {
    // The engine of an older commit has no counting mode in its simulator: count here alike.
    const sim = { geometry: geo, acceleratingVoltageV: 4500, mzFrom: 35, mzTo: 37, points, resolvingPower: R, species: [{ species: ar36, currentA: peakCps }], baselineA: darkCps, noiseA: 0, seed, currentUnit: 'A' as const }
    const expected = e.simulateFieldSweep(sim)
    const poisson = seededPoisson(seed)
    const raw = { ...expected, detectors: [{ unit: 'cps', values: Array.from(expected.detectors[0]!.values, v => poisson(v * dwellS) / dwellS) }] }
    const result = e.processReadings(geo, raw, { isotopes: false, formulas: ['[36Ar]'] })
    peaks += result.peaks.length
    const peak = result.peaks.find(p => Math.abs(p.centroid - centre) < 0.05)
    if (!peak) continue
    errors.push(peak.area - truth)
    us.push(peak.areaU)
  }
  return { ...summarise(errors, us, truth, seeds), meanPeaks: peaks / seeds }
}

/**
 * Centroid against the grid's phase: one noiseless Gaussian on an even m/z grid of `step`
 * (in FWHM), the grid shifted by phase/`phases` of a step; the worst |centroid − truth| in steps.
 */
export function centroidGridBias(e: EngineModule, pointsPerFwhm: number, phases = 10): number {
  const centre = 40
  const fwhm = centre / 600
  const sigma = fwhm * FWHM_TO_SIGMA
  const step = fwhm / pointsPerFwhm
  let worst = 0
  for (let k = 0; k < phases; k++) {
    const phase = k / phases
    const n = Math.round(60 * sigma / step)
    const mz: number[] = []
    const y: number[] = []
    for (let i = 0; i < n; i++) {
      const x = centre - 30 * sigma + (i + phase) * step
      mz.push(x)
      y.push(1e-13 * Math.exp(-0.5 * ((x - centre) / sigma) ** 2) + 1e-16)
    }
    // A faint noise floor so the baseline has a σ: 1e-19 A against a 1e-13 A peak.
    const noisy = y.map((v, i) => v + 1e-19 * Math.sin(i * 12.9898) * 1.7)
    const result = e.processMzSpectrum(mz, noisy, 'A', { isotopes: false, formulas: ['[40Ar]'] })
    const peak = result.peaks[0]
    if (!peak) return Infinity
    worst = Math.max(worst, Math.abs(peak.centroid - centre) / step)
  }
  return worst
}

/**
 * A peak-centre scan: the sweep spans ±`halfWidthSigmas` σ around one 40Ar peak, so the peak
 * fills most of it. Returns the relative area error and the baseline error in noise σ.
 */
export function peakCentreScan(e: EngineModule, halfWidthSigmas: number, snr: number, seed = 1) {
  const geo = argonGeometry(e)
  const ar40 = e.isotope('40Ar')
  const centre = ar40.mass - 5.48579909065e-4
  const sigma = centre / 600 * FWHM_TO_SIGMA
  const noise = 1e-16
  const raw = e.simulateFieldSweep({ geometry: geo, acceleratingVoltageV: 4500, mzFrom: centre - halfWidthSigmas * sigma, mzTo: centre + halfWidthSigmas * sigma, points: 400, resolvingPower: 600, species: [{ species: ar40, currentA: snr * noise }], baselineA: 5e-15, noiseA: noise, seed, currentUnit: 'A' })
  const result = e.processReadings(geo, raw, { isotopes: false, formulas: ['[40Ar]'] })
  const truth = snr * noise * sigma * Math.sqrt(2 * Math.PI)
  const peak = result.peaks.find(p => Math.abs(p.centroid - centre) < 0.05)
  return {
    peaks: result.peaks.length,
    flags: result.qc.map(q => q.code),
    areaRelError: peak ? peak.area / truth - 1 : null,
    baselineErrorInNoise: result.baseline ? (result.baseline.level - 5e-15) / noise : null,
  }
}

/**
 * A baseline known only from a few on-peak-zero readings (drawn with the same noise), so its
 * uncertainty weighs in every area, and two peaks of one column (36Ar and 38Ar at equal
 * height) share it: their areas correlate. Returns the 36Ar area's and the 38Ar/36Ar
 * ratio's coverage (truth: equal heights, ratio 1 per unit ln m/z).
 */
export function sharedBaselineCoverage(e: EngineModule, seeds: number, zeroReadings = 4) {
  const geo = argonGeometry(e)
  const ar36 = e.isotope('36Ar')
  const noise = 1e-16
  const height = 50 * noise
  const R = 600
  const centre = ar36.mass - 5.48579909065e-4
  const truthArea = height * (centre / R) * FWHM_TO_SIGMA * Math.sqrt(2 * Math.PI)
  const area = { errors: [] as number[], us: [] as number[] }
  const ratio = { errors: [] as number[], us: [] as number[] }
  for (let seed = 1; seed <= seeds; seed++) {
    const raw = e.simulateFieldSweep({ geometry: geo, acceleratingVoltageV: 4500, mzFrom: 35.7, mzTo: 38.3, points: 2600, resolvingPower: R, species: [{ species: ar36, currentA: height }, { species: e.isotope('38Ar'), currentA: height }], baselineA: 3e-16, noiseA: noise, seed, currentUnit: 'A' })
    const zeroNoise = e.simulateFieldSweep({ geometry: geo, acceleratingVoltageV: 4500, mzFrom: 1, mzTo: 2, points: zeroReadings, resolvingPower: R, species: [], baselineA: 3e-16, noiseA: noise, seed: seed + 100_000, currentUnit: 'A' })
    const result = e.processReadings(geo, raw, {
      isotopes: false, formulas: ['[36Ar]', '[38Ar]'], baseline: { zero: [{ unit: 'A', values: zeroNoise.detectors[0]!.values }] },
      ratios: [{ id: 'AIR:40Ar/36Ar', heavy: '[38Ar]', light: '[36Ar]' }],
    } as Parameters<EngineModule['processReadings']>[2])
    const p = result.peaks.find(x => Math.abs(x.centroid - centre) < 0.05)
    if (p) { area.errors.push(p.area - truthArea); area.us.push(p.areaU) }
    const r = result.ratios[0]
    if (r) { ratio.errors.push(r.ratio - 1); ratio.us.push(r.ratioU) }
  }
  return { area: summarise(area.errors, area.us, truthArea, seeds), ratio: summarise(ratio.errors, ratio.us, 1, seeds) }
}

/**
 * 40Ar/36Ar from static multi-collector readings (60 cycles of 4 s, 36Ar 1 pA on a 10^11 Ω
 * amplifier, 40Ar on 10^10 Ω, a 2 % beam fluctuation common to both cups, ±3 fA amplifier
 * offsets measured by an on-peak zero each cycle), simulated by the current engine's forward
 * model (shared/engine/simulateStatic.ts) whatever engine reads them. Truth 298.56 (Lee et al.
 * 2006, any truth would do).
 */
export function staticRatioCoverage(e: Pick<EngineModule, 'processReadings' | 'geometry' | 'isotope'>, simulate: typeof Engine.simulateStatic, fieldFor: typeof Engine.fieldForMz, seeds: number): Coverage {
  const truth = 298.56
  const mzL = e.isotope('36Ar').mass - 5.48579909065e-4
  const mzH = e.isotope('40Ar').mass - 5.48579909065e-4
  const rL = 0.3
  const geo = e.geometry.parse({ kind: 'multi-collector', collectors: [
    { id: 'L', effectiveRadius: { value: rL, unit: 'm', u: 0 } },
    { id: 'H', effectiveRadius: { value: rL * Math.sqrt(mzH / mzL), unit: 'm', u: 0 } },
  ] })
  const U = 5000
  const settings = { field: { value: fieldFor(mzL, rL, U), unit: 'T' }, acceleratingVoltage: { value: U, unit: 'V' } }
  const errors: number[] = []
  const us: number[] = []
  for (let seed = 1; seed <= seeds; seed++) {
    const data = simulate({
      seed, cycles: 60, integrationS: 4, lightSignal: 1e-12, commonFluctuation: 0.02, baseline: { mode: 'per-cycle' },
      cups: [
        { id: 'L', relative: 1, detector: { type: 'faraday', resistorOhm: 1e11, offsetA: 3e-15 } },
        { id: 'H', relative: truth, detector: { type: 'faraday', resistorOhm: 1e10, offsetA: -3e-15 } },
      ],
    })
    const result = e.processReadings(geo, { settings, detectors: data.detectors }, { formulas: ['[36Ar]', '[40Ar]'], ratios: [{ id: 'AIR:40Ar/36Ar', heavy: '[40Ar]', light: '[36Ar]' }] })
    const r = result.ratios[0]
    if (!r) continue
    errors.push(r.ratio - truth)
    us.push(r.ratioU)
  }
  return summarise(errors, us, truth, seeds)
}
