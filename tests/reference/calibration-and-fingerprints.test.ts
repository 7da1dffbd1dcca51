import { describe, expect, it } from 'vitest'
import type { EngineError} from '../../shared/engine';
import { applyCalibration, cosineSimilarity, fitCalibration, ionMz, isotope, rankMatches } from '../../shared/engine'

// Reference peaks at the m/z of noble-gas ions (AME2020 masses via the isotope table).
const refs = ['20Ne', '36Ar', '40Ar', '84Kr', '132Xe'].map(l => ionMz(isotope(l).mass, 1))

describe('calibration by least squares', () => {
  it('recovers a known quadratic distortion exactly, residuals below 10⁻⁶ ppm', () => {
    const distort = (m: number) => m * (1 + 2e-4) + 3e-6 * (m - 60) ** 2 - 0.004
    // Invert the distortion numerically: measured m/z is what the uncalibrated geometry reads.
    const points = refs.map((referenceMz) => {
      let measured = referenceMz
      for (let k = 0; k < 50; k++) measured -= (distort(measured) - referenceMz) / (1 + 2e-4 + 6e-6 * (measured - 60))
      return { measuredMz: measured, referenceMz }
    })
    const fit = fitCalibration(points, 2)
    expect(fit.rmsPpm).toBeLessThan(1e-6)
    expect(applyCalibration(fit, points[2]!.measuredMz)).toBeCloseTo(refs[2]!, 9)
  })

  it('reports residuals in ppm when the model is too simple', () => {
    const points = refs.map(r => ({ measuredMz: r * (1 + 1e-5 * Math.sin(r)), referenceMz: r }))
    const fit = fitCalibration(points, 1)
    expect(fit.residualsPpm).toHaveLength(5)
    expect(fit.rmsPpm).toBeGreaterThan(0.1)
    expect(fit.rmsPpm).toBeLessThan(20)
  })

  it.each([
    [[refs[0]!, refs[1]!], 1, 'too-few'],
    [[refs[0]!, refs[1]!, refs[2]!], 2, 'too-few'],
    [[40, 40, 40, 40], 1, 'ill-conditioned'],
    [[40, 40.0000001, 40.0000002, 40.0000003, 40.0000004], 3, 'ill-conditioned'],
  ])('refuses %j at degree %i (%s)', (xs, degree, code) => {
    const points = xs.map(x => ({ measuredMz: x, referenceMz: x }))
    try { fitCalibration(points, degree); expect.unreachable() }
    catch (error) { expect((error as EngineError).code).toBe(code) }
  })
})

describe('fingerprints by cosine similarity', () => {
  const air = [{ mz: 28, intensity: 100 }, { mz: 32, intensity: 27 }, { mz: 40, intensity: 1.2 }, { mz: 44, intensity: 0.04 }]
  it('is 1 for the same pattern at any scale, 0 for disjoint ones', () => {
    expect(cosineSimilarity(air, air.map(s => ({ ...s, intensity: s.intensity * 7 })))).toBeCloseTo(1, 12)
    expect(cosineSimilarity(air, [{ mz: 4, intensity: 1 }])).toBe(0)
  })
  it('ranks the best match first', () => {
    const ranked = rankMatches(air, [
      { id: 'co2', name: 'Carbon dioxide', sticks: [{ mz: 44, intensity: 100 }, { mz: 28, intensity: 10 }, { mz: 16, intensity: 9 }] },
      { id: 'air', name: 'Air', sticks: air },
      { id: 'ar', name: 'Argon', sticks: [{ mz: 40, intensity: 100 }, { mz: 20, intensity: 12 }] },
    ])
    expect(ranked.map(r => r.id)).toEqual(['air', 'co2', 'ar'])
  })
})
