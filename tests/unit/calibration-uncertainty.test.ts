// Calibration by weighted least squares and its uncertainty, and GUM Supplement 1 coverage
// intervals, tested on data simulated with the truth known.
// Acceptance over N seeds: |mean bias| under half the mean stated u, and the fraction within
// 2u (calibration) or inside the 95 % interval (Monte Carlo) in the binomial 99 % band around
// 0.95: 0.95 ± 2.576·√(0.95·0.05/N) (normal approximation to the binomial; common practice).
import { describe, expect, it } from 'vitest'
import type { EngineError} from '../../shared/engine';
import {
  applyCalibration, calibrationU, fitCalibration, geometry, ionMz, isotope, monteCarloCoverage,
  processReadings, propagate, seededNormal, simulateFieldSweep,
} from '../../shared/engine'

const band = (n: number): [number, number] => [0.95 - 2.576 * Math.sqrt(0.95 * 0.05 / n), 0.95 + 2.576 * Math.sqrt(0.95 * 0.05 / n)]
// Reference m/z of noble-gas and common ions (AME2020 masses via the isotope table).
const refs = ['4He', '20Ne', '36Ar', '40Ar', '84Kr', '86Kr', '129Xe', '132Xe'].map(l => ionMz(isotope(l).mass, 1))
// The instrument's true distortion: measured = true·(1 + 150 ppm) + 2·10⁻⁷·(true − 60)²  (a quadratic, invented)
const distort = (m: number) => m * (1 + 150e-6) + 2e-7 * (m - 60) ** 2

describe('calibration: weighted least squares with its covariance (300 seeds)', () => {
  const SEEDS = 300
  it.each([
    ['inside the range, m/z 58', 58],
    ['near the end, m/z 128', 128],
  ])('the calibrated m/z %s is unbiased and ~95 %% within 2u(gᵀCg)', (_, x) => {
    const trueMeasured = distort(x)
    let bias = 0
    let sumU = 0
    let within = 0
    for (let s = 0; s < SEEDS; s++) {
      const normal = seededNormal(100 + s)
      // Each reference centroid has its own u (weak peaks scatter more): 0.2 to 2 ppm.
      const points = refs.map((r, i) => {
        const u = r * (0.2 + 1.8 * ((i * 7) % 8) / 7) * 1e-6
        return { measuredMz: distort(r) + u * normal(), referenceMz: r, measuredU: u }
      })
      const fit = fitCalibration(points, 2)
      const y = applyCalibration(fit, trueMeasured)
      const u = calibrationU(fit, trueMeasured)!
      bias += y - x
      sumU += u
      if (Math.abs(y - x) <= 2 * u) within++
    }
    expect(Math.abs(bias / SEEDS)).toBeLessThan(sumU / SEEDS / 2)
    const [lo, hi] = band(SEEDS)
    expect(within / SEEDS).toBeGreaterThanOrEqual(lo)
    expect(within / SEEDS).toBeLessThanOrEqual(hi)
  })

  it('the RMS residual divides by n − p: for residuals (+1, −1, +1, −1) ppm around a line it is √(4/2) ppm', () => {
    // A line fitted to points whose residuals alternate: with n = 4, p = 2 the RMS is √(Σr²/(n − p)).
    const xs = [10, 20, 30, 40]
    const points = xs.map((x, i) => ({ measuredMz: x, referenceMz: x * (1 + (i % 2 ? -1 : 1) * 1e-6) }))
    const fit = fitCalibration(points, 1)
    const ss = fit.residualsPpm.reduce((a, r) => a + r * r, 0)
    expect(fit.dof).toBe(2)
    expect(fit.rmsPpm).toBeCloseTo(Math.sqrt(ss / 2), 12)
    expect(fit.rmsPpm).toBeGreaterThan(Math.sqrt(ss / 4) * 1.4)
  })

  it('weights follow the stated u: a point 100 times less certain barely moves the fit', () => {
    const points = refs.map(r => ({ measuredMz: r, referenceMz: r, measuredU: r * 1e-6 }))
    points[3] = { ...points[3]!, measuredMz: points[3]!.measuredMz * (1 + 50e-6), measuredU: points[3]!.measuredU * 100 }
    const weighted = fitCalibration(points, 1)
    const unweighted = fitCalibration(points.map(({ measuredU: _, ...p }) => p), 1)
    const at = refs[3]!
    expect(Math.abs(applyCalibration(weighted, at) / at - 1)).toBeLessThan(0.5e-6)
    expect(Math.abs(applyCalibration(unweighted, at) / at - 1)).toBeGreaterThan(3e-6)
    expect(weighted.weighted).toBe(true)
    expect(unweighted.weighted).toBe(false)
  })

  it('refuses a mix of points with and without uncertainties, naming the first without', () => {
    const points = refs.map((r, i) => ({ measuredMz: r, referenceMz: r, ...(i === 2 ? {} : { measuredU: 1e-5 }) }))
    try { fitCalibration(points, 1); expect.unreachable() }
    catch (error) { expect((error as EngineError).field).toBe('points[2].measuredU') }
  })
})

