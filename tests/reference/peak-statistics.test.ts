// Bias and coverage of the engine's peak numbers on data simulated from first principles
// (Gaussian peaks, flat baseline, Gaussian or Poisson noise, seeded; tests/support/peak-statistics.ts)
// with the truth known. Propagation per GUM (JCGM 100:2008); air argon 40Ar/36Ar = 298.56 ± 0.31
// and 38Ar/36Ar = 0.1885 (Lee et al., Geochim. Cosmochim. Acta 70 (2006) 4507).
//
// Accepted band for "about 95 % within 2u": for a normal error, P(|e| ≤ 2u) = 0.9545; over 200
// seeds the count is binomial (n = 200, p = 0.9545), sd 2.95, and its 99 % band (±2.576 sd) is
// 183..198 seeds, i.e. a share of 0.915..0.99. Bias: |mean(estimate − truth)| < 0.5 · mean(u).
import { describe, expect, it } from 'vitest'
import { assignPeak, CandidateTable, formulaSpecies, geometry, isotope, processReadings, simulateFieldSweep } from '../../shared/engine'
import * as engine from '../../shared/engine'
import { acquisitionInput } from '../../shared/schemas/acquisitions'
import { areaCoverage, argonRatioCoverage, centroidCoverage, centroidGridBias, countingCoverage, peakCentreScan, sharedBaselineCoverage, type Coverage } from '../support/peak-statistics'

const SEEDS = 200
const BAND = [0.915, 0.99] as const

function expectHonest(c: Coverage) {
  expect(c.found).toBe(c.trials)
  expect(Math.abs(c.meanBias)).toBeLessThan(0.5 * c.meanU)
  expect(c.within2u).toBeGreaterThanOrEqual(BAND[0])
  expect(c.within2u).toBeLessThanOrEqual(BAND[1])
}

describe('field-sweep areas: unbiased, with an honest u (200 seeds each)', () => {
  it.each([10, 20, 50, 100])('at S/N %i', (snr) => {
    expectHonest(areaCoverage(engine, snr, SEEDS))
  })
})

describe('field-sweep centroids: unbiased, with an honest u from the fit (200 seeds each)', () => {
  // The fit's own centroid u (centroidUFit; the engine adds the geometry's share to centroidU).
  // Measured 2026-12-03: within 2u 0.950 / 0.955 / 0.955 / 0.955, |bias| 0.10 u at each S/N.
  it.each([10, 20, 50, 100])('at S/N %i', (snr) => {
    expectHonest(centroidCoverage(engine, snr, SEEDS))
  })
})

describe('40Ar/36Ar of air argon from one sweep (200 seeds each)', () => {
  it.each([10, 100])('at 36Ar S/N %i', (snr) => {
    expectHonest(argonRatioCoverage(engine, snr, SEEDS))
  })

  it('reports the accepted ratio with its published uncertainty (Lee et al. 2006: 298.56 ± 0.31)', () => {
    const geo = geometry.parse({ kind: 'potential-sector', analyzerRadius: { value: 12, unit: 'cm', u: 0 } })
    const raw = simulateFieldSweep({ geometry: geo, acceleratingVoltageV: 4500, mzFrom: 35, mzTo: 41, points: 9000, resolvingPower: 600, species: [{ species: isotope('36Ar'), currentA: 1e-14 }, { species: isotope('40Ar'), currentA: 298.56e-14 }], baselineA: 3e-16, noiseA: 1e-16, seed: 4, currentUnit: 'A' })
    const r = processReadings(geo, raw, { isotopes: false, formulas: ['[36Ar]', '[40Ar]'], ratios: [{ id: 'AIR:40Ar/36Ar', heavy: '[40Ar]', light: '[36Ar]' }] }).ratios[0]!
    expect(r.referenceRatio).toBe(298.56)
    expect(r.referenceRatioU).toBe(0.31)
    expect(r.referenceSource).toMatch(/Lee et al\., Geochim\. Cosmochim\. Acta 70 \(2006\) 4507/)
    expect(r.deltaUWithReference).toBeGreaterThan(r.deltaU)
  })
})

