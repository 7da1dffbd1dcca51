import { describe, expect, it } from 'vitest'
import { formulaSpecies, geometry, processReadings, simulateFieldSweep, type EngineResult } from '../../shared/engine'
import { figuresChanged, figuresDiff } from '../../server/services/reprocessing/compare'

// What reprocessing counts as a change a partner would see (server/services/reprocessing/compare.ts):
// a result computed again from the same readings under the same registrations is unchanged,
// also after the jsonb round trip; any move of an m/z, area, ratio, δ or flag is a change.

const geo = geometry.parse({ kind: 'potential-sector', analyzerRadius: { value: 27, unit: 'cm', u: 0.01 } })
function co2Result(): EngineResult {
  const raw = simulateFieldSweep({
    geometry: geo, acceleratingVoltageV: 3000, mzFrom: 43, mzTo: 46.5, points: 2000, resolvingPower: 900, seed: 11,
    species: [{ species: formulaSpecies('CO2'), currentA: 4e-9 }, { species: formulaSpecies('[13C]O2'), currentA: 4e-9 * 0.0111802 }],
    noiseA: 1e-15, baselineA: 5e-15, currentUnit: 'fA',
  })
  return processReadings(geo, raw, {
    tolerance: { ppm: 50 }, formulas: ['CO2', '[13C]O2'], geometryVersion: 1,
    ratios: [{ id: 'VPDB:13C/12C', heavy: '[13C]O2', light: 'CO2' }],
  })
}
const copy = (r: EngineResult): EngineResult => JSON.parse(JSON.stringify(r)) as EngineResult

describe('figuresChanged', () => {
  const base = co2Result()
  it('finds nothing changed when the same readings are processed again, before and after a JSON round trip', () => {
    expect(base.peaks.length).toBeGreaterThanOrEqual(2)
    expect(base.ratios).toHaveLength(1)
    expect(figuresChanged(base, co2Result())).toBe(false)
    expect(figuresChanged(copy(base), co2Result())).toBe(false)
  })

  it.each<[string, (r: EngineResult) => void]>([
    ['an m/z moved by 1 ppb', r => { r.peaks[0]!.centroid *= 1 + 1e-9 }],
    ['an m/z uncertainty', r => { r.peaks[0]!.centroidU *= 1.01 }],
    ['an area', r => { r.peaks[1]!.area *= 1.0001 }],
    ['an assignment', r => { r.peaks[0]!.assignment = null }],
    ['a ratio', r => { r.ratios[0]!.ratio *= 1.00001 }],
    ['a δ', r => { r.ratios[0]!.deltaPermil += 0.01 }],
    ['a δ uncertainty', r => { r.ratios[0]!.deltaU += 0.01 }],
    ['a QC flag raised', r => { r.qc.push({ code: 'outside-calibration', message: 'x' }) }],
    ['a peak more', r => { r.peaks.push({ ...r.peaks[0]!, centroid: 46 }) }],
    ['calibrated or not', r => { r.calibrated = !r.calibrated }],
  ])('counts %s as a change', (_, change) => {
    const after = copy(base)
    change(after)
    expect(figuresChanged(base, after)).toBe(true)
  })

  it('ignores what partners do not read as figures (FWHM, resolving power, matches) and the order of flags', () => {
    const after = copy(base)
    after.peaks[0]!.fwhm = after.peaks[0]!.fwhm! * 1.1
    after.matches = [{ id: 'x', name: 'y', similarity: 0.5 }]
    after.qc.reverse()
    expect(figuresChanged(base, after)).toBe(false)
  })
})

describe('figuresDiff', () => {
  it('pairs the peaks by m/z with the shift in ppm, the ratios by id with Δδ, and lists flags added and removed', () => {
    const before = co2Result()
    const after = copy(before)
    for (const p of after.peaks) p.centroid *= 1 + 30e-6
    after.ratios[0]!.deltaPermil += 0.5
    after.qc = [...after.qc.filter(q => q.code !== 'uncalibrated'), { code: 'outside-calibration', message: 'x' }]
    after.peaks.push({ ...after.peaks[0]!, centroid: 46.2 })
    const diff = figuresDiff(before, after)
    expect(diff.changed).toBe(true)
    const paired = diff.peaks.filter(p => p.old && p.new)
    expect(paired).toHaveLength(before.peaks.length)
    for (const p of paired) expect(p.mzShiftPpm).toBeCloseTo(30, 6)
    expect(diff.peaks.filter(p => !p.old).map(p => p.new!.mz)).toEqual([46.2])
    expect(diff.ratios[0]!.deltaChangePermil).toBeCloseTo(0.5, 9)
    expect(diff.flags.added).toEqual(['outside-calibration'])
    expect(diff.flags.removed).toEqual(before.qc.some(q => q.code === 'uncalibrated') ? ['uncalibrated'] : [])
  })
})