describe('calibration in the pipeline: range and geometry version', () => {
  const geo = geometry.parse({ kind: 'potential-sector', analyzerRadius: { value: 0.3, unit: 'm' } })
  const U = 5000
  // A fit over m/z 20–132 (the example); a sweep that also covers 238U⁺.
  const fitPoints = ['20Ne', '36Ar', '40Ar', '84Kr', '132Xe'].map(l => ionMz(isotope(l).mass, 1)).map(r => ({ measuredMz: distort(r), referenceMz: r }))
  const fit = fitCalibration(fitPoints, 2, 1)
  const mzU = ionMz(isotope('238U').mass, 1)
  const mzXe = ionMz(isotope('132Xe').mass, 1)
  const raw = simulateFieldSweep({
    geometry: geo, acceleratingVoltageV: U, mzFrom: 128, mzTo: 242, points: 120_000, resolvingPower: 3000,
    species: [{ species: isotope('132Xe'), z: 1, currentA: 1e-11 }, { species: isotope('238U'), z: 1, currentA: 1e-11 }], noiseA: 1e-16, seed: 5,
  })
  const options = { formulas: ['[132Xe]', '[238U]'], calibration: fit }

  it('flags a peak beyond the calibrated range (m/z 238 from a fit over 20–132) and not one inside it', () => {
    const res = processReadings(geo, raw, { ...options, geometryVersion: 1 })
    const outside = res.qc.filter(f => f.code === 'outside-calibration').map(f => res.peaks[f.peak!]!.centroid)
    expect(outside.some(m => Math.abs(m - mzU) < 0.1)).toBe(true)
    expect(outside.some(m => Math.abs(m - mzXe) < 0.1)).toBe(false)
    expect(res.calibration.state).toBe('applied')
    expect(res.calibration.uncertaintyPropagated).toBe(true)
    expect(res.calibration.range![1]).toBeCloseTo(fit.range[1] + (fit.range[1] - fit.range[0]) * 0.02, 9)
  })

  it('a calibration fitted under geometry version 1 is retired once version 2 is in force: not applied, flagged', () => {
    const res = processReadings(geo, raw, { ...options, geometryVersion: 2 })
    expect(res.calibrated).toBe(false)
    expect(res.calibration.state).toBe('retired')
    expect(res.qc.map(f => f.code)).toContain('calibration-retired')
    expect(res.qc.map(f => f.code)).not.toContain('outside-calibration')
  })

  it('the fit\'s covariance is the calibrated peaks\' m/z uncertainty (√(gᵀCg), with the peak\'s own centroid fit in quadrature), larger where it extrapolates', () => {
    const res = processReadings(geo, raw, { ...options, geometryVersion: 1 })
    const xe = res.peaks.find(p => Math.abs(p.centroid - mzXe) < 0.1)!
    const u238 = res.peaks.find(p => Math.abs(p.centroid - mzU) < 0.1)!
    // The calibration's part and the peak's own centroid-fit part (noise) add in quadrature.
    expect(xe.centroidUFit).not.toBeNull()
    expect(xe.centroidU).toBeCloseTo(Math.hypot(calibrationU(fit, xe.centroid)!, xe.centroidUFit!), 12)
    const calibrationPart = (p: typeof xe) => Math.sqrt(p.centroidU ** 2 - p.centroidUFit! ** 2) / p.centroid
    expect(calibrationPart(u238)).toBeGreaterThan(3 * calibrationPart(xe))
  })
})

