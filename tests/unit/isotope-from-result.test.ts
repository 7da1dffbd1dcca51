import { describe, expect, it } from 'vitest'
import { EngineError, formulaSpecies, ionMz, isotopologueAbundances, processDeltaSequence, processMzSpectrum, referenceMaterials, seededNormal, sequenceItemFromResult } from '../../shared/engine'
import { buildSequence, caseMethod, cases } from '../support/deltaSequences'

// The adapter from the sector engine's result to a sequence item: a swept m/z spectrum of CO2
// at VPDB composition (Gaussian peaks at constant resolving power, heights ∝ ion current, plus
// white noise), through processMzSpectrum, must give beams whose ratios are the true
// isotopologue ratios (shared/engine/isotopes/simulateSequence.ts computes them exactly).

function co2Spectrum(seed: number) {
  const ab = isotopologueAbundances('CO2', { 'δ13C': 0, 'δ18O': 0 })
  const normal = seededNormal(seed)
  const mz: number[] = []
  const signal: number[] = []
  const resolvingPower = 500 // FWHM definition; made-up test instrument (no source)
  // Each peak at its ion's m/z (the main isotopologue of each nominal mass), so the engine assigns it.
  const centre: Record<number, number> = { 44: ionMz(formulaSpecies('CO2').mass, 1), 45: ionMz(formulaSpecies('[13C]O2').mass, 1), 46: ionMz(formulaSpecies('CO[18O]').mass, 1) }
  for (let x = 43.3; x <= 46.7; x += 0.0005) {
    let y = 0
    for (const m of [44, 45, 46]) {
      const sigma = centre[m]! / resolvingPower / 2.3548
      y += 1e-9 * ab[m]! / ab[44]! * Math.exp(-0.5 * ((x - centre[m]!) / sigma) ** 2)
    }
    mz.push(x)
    signal.push(y + 2e-16 * normal())
  }
  return { mz, signal, ab }
}

describe('sequenceItemFromResult', () => {
  const { mz, signal, ab } = co2Spectrum(3)
  const result = processMzSpectrum(mz, signal, 'A', { formulas: ['CO2', '[13C]O2', 'CO[18O]'], ratios: [{ id: 'VPDB:13C/12C', heavy: '[13C]O2', light: 'CO2' }] })
  const meta = { position: 4, role: 'sample' as const, acquiredAt: Date.UTC(2026, 0, 5) }

  it('keys beams by nominal m/z, with ratios equal to the true 45/44 and 46/44 within their u', () => {
    const item = sequenceItemFromResult(result, meta, { ratios: ['45/44', '46/44'] })
    expect(Object.keys(item.beams).sort()).toEqual(['44', '45', '46'])
    expect(item.beams['44']!.value).toBeGreaterThan(0)
    for (const [key, truth] of [['45/44', ab[45]! / ab[44]!], ['46/44', ab[46]! / ab[44]!]] as const) {
      const r = item.ratios[key]!
      expect(r.u).toBeGreaterThan(0)
      expect(Math.abs(r.value - truth)).toBeLessThan(4 * r.u)
    }
    expect(item).toMatchObject({ position: 4, role: 'sample', acquiredAt: meta.acquiredAt })
  })

  it('takes the engine\'s own ratio (with its covariance) where the caller maps it to an m/z pair', () => {
    const item = sequenceItemFromResult(result, meta, { ratios: ['45/44'], engineRatios: { '45/44': 0 } })
    expect(item.ratios['45/44']).toEqual({ value: result.ratios[0]!.ratio, u: result.ratios[0]!.ratioU })
    expect(item.ratios['45/44']!.value).toBeCloseTo(item.beams['45']!.value / item.beams['44']!.value, 10)
  })

  it('refuses a ratio that is not a pair of nominal m/z, naming it', () => {
    const e = (() => { try { sequenceItemFromResult(result, meta, { ratios: ['13C/12C'] }) } catch (x) { return x } })()
    expect(e).toBeInstanceOf(EngineError)
    expect((e as EngineError).field).toBe('ratios.13C/12C')
  })

  it('marks swept beams as peak areas, which the H3+ factor refuses naming the item (Sessions, Burgoyne & Hayes 2001: H3+ ∝ i2² needs steady signals)', () => {
    expect(sequenceItemFromResult(result, meta).beamKind).toBe('peak-area')
    const c = cases.H2!
    const items = buildSequence(c, 2).items
    const ok = processDeltaSequence(caseMethod(c), items, referenceMaterials)
    expect(ok.steps[0]!.step).toBe('h3-factor')
    const k = items.findIndex(i => i.role === 'reference-gas')
    const swept = items.map((i, j) => j === k ? { ...i, beamKind: 'peak-area' as const } : i)
    const e = (() => { try { processDeltaSequence(caseMethod(c), swept, referenceMaterials) } catch (x) { return x } })()
    expect(e).toBeInstanceOf(EngineError)
    expect((e as EngineError).field).toBe(`items[${k}].beamKind`)
    expect((e as EngineError).code).toBe('not-steady-signal')
    // Without the H3+ step the same peak areas are processed (ratios only need proportional beams).
    expect(processDeltaSequence(caseMethod(c, {}, caseMethod(c).steps.slice(1)), swept, referenceMaterials).items.length).toBe(items.length)
  })
})
