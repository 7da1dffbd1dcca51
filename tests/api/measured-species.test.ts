import { describe, expect, it } from 'vitest'
import { formulaSpecies, geometry, simulateFieldSweep } from '../../shared/engine'
import { bearer, labWithInstrument, sectorGeometry } from '../support/lab'
import { ConsoleClient, unique, useArcwise } from '../support/server'

await useArcwise()

// Issue 18, point 9: an instrument can restrict candidates to the species it measures. At
// m/z 28, N2+ (28.0056) and CO+ (27.9944) lie 0.011 apart (AME2020 masses, from memory), far
// inside the peak width at resolving power 400, so with both registered as candidates the
// peak is ambiguous; an instrument that measures N2 but never CO says so once.
function nitrogenRun(runId: string, processing: Record<string, unknown>) {
  const raw = simulateFieldSweep({
    geometry: geometry.parse(sectorGeometry), acceleratingVoltageV: 3000, mzFrom: 27, mzTo: 29.5, points: 3000, resolvingPower: 400, seed: 11,
    species: [{ species: formulaSpecies('N2'), currentA: 2e-10 }], noiseA: 1e-15, baselineA: 5e-15, currentUnit: 'fA',
  })
  return {
    instrument: 'ms-1', runId, acquiredAt: '2026-11-30T10:00:00Z',
    settings: { acceleratingVoltage: { value: 3, unit: 'kV', u: 0.0006 } },
    sweep: { reading: 'field' as const, unit: 'T', values: Array.from(raw.sweep!.values) },
    detectors: [{ unit: 'fA', values: Array.from(raw.detectors[0]!.values) }],
    processing: { formulas: ['N2', 'CO'], ...processing },
  }
}

const post = (secret: string, body: unknown) => new ConsoleClient().request('POST', '/api/v1/acquisitions', body, bearer(secret))
const peakAt28 = (body: { result: { peaks: { centroid: number, assignment: { species: string } | null, ambiguous?: boolean }[], qc: { code: string }[] } }) =>
  ({ peak: body.result.peaks.find(p => Math.abs(p.centroid - 28) < 0.2)!, codes: body.result.qc.map(q => q.code) })

describe('the species an instrument measures', () => {
  it('makes m/z 28 unambiguous once registered, and an acquisition\'s own list still overrides it', async () => {
    const { admin, lab, instrument, key } = await labWithInstrument()
    const before = peakAt28((await post(key.secret, nitrogenRun(unique('n2'), {}))).body)
    expect(before.codes).toContain('ambiguous')

    const saved = await admin.patch(`/api/console/labs/${lab.id}/instruments/${instrument.id}`, { measuredSpecies: ['N2', '40Ar', 'CO2'] })
    expect(saved.status).toBe(200)
    expect(saved.body.measuredSpecies).toEqual(['N2', '40Ar', 'CO2'])
    const after = peakAt28((await post(key.secret, nitrogenRun(unique('n2'), {}))).body)
    expect(after.codes).not.toContain('ambiguous')
    expect(after.peak.assignment?.species).toBe('N2')

    // The acquisition names CO only: its list wins over the instrument's, and CO+ lies 400 ppm
    // from this N2+ peak, outside the 50 ppm window, so the peak is left unassigned.
    const own = peakAt28((await post(key.secret, nitrogenRun(unique('n2'), { measuredSpecies: ['CO'] }))).body)
    expect(own.peak.assignment).toBeNull()
    expect(own.codes).toContain('unassigned')

    const audit = await admin.get('/api/console/audit?action=instrument.species-registered&limit=200')
    expect(audit.body.items.find((a: { targetId: string }) => a.targetId === instrument.id)?.detail).toEqual({ measuredSpecies: ['N2', '40Ar', 'CO2'] })
  })

  it('refuses a label the engine cannot read, naming the entry, and keeps the list it had', async () => {
    const { admin, lab, instrument } = await labWithInstrument()
    await admin.patch(`/api/console/labs/${lab.id}/instruments/${instrument.id}`, { measuredSpecies: ['N2'] })
    const bad = await admin.patch(`/api/console/labs/${lab.id}/instruments/${instrument.id}`, { measuredSpecies: ['CO2', 'Qz3'] })
    expect(bad.status).toBe(422)
    expect(bad.body.errors[0].path).toBe('measuredSpecies.1')
    const twice = await admin.patch(`/api/console/labs/${lab.id}/instruments/${instrument.id}`, { measuredSpecies: ['N2', 'N2'] })
    expect(twice.status).toBe(422)
    expect(twice.body.errors[0].path).toBe('measuredSpecies')
    const shown = await admin.get(`/api/console/labs/${lab.id}/instruments/${instrument.id}`)
    expect(shown.body.measuredSpecies).toEqual(['N2'])

    const cleared = await admin.patch(`/api/console/labs/${lab.id}/instruments/${instrument.id}`, { measuredSpecies: [] })
    expect(cleared.body.measuredSpecies).toBeNull()
  })
})
