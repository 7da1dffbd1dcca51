import fc from 'fast-check'
import { describe, expect, it } from 'vitest'
import { EngineError, geometry, processReadings, siFactor, type RawReadings } from '../../shared/engine'

const sector = geometry.parse({ kind: 'potential-sector', analyzerRadius: { value: 0.27, unit: 'm' } })
const wien = geometry.parse({ kind: 'wien-sector', analyzerRadius: { value: 0.2, unit: 'm' }, plateGap: { value: 4, unit: 'mm' } })
const good = (): RawReadings => ({
  settings: { acceleratingVoltage: { value: 3, unit: 'kV' }, plateVoltage: { value: 400, unit: 'V' }, filterField: { value: 0.1, unit: 'T' } },
  sweep: { reading: 'field', values: [0.50, 0.51, 0.52, 0.53], unit: 'T' },
  detectors: [{ values: [1, 2, 1, 1], unit: 'fA' }],
})

function refusal(fn: () => unknown): { field: string, code: string } {
  try { fn() }
  catch (error) {
    expect(error).toBeInstanceOf(EngineError)
    return { field: (error as EngineError).field, code: (error as EngineError).code }
  }
  throw new Error('expected the engine to refuse')
}

describe('units', () => {
  it.each([
    ['field', 'T', 1], ['field', 'mT', 1e-3], ['field', 'G', 1e-4], ['field', 'kG', 0.1],
    ['voltage', 'kV', 1e3], ['length', 'cm', 1e-2], ['length', 'mm', 1e-3],
    ['current', 'fA', 1e-15], ['current', 'pA', 1e-12], ['countRate', 'cps', 1],
  ] as const)('%s in %s is ×%f in SI', (q, unit, factor) => {
    expect(siFactor(q, unit, 'x')).toBe(factor)
  })
  it('names the field of a missing or unknown unit', () => {
    expect(refusal(() => siFactor('field', 'tesla-ish', 'sweep.unit'))).toEqual({ field: 'sweep.unit', code: 'unit-unknown' })
    expect(refusal(() => siFactor('field', '', 'settings.field.unit'))).toEqual({ field: 'settings.field.unit', code: 'unit-missing' })
  })
})

describe('geometry schemas refuse impossible instruments', () => {
  it.each([
    [{ kind: 'potential-sector', analyzerRadius: { value: 0, unit: 'm' } }, 'analyzerRadius.value'],
    [{ kind: 'potential-sector', analyzerRadius: { value: -0.2, unit: 'm' } }, 'analyzerRadius.value'],
    [{ kind: 'wien-sector', analyzerRadius: { value: 0.2, unit: 'm' }, plateGap: { value: 0, unit: 'mm' } }, 'plateGap.value'],
    [{ kind: 'potential-sector', analyzerRadius: { value: 0.2, unit: 'furlong' } }, 'analyzerRadius.unit'],
    [{ kind: 'potential-sector', analyzerRadius: { value: 0.2, unit: 'm', u: -1 } }, 'analyzerRadius.u'],
    [{ kind: 'multi-collector', collectors: [] }, 'collectors'],
    [{ kind: 'quadrupole' }, 'kind'],
  ])('%j -> %s', (input, path) => {
    const r = geometry.safeParse(input)
    expect(r.success).toBe(false)
    expect(r.error!.issues.map(i => i.path.join('.'))).toContain(path)
  })
})

describe('readings the engine refuses, naming the field', () => {
  it.each<[string, (r: RawReadings) => void, typeof sector, string, string]>([
    ['a negative voltage', r => { r.settings.acceleratingVoltage!.value = -3 }, sector, 'settings.acceleratingVoltage.value', 'not-positive'],
    ['a zero filter field', r => { r.settings.filterField!.value = 0 }, wien, 'settings.filterField.value', 'not-positive'],
    ['a missing accelerating voltage', r => { delete r.settings.acceleratingVoltage }, sector, 'settings.acceleratingVoltage', 'missing'],
    ['columns of different lengths', r => { r.detectors[0]!.values = [1, 2, 3] }, sector, 'detectors[0].values', 'length-mismatch'],
    ['NaN in the sweep', r => { (r.sweep!.values as number[])[2] = Number.NaN }, sector, 'sweep.values[2]', 'not-finite'],
    ['Infinity in the detector', r => { (r.detectors[0]!.values as number[])[1] = Infinity }, sector, 'detectors[0].values[1]', 'not-finite'],
    ['null in the detector', r => { (r.detectors[0]!.values as (number | null)[])[0] = null }, sector, 'detectors[0].values[0]', 'not-finite'],
    ['an empty sweep', r => { r.sweep!.values = []; r.detectors[0]!.values = [] }, sector, 'sweep.values', 'too-short'],
    ['a one-point sweep', r => { r.sweep!.values = [0.5]; r.detectors[0]!.values = [1] }, sector, 'sweep.values', 'too-short'],
    ['a sweep that goes back and forth', r => { r.sweep!.values = [0.50, 0.51, 0.50, 0.52] }, sector, 'sweep.values[2]', 'not-monotonic'],
    ['an unknown detector unit', r => { r.detectors[0]!.unit = 'volts' }, sector, 'detectors[0].unit', 'unit-unknown'],
    ['no detector', r => { r.detectors = [] }, sector, 'detectors', 'missing'],
  ])('%s', (_what, spoil, geo, field, code) => {
    const r = good()
    spoil(r)
    expect(refusal(() => processReadings(geo, r))).toEqual({ field, code })
  })
})

describe('the engine never returns NaN or Infinity (fast-check)', () => {
  it('for any finite, increasing sweep and finite detector column', () => {
    fc.assert(fc.property(
      fc.array(fc.double({ min: 1e-6, max: 1, noNaN: true }), { minLength: 2, maxLength: 300 }),
      fc.array(fc.double({ min: -1e3, max: 1e3, noNaN: true }), { minLength: 300, maxLength: 300 }),
      (steps, signal) => {
        const sweep: number[] = []
        let b = 0.1
        for (const s of steps) { b += s * 1e-3; sweep.push(b) }
        const r: RawReadings = { settings: { acceleratingVoltage: { value: 3000, unit: 'V' } }, sweep: { reading: 'field', values: sweep, unit: 'T' }, detectors: [{ values: signal.slice(0, sweep.length), unit: 'pA' }] }
        const result = processReadings(sector, r)
        const numbers = JSON.stringify(result, (_k, v) => (typeof v === 'number' && !Number.isFinite(v) ? 'NOT-FINITE' : v))
        expect(numbers).not.toContain('NOT-FINITE')
      },
    ), { numRuns: 300, seed: 99 })
  })
})