describe('GUM Supplement 1 (JCGM 101:2008) coverage intervals', () => {
  const ratio = ([a, b]: number[]) => a! / b!
  const inputs = [{ value: 1, u: 0.02 }, { value: 1, u: 0.2 }]

  it('for a ratio whose denominator has 20 % u, Monte Carlo departs from first order: u larger, the interval skewed', () => {
    const first = propagate(ratio, inputs)
    const mc = monteCarloCoverage(ratio, inputs, { seed: 3 })
    expect(mc.converged).toBe(true)
    expect(mc.trials).toBeGreaterThanOrEqual(20_000) // at least two adaptive runs of 10⁴ (JCGM 101 7.9.4)
    expect(mc.u / first.u).toBeGreaterThan(1.1)
    expect(mc.interval[1] - mc.mean).toBeGreaterThan(1.3 * (mc.mean - mc.interval[0]))
    expect(mc.expandedU).toBeCloseTo((mc.interval[1] - mc.interval[0]) / 2, 12)
    expect(mc.k).toBeCloseTo(mc.expandedU / mc.u, 12)
    // The shortest interval is shorter for a skewed output (JCGM 101 7.7.2).
    const shortest = monteCarloCoverage(ratio, inputs, { seed: 3, shortest: true, trials: 200_000 })
    expect(shortest.interval[1] - shortest.interval[0]).toBeLessThan(mc.interval[1] - mc.interval[0])
  })

  it('for a linear model Monte Carlo agrees with first order and k → 1.96', () => {
    const mc = monteCarloCoverage(([a, b]) => a! + 2 * b!, [{ value: 3, u: 0.1 }, { value: 1, u: 0.05 }], { seed: 4 })
    expect(mc.u / Math.hypot(0.1, 0.1) - 1).toBeLessThan(0.01)
    expect(Math.abs(mc.k - 1.96)).toBeLessThan(0.03)
  })

  it('the 95 % interval holds 95 % of fresh draws of the output (20,000 draws, binomial 99 % band)', () => {
    const mc = monteCarloCoverage(ratio, inputs, { seed: 5, trials: 1_000_000 })
    const normal = seededNormal(12345)
    const N = 20_000
    let inside = 0
    for (let i = 0; i < N; i++) {
      const y = (1 + 0.02 * normal()) / (1 + 0.2 * normal())
      if (y >= mc.interval[0] && y <= mc.interval[1]) inside++
    }
    const [lo, hi] = band(N)
    expect(inside / N).toBeGreaterThanOrEqual(lo)
    expect(inside / N).toBeLessThanOrEqual(hi)
  })

  it('over 200 simulated measurements of a ratio with a 10 % uncertain denominator, the interval covers the truth ~95 % of the time', () => {
    const normal = seededNormal(99)
    const N = 200
    let inside = 0
    for (let s = 0; s < N; s++) {
      const a = 2 + 0.04 * normal()
      const b = 1 + 0.1 * normal()
      const mc = monteCarloCoverage(ratio, [{ value: a, u: 0.04 }, { value: b, u: 0.1 }], { seed: s + 1, trials: 20_000 })
      if (mc.interval[0] <= 2 && mc.interval[1] >= 2) inside++
    }
    const [lo, hi] = band(N)
    expect(inside / N).toBeGreaterThanOrEqual(lo)
    expect(inside / N).toBeLessThanOrEqual(hi)
  })
})