describe('GUM Supplement 1 (JCGM 101:2008) interval of a profile ratio, on request', () => {
  const geo = geometry.parse({ kind: 'potential-sector', analyzerRadius: { value: 12, unit: 'cm', u: 0 } })
  const air = (snr36: number, seed: number) => simulateFieldSweep({
    geometry: geo, acceleratingVoltageV: 4500, mzFrom: 35, mzTo: 41, points: 9000, resolvingPower: 600, currentUnit: 'A', baselineA: 3e-16, noiseA: 1e-16, seed,
    species: [{ species: isotope('36Ar'), currentA: snr36 * 1e-16 }, { species: isotope('38Ar'), currentA: snr36 * 1e-16 * 0.1885 }, { species: isotope('40Ar'), currentA: snr36 * 1e-16 * 298.56 }],
  })
  const options = { isotopes: false, formulas: ['[36Ar]', '[38Ar]', '[40Ar]'], minSnr: 5, ratios: [{ id: 'AIR:40Ar/36Ar' as const, heavy: '[40Ar]', light: '[36Ar]' }] }

  it('is absent unless asked for, and asking changes no first-order figure', () => {
    const plain = processReadings(geo, air(100, 1), options).ratios[0]!
    const withMc = processReadings(geo, air(100, 1), { ...options, monteCarlo: true }).ratios[0]!
    expect(plain.coverage).toBeUndefined()
    expect({ ...withMc, coverage: undefined }).toEqual(plain)
  })

  it('agrees with first order where the model is nearly linear (36Ar S/N 100: U ≈ 1.96 u, the interval about the ratio)', () => {
    const r = processReadings(geo, air(100, 2), { ...options, monteCarlo: true }).ratios[0]!
    const c = r.coverage!
    expect(c.trials).toBe(200_000)
    expect(c.expandedU / r.ratioU).toBeGreaterThan(1.9)
    expect(c.expandedU / r.ratioU).toBeLessThan(2.02)
    expect(Math.abs((c.interval[0] + c.interval[1]) / 2 - r.ratio)).toBeLessThan(0.05 * r.ratioU)
    expect(c.deltaInterval[0]).toBeCloseTo((c.interval[0] / 298.56 - 1) * 1000, 9)
  })

  it('its 95 % interval holds the truth in about 95 % of 200 seeds at 36Ar S/N 10 (binomial 99 % band 0.910–0.990), skewed to high ratios', () => {
    let inside = 0
    let skew = 0
    for (let seed = 1; seed <= SEEDS; seed++) {
      const r = processReadings(geo, air(10, seed), { ...options, monteCarlo: true }).ratios[0]!
      const [lo, hi] = r.coverage!.interval
      if (lo <= 298.56 && 298.56 <= hi) inside++
      skew += (hi - r.ratio) - (r.ratio - lo)
    }
    expect(inside / SEEDS).toBeGreaterThanOrEqual(0.91)
    expect(inside / SEEDS).toBeLessThanOrEqual(0.99)
    // A quotient's distribution leans to large values when its denominator is uncertain (JCGM 101 9.4).
    expect(skew).toBeGreaterThan(0)
  }, 120_000)
})

describe('a baseline known from 4 on-peak-zero readings (200 seeds)', () => {
  const c = sharedBaselineCoverage(engine, SEEDS, 4)
  it('the area\'s u carries the baseline level\'s uncertainty', () => expectHonest(c.area))
  it('a ratio of two peaks on that shared baseline carries their covariance (GUM 5.2.2)', () => expectHonest(c.ratio))
})

describe('ion counting with a low dark rate (Poisson, 200 seeds)', () => {
  it('finds exactly one 36Ar peak in every sweep (no spurious peaks, no split) and states an honest area u', () => {
    const c = countingCoverage(engine, SEEDS, { peakCps: 2000, darkCps: 0.5, dwellS: 0.1 })
    expect(c.meanPeaks).toBe(1)
    expectHonest(c)
  })

  it('reads a count rate as counts: Poisson noise model, dwell time from the count quantum', () => {
    const geo = geometry.parse({ kind: 'potential-sector', analyzerRadius: { value: 12, unit: 'cm', u: 0 } })
    const raw = simulateFieldSweep({ geometry: geo, acceleratingVoltageV: 4500, mzFrom: 35, mzTo: 37, points: 2000, resolvingPower: 600, species: [], baselineA: 0, noiseA: 0, seed: 1, currentUnit: 'A' })
    // Mostly zeros (the median absolute deviation is 0), a few single dark counts.
    const values = Array.from({ length: 2000 }, (_, i) => (i % 97 === 0 ? 10 : 0))
    const result = processReadings(geo, { ...raw, detectors: [{ unit: 'cps', values }] }, { isotopes: false, formulas: ['[36Ar]'] })
    expect(result.peaks).toHaveLength(0)
    expect(result.baseline).toMatchObject({ noiseModel: 'poisson', dwellS: 0.1 })
  })
})

describe('centroids do not follow the sampling grid', () => {
  // Grid phase swept over one step in tenths; worst |centroid − truth| in steps.
  it.each([2, 3, 5, 10])('at %i points per FWHM the worst bias over the phase is under 0.1 step', (pointsPerFwhm) => {
    expect(centroidGridBias(engine, pointsPerFwhm)).toBeLessThan(0.1)
  })
})

