import { geometry, isotope, formulaSpecies, simulateFieldSweep } from '../../shared/engine'
import { everyQcCode } from '../../scripts/lib/demo'
import { demoUser } from './demo'
import { ConsoleClient, testDb, unique } from './server'

export const sectorGeometry = { kind: 'potential-sector', analyzerRadius: { value: 27, unit: 'cm', u: 0.01 } } as const


/** Sets a lab's release rule through the console (an admin or the lab's manager). */
export async function setRelease(client: ConsoleClient, labId: string, settings: { releasePolicy: 'review' | 'auto', autoReleaseAllows?: string[], fourEyes?: boolean }) {
  const res = await client.request('PUT', `/api/console/labs/${labId}/release-settings`, { autoReleaseAllows: [], fourEyes: false, ...settings })
  if (res.status !== 200) throw new Error(`release settings: ${res.status} ${JSON.stringify(res.body)}`)
  return res.body
}

/**
 * A lab of its own with an instrument and a key of both scopes, set up through the console
 * API. Its results are released automatically whatever flags they raise (`release: 'auto'`,
 * the default, for tests about what happens after release), or held for review (`'review'`).
 */
export async function labWithInstrument(opts: { validFrom?: string, release?: 'auto' | 'review', name?: string } = {}) {
  const admin = await new ConsoleClient().signIn(demoUser('admin').email, demoUser('admin').password)
  const lab = (await admin.post('/api/console/labs', { slug: unique('lab'), name: opts.name ?? 'Test Lab', site: 'Bench 1', contactEmail: 'bench@example.org' })).body
  if ((opts.release ?? 'auto') === 'auto') await setRelease(admin, lab.id, { releasePolicy: 'auto', autoReleaseAllows: everyQcCode })
  const instrument = (await admin.post(`/api/console/labs/${lab.id}/instruments`, { slug: 'ms-1', name: 'Sector one', geometry: sectorGeometry, validFrom: opts.validFrom ?? '2026-01-01T00:00:00Z' })).body
  const key = (await admin.post(`/api/console/labs/${lab.id}/keys`, { name: 'lab PC', scopes: ['acquisitions:write', 'results:read'] })).body
  return { admin, lab, instrument, key, sql: testDb() }
}

/** An acquisition body as a lab PC would post it: a simulated CO2 sweep (engine forward model). */
export function co2Acquisition(runId = unique('run'), points = 4000) {
  const geo = geometry.parse(sectorGeometry)
  const raw = simulateFieldSweep({
    geometry: geo, acceleratingVoltageV: 3000, mzFrom: 43, mzTo: 46.5, points, resolvingPower: 900, seed: 3,
    species: [{ species: formulaSpecies('CO2'), currentA: 4e-9 }, { species: formulaSpecies('[13C]O2'), currentA: 4e-9 * 0.0111802 * 0.99 }, { species: isotope('40Ar'), currentA: 1e-12 }],
    noiseA: 1e-15, baselineA: 5e-15, currentUnit: 'fA',
  })
  return {
    instrument: 'ms-1', runId, acquiredAt: '2026-11-30T10:00:00Z', sampleRef: 'CARB-7',
    settings: { acceleratingVoltage: { value: 3, unit: 'kV', u: 0.0006 } },
    sweep: { reading: 'field' as const, unit: 'T', values: Array.from(raw.sweep!.values) },
    detectors: [{ unit: 'fA', values: Array.from(raw.detectors[0]!.values) }],
    processing: { formulas: ['CO2', '[13C]O2'], ratios: [{ id: 'VPDB:13C/12C' as const, heavy: '[13C]O2', light: 'CO2' }] },
  }
}

export function bearer(secret: string) {
  return { authorization: `Bearer ${secret}` }
}

/**
 * A run of a reference gas on the test sector (N2, Ar, CO2, 13CO2 from m/z 27 to 47), the
 * kind of acquisition a lab calibrates from: four peaks spread over the range.
 */
export function referenceAcquisition(runId = unique('ref'), acquiredAt = '2026-11-30T08:00:00Z', instrument = 'ms-1') {
  const geo = geometry.parse(sectorGeometry)
  const raw = simulateFieldSweep({
    geometry: geo, acceleratingVoltageV: 3000, mzFrom: 27, mzTo: 47, points: 8000, resolvingPower: 900, seed: 5,
    species: [
      { species: formulaSpecies('N2'), currentA: 2e-10 }, { species: isotope('40Ar'), currentA: 5e-11 },
      { species: formulaSpecies('CO2'), currentA: 3e-9 }, { species: formulaSpecies('[13C]O2'), currentA: 3e-9 * 0.0111802 },
    ],
    noiseA: 1e-15, baselineA: 5e-15, currentUnit: 'fA',
  })
  return {
    instrument, runId, acquiredAt, sampleRef: 'REF-GAS-2',
    settings: { acceleratingVoltage: { value: 3, unit: 'kV', u: 0.0006 } },
    sweep: { reading: 'field' as const, unit: 'T', values: Array.from(raw.sweep!.values) },
    detectors: [{ unit: 'fA', values: Array.from(raw.detectors[0]!.values) }],
    processing: { formulas: ['N2', '[40Ar]', 'CO2', '[13C]O2'], ratios: [{ id: 'VPDB:13C/12C' as const, heavy: '[13C]O2', light: 'CO2' }] },
  }
}
