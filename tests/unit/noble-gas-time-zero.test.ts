// Time-zero regression of static-vacuum signals (shared/engine/isotopes/timeZero.ts) by worked
// examples: ordinary least squares with the intercept's variance s²·(1/n + t̄²/Σ(t − t̄)²) and
// s² = SSR/(n − 2) (Draper & Smith, Applied Regression Analysis, 3rd ed., Wiley 1998, ch. 1–2;
// GUM, JCGM 100:2008, H.3), the coverage factor from Student's t (GUM table G.2), and the flags.
import { describe, expect, it } from 'vitest'
import { EngineError } from '../../shared/engine/errors'
import { coverageFactor } from '../../shared/engine/isotopes/studentT'
import { welchSatterthwaite } from '../../shared/engine/isotopes/ratioDof'
import { timeZeroIntercept } from '../../shared/engine/isotopes/timeZero'

describe('time-zero regression', () => {
  it('linear: the hand-computed intercept, its u with n − 2 degrees of freedom, and k95', () => {
    // t̄ = 25, Σ(t − t̄)² = 500, ȳ = 0.95, Σ(t − t̄)(y − ȳ) = −4.0 → b = −0.008, a = 1.15;
    // residuals 0.03, −0.09, 0.09, −0.03 → SSR = 0.018, s² = 0.009, u²(a) = 0.009·(1/4 + 625/500) = 0.0135.
    const fit = timeZeroIntercept([10, 20, 30, 40], [1.1, 0.9, 1.0, 0.8], 'linear')
    expect(fit.intercept.value).toBeCloseTo(1.15, 12)
    expect(fit.rate.value).toBeCloseTo(-0.008, 12)
    expect(fit.intercept.u).toBeCloseTo(Math.sqrt(0.0135), 12)
    expect(fit.dof).toBe(2)
    // GUM table G.2: t₉₅(2) = 4.30, t₉₅(13) = 2.16, t₉₅(∞) = 1.960.
    expect(fit.k95).toBeCloseTo(4.303, 3)
    expect(coverageFactor(13, 0.95)).toBeCloseTo(2.160, 3)
    expect(coverageFactor(Number.POSITIVE_INFINITY, 0.95)).toBeCloseTo(1.960, 3)
  })

  it('exponential: recovers I₀ and the rate of noiseless consumption exactly', () => {
    const t = Array.from({ length: 12 }, (_, i) => 15 + 10 * i)
    const fit = timeZeroIntercept(t, t.map(v => 3.2e-12 * Math.exp(-2.5e-3 * v)), 'exponential')
    expect(fit.model).toBe('exponential')
    expect(fit.intercept.value / 3.2e-12).toBeCloseTo(1, 9)
    expect(fit.rate.value).toBeCloseTo(-2.5e-3, 9)
    expect(fit.flags).toEqual([])
  })

  it('flags a linear fit that misses the curvature of strong consumption', () => {
    const t = Array.from({ length: 15 }, (_, i) => 15 + 10 * i)
    const wobble = [1, -1, 0.5, -0.5, 0.2, -0.8, 1, 0.3, -0.6, 0.1, -0.2, 0.7, -1, 0.4, -0.3]
    const y = t.map((v, i) => 1e-11 * Math.exp(-8e-3 * v) + 2e-16 * wobble[i]!)
    expect(timeZeroIntercept(t, y, 'linear').flags).toContain('time-zero-poor-fit')
    expect(timeZeroIntercept(t, y, 'exponential').flags).not.toContain('time-zero-poor-fit')
  })

  it('keeps the linear fit for a signal near the noise (a blank), and says so', () => {
    const t = Array.from({ length: 15 }, (_, i) => 15 + 10 * i)
    const noise = [1, -1, 0.5, -0.5, 0.2, -0.8, 1, 0.3, -0.6, 0.1, -0.2, 0.7, -1, 0.4, -0.3]
    const fit = timeZeroIntercept(t, t.map((_, i) => 1.3e-16 + 9e-17 * noise[i]!), 'exponential')
    expect(fit.model).toBe('linear')
    expect(fit.flags).toEqual(expect.arrayContaining(['time-zero-linear-at-low-signal', 'time-zero-imprecise']))
  })

  it('refuses fewer than 4 cycles or cycles at one instant, naming the field', () => {
    expect(() => timeZeroIntercept([1, 2, 3], [1, 2, 3], 'linear', 'items[3].cycles.36')).toThrow(/items\[3\]\.cycles\.36/)
    expect(() => timeZeroIntercept([5, 5, 5, 5], [1, 2, 3, 4], 'linear')).toThrow(EngineError)
  })
})

describe('Welch–Satterthwaite effective degrees of freedom (GUM G.4.1)', () => {
  it('combines components by u⁴/ν and leaves unknown degrees of freedom out', () => {
    // Two equal components of 10 dof: ν_eff = (2u²)² / (2u⁴/10) = 20; a component of infinite dof adds u² only.
    expect(welchSatterthwaite([{ relU: 1, dof: 10 }, { relU: 1, dof: 10 }])).toBeCloseTo(20, 12)
    expect(welchSatterthwaite([{ relU: 1, dof: 10 }, { relU: 1, dof: Number.POSITIVE_INFINITY }])).toBeCloseTo(40, 12)
    expect(welchSatterthwaite([{ relU: 1, dof: Number.POSITIVE_INFINITY }])).toBe(Number.POSITIVE_INFINITY)
  })
})