describe('peak-centre scans (the peak fills most of the sweep)', () => {
  it('a ±5σ scan: one peak, baseline within 1.5 noise σ, area within 1 %', () => {
    const scan = peakCentreScan(engine, 5, 1000)
    expect(scan.peaks).toBe(1)
    expect(Math.abs(scan.baselineErrorInNoise!)).toBeLessThan(1.5)
    expect(Math.abs(scan.areaRelError!)).toBeLessThan(0.01)
  })

  it('a ±3σ scan with no baseline point at all says its baseline is a guess', () => {
    expect(peakCentreScan(engine, 3, 1000).flags).toContain('baseline-guessed')
    expect(peakCentreScan(engine, 8, 1000).flags).not.toContain('baseline-guessed')
  })

  it('a ±3σ scan with no baseline point at all: on-peak-zero readings give the level, area within 0.5 %', () => {
    const geo = geometry.parse({ kind: 'potential-sector', analyzerRadius: { value: 12, unit: 'cm', u: 0 } })
    const ar40 = isotope('40Ar')
    const centre = ar40.mass - 5.48579909065e-4
    const sigma = centre / 600 / 2.3548
    const raw = simulateFieldSweep({ geometry: geo, acceleratingVoltageV: 4500, mzFrom: centre - 3 * sigma, mzTo: centre + 3 * sigma, points: 400, resolvingPower: 600, species: [{ species: ar40, currentA: 1e-13 }], baselineA: 5e-15, noiseA: 1e-16, seed: 2, currentUnit: 'A' })
    const zero = Array.from({ length: 50 }, (_, i) => 5e-15 + 1e-16 * Math.sin(i * 2.1))
    const result = processReadings(geo, raw, { isotopes: false, formulas: ['[40Ar]'], baseline: { zero: [{ unit: 'A', values: zero }] } })
    expect(result.baseline).toMatchObject({ source: 'zero', points: 50 })
    expect(result.qc.map(q => q.code)).not.toContain('baseline-guessed')
    expect(result.peaks).toHaveLength(1)
    expect(Math.abs(result.peaks[0]!.area / (1e-13 * sigma * Math.sqrt(2 * Math.PI)) - 1)).toBeLessThan(0.005)
  })

  it('baseline regions in m/z are used when given', () => {
    const geo = geometry.parse({ kind: 'potential-sector', analyzerRadius: { value: 12, unit: 'cm', u: 0 } })
    const raw = simulateFieldSweep({ geometry: geo, acceleratingVoltageV: 4500, mzFrom: 39, mzTo: 41, points: 2000, resolvingPower: 600, species: [{ species: isotope('40Ar'), currentA: 1e-13 }], baselineA: 5e-15, noiseA: 1e-16, seed: 2, currentUnit: 'A' })
    const result = processReadings(geo, raw, { isotopes: false, formulas: ['[40Ar]'], baseline: { regions: [{ mzFrom: 39, mzTo: 39.5 }, { mzFrom: 40.5, mzTo: 41 }] } })
    expect(result.baseline?.source).toBe('regions')
    expect(Math.abs(result.baseline!.level - 5e-15)).toBeLessThan(5 * result.baseline!.levelU)
  })
})

describe('every peak number carries its uncertainty; both resolving powers', () => {
  it('centroid, height, area, FWHM, both resolving powers and the implied neutral mass have u', () => {
    const geo = geometry.parse({ kind: 'potential-sector', analyzerRadius: { value: 12, unit: 'cm', u: 0.001 } })
    const raw = simulateFieldSweep({ geometry: geo, acceleratingVoltageV: 4500, mzFrom: 39, mzTo: 41, points: 2000, resolvingPower: 600, species: [{ species: isotope('40Ar'), currentA: 1e-13 }], baselineA: 5e-15, noiseA: 1e-16, seed: 2, currentUnit: 'A' })
    const p = processReadings(geo, raw, { isotopes: false, formulas: ['[40Ar]'] }).peaks[0]!
    for (const u of [p.centroidU, p.centroidUFit, p.heightU, p.areaU, p.fwhmU, p.resolvingPowerU, p.resolvingPower10ValleyU, p.assignment!.impliedNeutralMassU]) expect(u).toBeGreaterThan(0)
    expect(p.resolvingPower! / 600).toBeCloseTo(1, 1)
    // A Gaussian's width at 5 % height is 2.079 FWHM (IUPAC 2013 10 % valley, common practice).
    expect(p.resolvingPower! / p.resolvingPower10Valley!).toBeCloseTo(Math.sqrt(Math.log(20) / Math.LN2), 6)
  })
})

