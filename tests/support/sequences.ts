import { formulaSpecies, geometry, simulateFieldSweep } from '../../shared/engine'
import type { SequenceItem } from '../../shared/engine/isotopes/types'
import type { MethodDefinition } from '../../shared/schemas/methods'
import { bearer, sectorGeometry } from './lab'
import { ConsoleClient, unique } from './server'

// Sequences for the API tests: the isotope engine's first-principles simulator gives each
// acquisition's true beam currents (tests/support/deltaSequences.ts), and each becomes a
// 1,000-point field sweep on the test sector whose CO2 peaks carry those currents, posted as a
// lab system would post it.

/** The species that carries each CO2 beam in the sweep (m/z 45 and 46 as one line each). */
const co2Lines: Record<string, string> = { 44: 'CO2', 45: '[13C]O2', 46: 'C[18O]O' }

/** A 1,000-point sweep over m/z 43.5–46.5 whose peaks carry the item's beam currents (A). */
export function co2SweepFor(item: Pick<SequenceItem, 'beams' | 'acquiredAt'>, runId = unique('seq-run'), points = 1000) {
  const geo = geometry.parse(sectorGeometry)
  const species = Object.entries(co2Lines).filter(([mz]) => item.beams[mz]).map(([mz, formula]) => ({ species: formulaSpecies(formula), currentA: Math.max(item.beams[mz]!.value, 0) }))
  const raw = simulateFieldSweep({
    geometry: geo, acceleratingVoltageV: 3000, mzFrom: 43.5, mzTo: 46.5, points, resolvingPower: 900, seed: 11,
    species, noiseA: 2e-16, baselineA: 5e-15, currentUnit: 'fA',
  })
  return {
    instrument: 'ms-1', runId, acquiredAt: new Date(item.acquiredAt).toISOString(),
    settings: { acceleratingVoltage: { value: 3, unit: 'kV', u: 0.0006 } },
    sweep: { reading: 'field' as const, unit: 'T', values: Array.from(raw.sweep!.values) },
    detectors: [{ unit: 'fA', values: Array.from(raw.detectors[0]!.values) }],
    processing: { formulas: Object.values(co2Lines) },
  }
}

/** The sequence members of simulated items: role, material and a sweep each. */
export function membersOf(items: SequenceItem[], prefix = unique('m')) {
  return items.map(item => ({
    position: item.position, role: item.role, ...(item.material ? { material: item.material } : {}),
    acquisition: co2SweepFor(item, `${prefix}-${item.position}`),
  }))
}

export const lab = (secret: string) => ({
  post: (path: string, body: unknown, headers: Record<string, string> = {}) => new ConsoleClient().request('POST', path, body, { ...bearer(secret), ...headers }),
  get: (path: string) => new ConsoleClient().request('GET', path, undefined, bearer(secret)),
})

/** Registers the instrument's method through the API, valid from before the simulated sequences. */
export async function registerMethod(secret: string, definition: MethodDefinition, validFrom = '2026-01-01T00:00:00Z') {
  const res = await lab(secret).post('/api/v1/instruments/ms-1/methods', { name: `${definition.gas} method`, validFrom, definition })
  if (res.status !== 201) throw new Error(`registering the method answered ${res.status}: ${JSON.stringify(res.body)}`)
  return res.body
}
