import type { Readable } from 'node:stream'
import { convert } from 'jcampconverter'
import { readAll, withMeta, type MetaEntry, type QueryMeta } from './fileFormats'

// JCAMP-DX (McDonald & Wilks, Appl. Spectrosc. 42 (1988) 151) uploads: labelled data records to an acquisition body.

const JCAMP_X_READINGS = new Map<string, { reading: 'field' | 'acceleratingVoltage', unit: string }>([
  ['T', { reading: 'field', unit: 'T' }], ['TESLA', { reading: 'field', unit: 'T' }], ['MT', { reading: 'field', unit: 'mT' }],
  ['G', { reading: 'field', unit: 'G' }], ['GAUSS', { reading: 'field', unit: 'G' }], ['KG', { reading: 'field', unit: 'kG' }],
  ['V', { reading: 'acceleratingVoltage', unit: 'V' }], ['VOLTS', { reading: 'acceleratingVoltage', unit: 'V' }], ['KV', { reading: 'acceleratingVoltage', unit: 'kV' }],
])
const JCAMP_Y_UNITS = new Map([['A', 'A'], ['AMPERES', 'A'], ['AMPERE', 'A'], ['NA', 'nA'], ['PA', 'pA'], ['FA', 'fA'], ['CPS', 'cps'], ['COUNTS/S', 'cps']])

/** "##LABEL=value" and "##$USER LABEL=value" lines, split by hand. */
function jcampLabels(text: string): MetaEntry[] {
  const out: MetaEntry[] = []
  for (const line of text.split('\n')) {
    if (!line.startsWith('##')) continue
    const from = line[2] === '$' ? 3 : 2
    const eq = line.indexOf('=', from)
    if (eq <= from) continue
    out.push({ key: line.slice(from, eq).trim(), value: line.slice(eq + 1).trim() })
  }
  return out
}

/**
 * JCAMP-DX (McDonald & Wilks 1988; IUPAC): the swept reading as X (a field or voltage unit),
 * the detector as Y. Settings and metadata in user labels: ##$ACCELERATING VOLTAGE=3 kV,
 * ##$INSTRUMENT=, ##$RUN ID=, ##LONGDATE=. A block cut short is refused.
 */
export async function parseJcampUpload(stream: Readable, query: QueryMeta): Promise<Record<string, unknown>> {
  const text = await readAll(stream)
  if (!text.includes('##END=')) throw fieldProblem('jcamp', 'is cut short: the block has no ##END=')
  const labels = jcampLabels(text)
  const meta = new Map(labels.map(l => [l.key, l.value]))
  let parsed
  try { parsed = convert(text, { keepRecordsRegExp: /.*/ }).flatten[0] }
  catch (error) { throw fieldProblem('jcamp', `cannot be read: ${(error as Error).message}`) }
  const spectrum = parsed?.spectra?.[0]
  if (!spectrum?.data?.x?.length) throw fieldProblem('jcamp', 'holds no XYDATA or PEAK TABLE')
  const xUnit = String(spectrum.xUnits ?? meta.get('XUNITS') ?? '').toUpperCase().trim()
  const yUnit = String(spectrum.yUnits ?? meta.get('YUNITS') ?? '').toUpperCase().trim()
  const x = JCAMP_X_READINGS.get(xUnit)
  if (!x) throw fieldProblem('jcamp.XUNITS', `"${xUnit.slice(0, 40)}" is not a field or voltage unit; Arcwise takes the instrument's raw swept reading`)
  const y = JCAMP_Y_UNITS.get(yUnit)
  if (!y) throw fieldProblem('jcamp.YUNITS', `"${yUnit.slice(0, 40)}" is not a detector current or count rate`)
  const declared = meta.get('NPOINTS')
  if (spectrum.data.x.length !== (spectrum.data.y?.length ?? 0) || spectrum.data.x.length !== Number(declared ?? spectrum.data.x.length)) {
    throw fieldProblem('jcamp', `is cut short: ${spectrum.data.x.length} points where ##NPOINTS says ${declared?.slice(0, 20)}`)
  }
  return withMeta(query, labels, {
    sweep: { reading: x.reading, unit: x.unit, values: Array.from(spectrum.data.x as ArrayLike<number>) },
    detectors: [{ unit: y, values: Array.from((spectrum.data.y ?? []) as ArrayLike<number>) }],
  })
}