describe('assignment weighs expected signal', () => {
  const he = geometry.parse({ kind: 'wien-sector', analyzerRadius: { value: 60, unit: 'mm', u: 0 }, plateGap: { value: 4, unit: 'mm', u: 0 } })
  const sweep = (mzFrom: number, mzTo: number) => simulateFieldSweep({
    geometry: he, plateVoltageV: 800, filterFieldT: 0.05, mzFrom, mzTo, points: 4000, resolvingPower: 120,
    species: [{ species: isotope('4He'), currentA: 2e-11 }, { species: formulaSpecies('HD'), currentA: 5e-15 }], baselineA: 1e-15, noiseA: 4e-16, seed: 3, currentUnit: 'fA',
  })
  const options = { formulas: ['[4He]', 'HD', '[3He]'], maxCharge: 1, tolerance: { ppm: 500 } }

  it('3He+ next to HD+ does not flag when 4He shows 3He expected far below the noise (IUPAC 3He/4He 1.34e-6)', () => {
    const peak = processReadings(he, sweep(1.5, 5), options).peaks.find(p => Math.abs(p.centroid - 3.02) < 0.01)!
    expect(peak.ambiguous).toBe(false)
    expect(peak.assignment?.species).toBe('HD')
  })

  it('a peak the weighing settles lists no dismissed rival among its candidates (3He+ lies 1,950 ppm from HD+)', () => {
    // The rival's m/z differs from the best line's, so the candidate list holds a copy of it
    // with the error recomputed: it must go by species and charge, not by identity.
    const peak = processReadings(he, sweep(1.5, 5), options).peaks.find(p => Math.abs(p.centroid - 3.02) < 0.01)!
    expect(peak.assignment?.species).toBe('HD')
    expect(peak.candidates.map(c => c.species)).toEqual(['HD'])
  })

  it('still flags when nothing bounds the rival (4He outside the sweep)', () => {
    const peak = processReadings(he, sweep(2.6, 3.6), options).peaks.find(p => Math.abs(p.centroid - 3.02) < 0.01)!
    expect(peak.ambiguous).toBe(true)
  })

  it('the window widens with the centroid\'s own uncertainty', () => {
    const table = new CandidateTable([isotope('40Ar')], 1)
    const line = table.near(39.9618, { abs: 0.01 })[0]!.mz
    const off = line * (1 + 20e-6)
    expect(assignPeak(table, off, 0.06, { ppm: 5 }).best).toBeNull()
    expect(assignPeak(table, off, 0.06, { ppm: 5 }, line * 10e-6).best?.species).toBe('40Ar')
  })

  it('an instrument can restrict candidates to the species it measures', () => {
    const table = new CandidateTable([formulaSpecies('N2'), formulaSpecies('CO')], 1, ['N2'])
    expect(table.near(28, { abs: 0.1 }).map(c => c.species)).toEqual(['N2'])
  })
})

describe('fingerprints compare normalised heights', () => {
  it('a field sweep matched with its own pattern scores 1', () => {
    const geo = geometry.parse({ kind: 'potential-sector', analyzerRadius: { value: 27, unit: 'cm', u: 0 } })
    const raw = simulateFieldSweep({ geometry: geo, acceleratingVoltageV: 3000, mzFrom: 26, mzTo: 47, points: 12000, resolvingPower: 950, species: [{ species: formulaSpecies('N2'), currentA: 1e-11 }, { species: formulaSpecies('CO2'), currentA: 1e-11 }], baselineA: 0, noiseA: 1e-15, seed: 1 })
    const sticks = [{ mz: 28.006, intensity: 1 }, { mz: 43.99, intensity: 1 }]
    const result = processReadings(geo, raw, { formulas: ['N2', 'CO2'], references: [{ id: 'air-co2', name: 'N2 + CO2 1:1', sticks }] })
    expect(result.matches[0]!.similarity).toBeCloseTo(1, 4)
  })
})

describe('acquisition input: baseline regions and zero readings', () => {
  const base = { instrument: 'irms-north', runId: 'run-1', acquiredAt: '2026-12-01T00:00:00Z', sweep: { reading: 'field', unit: 'T', values: [1, 2] }, detectors: [{ unit: 'fA', values: [1, 2] }] }
  it('accepts regions and zero readings', () => {
    expect(acquisitionInput.safeParse({ ...base, baseline: { regions: [{ mzFrom: 1, mzTo: 2 }], zero: [{ unit: 'fA', values: [0.1] }] } }).success).toBe(true)
  })
  it.each([
    [{ regions: [{ mzFrom: 2, mzTo: 1 }] }, 'baseline.regions.0.mzTo'],
    [{ zero: [{ unit: 'fA', values: [] }] }, 'baseline.zero.0.values'],
    [{ zero: [{ collector: 'a', unit: 'fA', values: [1] }, { collector: 'b', unit: 'fA', values: [1] }] }, 'baseline.zero.0.collector'],
  ])('refuses %j naming %s', (baseline, path) => {
    const r = acquisitionInput.safeParse({ ...base, baseline })
    expect(r.success).toBe(false)
    expect(r.error!.issues.map(i => i.path.join('.'))).toContain(path)
  })
})

describe('the simulator counts ions (Poisson, Knuth 1997 and Hörmann 1993)', () => {
  it.each([0.05, 3, 40, 900])('mean and variance of counts at %f counts a point match λ', (lambda) => {
    const geo = geometry.parse({ kind: 'potential-sector', analyzerRadius: { value: 12, unit: 'cm', u: 0 } })
    const raw = simulateFieldSweep({ geometry: geo, acceleratingVoltageV: 4500, mzFrom: 35, mzTo: 37, points: 20000, resolvingPower: 600, species: [], baselineA: lambda / 0.1, seed: 9, counting: { dwellS: 0.1 } })
    const counts = Array.from(raw.detectors[0]!.values, v => v * 0.1)
    const mean = counts.reduce((a, b) => a + b, 0) / counts.length
    const variance = counts.reduce((a, b) => a + (b - mean) ** 2, 0) / (counts.length - 1)
    expect(raw.detectors[0]!.unit).toBe('cps')
    expect(counts.every(c => Number.isInteger(Math.round(c * 1e9) / 1e9))).toBe(true)
    // 5 standard errors of the mean (√(λ/n)) and of the variance (≈ λ·√(2/n)).
    expect(Math.abs(mean - lambda)).toBeLessThan(5 * Math.sqrt(lambda / counts.length))
    expect(Math.abs(variance - lambda)).toBeLessThan(5 * lambda * Math.sqrt(2 / counts.length) + 5 * Math.sqrt(lambda / counts.length))
  })
})

describe('reference ratios carry their published uncertainties (values from memory of each source unless stated)', () => {
  it.each([
    ['AIR:40Ar/36Ar', 298.56, 0.31, /Lee et al\., Geochim\. Cosmochim\. Acta 70 \(2006\) 4507/],
    ['VSMOW:18O/16O', 2005.20e-6, 0.43e-6, /Baertschi, Earth Planet\. Sci\. Lett\. 31 \(1976\) 341/],
    ['VSMOW:2H/1H', 155.76e-6, 0.05e-6, /Hagemann et al\., Tellus 22 \(1970\) 712/],
    ['VPDB:13C/12C', 0.0111802, 0.0000028, /Werner & Brand, Rapid Commun\. Mass Spectrom\. 15 \(2001\) 501/],
    ['AIR:15N/14N', 0.0036765, 0.0000041, /Junk & Svec, Geochim\. Cosmochim\. Acta 14 \(1958\) 234/],
  ] as const)('%s = %f ± %f', (id, ratio, u, source) => {
    expect(engine.referenceRatios[id]).toMatchObject({ ratio, ratioU: u })
    expect(engine.referenceRatios[id].source).toMatch(source)
  })

  it('δ against a reference: its u from the measured ratio alone, and with the reference\'s u (GUM 5.1.2)', () => {
    const r = engine.ratioAndDelta('AIR:40Ar/36Ar', { area: 298.56, areaU: 0.1 }, { area: 1, areaU: 0 })
    expect(r.deltaU).toBeCloseTo(1000 * 0.1 / 298.56, 9)
    expect(r.deltaUWithReference).toBeCloseTo(Math.hypot(1000 * 0.1 / 298.56, 1000 * 0.31 / 298.56), 9)
  })

  it('a positive covariance of the two areas lowers the ratio\'s u: u²(R) = u²|uncorrelated − 2·cov·h/l³', () => {
    const plain = engine.ratioAndDelta('AIR:40Ar/36Ar', { area: 2, areaU: 0.02 }, { area: 1, areaU: 0.01 })
    const shared = engine.ratioAndDelta('AIR:40Ar/36Ar', { area: 2, areaU: 0.02 }, { area: 1, areaU: 0.01 }, 0.02 * 0.01)
    expect(plain.ratioU).toBeCloseTo(2 * Math.hypot(0.01, 0.01), 6)
    expect(shared.ratioU).toBeCloseTo(0, 6)
  })
})
