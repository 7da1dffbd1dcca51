import type { Readable } from 'node:stream'
import { createInterface } from 'node:readline'
import { inflateSync } from 'node:zlib'
import { XMLParser } from 'fast-xml-parser'
import { convert } from 'jcampconverter'
import { MAX_POINTS } from '#shared/schemas/acquisitions'

// Acquisitions arrive as files too: CSV with a header row of units, JCAMP-DX (IUPAC) and
// mzML 1.1 (HUPO-PSI). Each parser turns a file into the same acquisition body the JSON
// route takes, which the acquisition schema then validates as usual. Each reads a stream
// that is already capped (the request's counter, or busboy's per-part limit), and every
// text it splits is split by hand or by patterns without nested or overlapping quantifiers:
// a line costs time in proportion to its length whatever it holds (eslint-plugin-regexp's
// backtracking rules hold this in lint).

export type FileKind = 'csv' | 'jcamp' | 'mzml'

export function fileKindOf(contentType: string): FileKind | 'json' | undefined {
  const type = contentType.split(';')[0]!.trim().toLowerCase()
  if (type === 'application/json' || type === '') return 'json'
  if (type === 'text/csv' || type === 'application/csv') return 'csv'
  if (type === 'chemical/x-jcamp-dx' || type === 'application/jcamp-dx' || type === 'application/x-jcamp-dx') return 'jcamp'
  if (type === 'application/mzml+xml' || type === 'application/xml' || type === 'text/xml') return 'mzml'
  return undefined
}

/** Metadata given beside the file (the query string), which wins over the file's own. */
export type QueryMeta = Partial<Record<'instrument' | 'runId' | 'acquiredAt' | 'sampleRef', string>>

async function readAll(stream: Readable): Promise<string> {
  const text = (await readStreamBytes(stream)).toString('utf8')
  return text.startsWith('\uFEFF') ? text.slice(1) : text
}

/**
 * "field [T]" or "detector (fA)" -> name and unit: the unit is what the last bracket pair
 * holds (no closing bracket inside it), the name what comes before the first opening
 * bracket of that pair. Two scans of the cell, no pattern.
 */
export function splitUnitCell(cell: string): { name: string, unit: string } | undefined {
  const text = cell.trim()
  const close = text.at(-1)
  if (close !== ']' && close !== ')') return undefined
  const inner = text.slice(0, -1)
  const lastClose = Math.max(inner.lastIndexOf(']'), inner.lastIndexOf(')'))
  for (let i = Math.max(1, lastClose + 1); i < inner.length; i++) {
    if (inner[i] !== '[' && inner[i] !== '(') continue
    const name = inner.slice(0, i).trim()
    const unit = inner.slice(i + 1).trim()
    return name && unit ? { name, unit } : undefined
  }
  return undefined
}

const META_KEY = /^\w[\w ]*$/

/** "# key: value" or "# key = value" -> key and value; anything else is a comment. */
export function splitMetaLine(line: string): { key: string, value: string } | undefined {
  const body = line.slice(1)
  let sep = -1
  for (let i = 0; i < body.length; i++) if (body[i] === ':' || body[i] === '=') { sep = i; break }
  if (sep < 0) return undefined
  const key = body.slice(0, sep).trim()
  return META_KEY.test(key) ? { key, value: body.slice(sep + 1).trim() } : undefined
}

interface Growing { data: Float64Array, length: number }
function push(col: Growing, v: number) {
  if (col.length === col.data.length) { const next = new Float64Array(col.data.length * 2); next.set(col.data); col.data = next }
  col.data[col.length++] = v
}

/**
 * CSV: `# key: value` lines for metadata and fixed settings ("# acceleratingVoltage: 3 kV ± 0.0006"),
 * then a header row naming each column with its unit ("field [T],detector [fA]"), then numbers.
 * Read line by line from the stream into typed arrays; a byte-order mark and CRLF are fine.
 */
export async function parseCsvUpload(stream: Readable, query: QueryMeta): Promise<Record<string, unknown>> {
  const lines = createInterface({ input: stream, crlfDelay: Infinity })
  const meta: MetaEntry[] = []
  let header: { name: string, unit: string }[] | undefined
  let columns: Growing[] = []
  let lineNo = 0
  for await (const raw of lines) {
    lineNo++
    const line = (lineNo === 1 && raw.startsWith('\uFEFF') ? raw.slice(1) : raw).trim()
    if (!line) continue
    if (line.startsWith('#')) {
      const m = splitMetaLine(line)
      if (m) meta.push({ ...m, line: lineNo })
      continue
    }
    const cells = line.split(/[,;\t]/).map(c => c.trim())
    if (!header) {
      header = cells.map((cell, i) => {
        const m = splitUnitCell(cell)
        if (!m) throw fieldProblem(`csv.header.${i}`, `column "${cell.slice(0, 80)}" needs its unit in brackets, e.g. "field [T]"`)
        return m
      })
      if (header.length < 2) throw fieldProblem('csv.header', 'needs a swept column and at least one detector column')
      columns = header.map(() => ({ data: new Float64Array(1024), length: 0 }))
      continue
    }
    if (cells.length !== header.length) throw fieldProblem(`csv.line.${lineNo}`, `has ${cells.length} cells, the header has ${header.length}`)
    for (let i = 0; i < cells.length; i++) {
      const v = Number(cells[i])
      if (cells[i] === '' || !Number.isFinite(v)) throw fieldProblem(`csv.line.${lineNo}`, `cell ${i + 1} ("${cells[i]!.slice(0, 80)}") is not a finite number`)
      push(columns[i]!, v)
    }
  }
  if (!header) throw fieldProblem('csv', 'has no header row with units')
  if (columns[0]!.length === 0) throw fieldProblem('csv', 'has a header but no data rows')
  const [swept, ...detectors] = header
  const sweepReading = /volt/i.test(swept!.name) ? 'acceleratingVoltage' : 'field'
  return withMeta(query, meta, {
    sweep: { reading: sweepReading, unit: swept!.unit, values: Array.from(columns[0]!.data.subarray(0, columns[0]!.length)) },
    detectors: detectors.map((d, i) => ({ collector: d.name.toLowerCase() === 'detector' ? undefined : d.name, unit: d.unit, values: Array.from(columns[i + 1]!.data.subarray(0, columns[i + 1]!.length)) })),
  }, { strict: 'csv.meta' })
}

// Metadata keys by their normalised name (no spaces, underscores or hyphens; lower case).
// Maps, so a name from a file is only ever one of these own entries ("constructor" is not).
const SETTING_NAMES = new Map([
  ['acceleratingvoltage', 'acceleratingVoltage'], ['field', 'field'], ['platevoltage', 'plateVoltage'], ['filterfield', 'filterField'],
])
const FIELD_NAMES = new Map([
  ['instrument', 'instrument'], ['runid', 'runId'], ['acquiredat', 'acquiredAt'], ['longdate', 'acquiredAt'],
  ['sampleref', 'sampleRef'], ['sampledescription', 'sampleRef'],
])
const PROCESSING_NAMES = new Set(['formulas', 'tolerance', 'toleranceppm', 'ratio'])
const CSV_KEYS = 'instrument, runId, acquiredAt, sampleRef, acceleratingVoltage, field, plateVoltage, filterField, formulas, tolerancePpm, ratio'

const isDigit = (c: string) => c >= '0' && c <= '9'
const isNumberChar = (c: string) => isDigit(c) || c === '.' || c === 'e' || c === 'E' || c === '-' || c === '+'
const isUnitChar = (c: string) => (c >= 'A' && c <= 'Z') || (c >= 'a' && c <= 'z') || c === 'µ' || c === '/'
const isSpace = (c: string | undefined) => c === ' ' || c === '\t'

/** "3 kV ± 0.0006" -> { value: 3, unit: 'kV', u: 0.0006 }: one left-to-right scan. */
export function parseSetting(text: string, path: string) {
  const refuse = () => fieldProblem(path, `"${text.slice(0, 80)}" is not a value with a unit, e.g. "3 kV ± 0.0006"`)
  let i = 0
  const skipSpace = () => { while (isSpace(text[i])) i++ }
  const take = (ok: (c: string) => boolean) => { const from = i; while (i < text.length && ok(text[i]!)) i++; return text.slice(from, i) }
  skipSpace()
  const value = take(isNumberChar)
  skipSpace()
  const unit = take(isUnitChar)
  skipSpace()
  let u: string | undefined
  const sign = text.startsWith('±', i) ? 1 : text.startsWith('+/-', i) ? 3 : text.startsWith('+-', i) ? 2 : 0
  if (sign) {
    i += sign
    skipSpace()
    u = take(c => isDigit(c) || c === '.' || c === 'e' || c === 'E')
    if (!u) throw refuse()
    skipSpace()
  }
  if (!value || !unit || i !== text.length || !Number.isFinite(Number(value))) throw refuse()
  return { value: Number(value), unit, ...(u ? { u: Number(u) } : {}) }
}

export interface MetaEntry { key: string, value: string, line?: number }
interface MetaRules {
  /** Where an unknown or repeated key is named (CSV: `csv.meta`); absent: file formats whose own labels are ignored. */
  strict?: string
}

/**
 * Metadata (file first, query string over it) into the acquisition body's fields. In a CSV,
 * Arcwise's own format, a key it does not know or a key given twice is refused by name
 * rather than dropped; JCAMP-DX labels and mzML user parameters carry the formats' and
 * instrument software's own names, of which Arcwise reads the ones it knows.
 */
function withMeta(query: QueryMeta, entries: MetaEntry[], body: Record<string, unknown>, rules: MetaRules = {}) {
  const settings: Record<string, unknown> = {}
  const processing: Record<string, unknown> = {}
  const fields: Record<string, string> = {}
  const seen = new Set<string>()
  for (const { key: rawKey, value, line } of entries) {
    const key = rawKey.replace(/[\s_-]/g, '').toLowerCase()
    const known = SETTING_NAMES.has(key) || FIELD_NAMES.has(key) || PROCESSING_NAMES.has(key)
    if (rules.strict) {
      const at = `${rules.strict}.${rawKey.slice(0, 64)}`
      if (!known) throw fieldProblem(at, `is not a metadata key Arcwise reads${line ? ` (line ${line})` : ''}; use ${CSV_KEYS}`)
      if (key !== 'ratio' && seen.has(key)) throw fieldProblem(at, `is given twice${line ? ` (line ${line})` : ''}`)
      seen.add(key)
    }
    const setting = SETTING_NAMES.get(key)
    const field = FIELD_NAMES.get(key)
    if (setting) settings[setting] = parseSetting(value, `settings.${setting}`)
    else if (field) fields[field] = value
    else if (key === 'formulas') processing.formulas = value.split(/[\s,]+/).filter(Boolean)
    else if (key === 'tolerance' || key === 'toleranceppm') processing.tolerancePpm = Number.parseFloat(value)
    else if (key === 'ratio') {
      const [id, heavy, light] = value.split(/\s+/)
      processing.ratios = [...(processing.ratios as unknown[] ?? []), { id, ...(heavy ? { heavy } : {}), ...(light ? { light } : {}) }]
    }
  }
  return { ...fields, ...query, settings, ...body, ...(Object.keys(processing).length ? { processing } : {}) }
}

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

// mzML 1.1 controlled-vocabulary accessions (PSI-MS CV): what each binary array holds.
const CV = { mzArray: 'MS:1000514', intensityArray: 'MS:1000515', float64: 'MS:1000523', float32: 'MS:1000521', zlib: 'MS:1000574' }

/**
 * The most one binary array may inflate to: the point limit of the acquisition schema in
 * 64-bit floats. zlib stops there, so a compressed bomb costs at most this much memory.
 */
export const MAX_ARRAY_BYTES = MAX_POINTS * 8

function decodeArray(a: { cvParam?: { accession: string }[], binary?: string }, path: string) {
  const acc = new Set((a.cvParam ?? []).map(p => p.accession))
  let bytes: Buffer = Buffer.from(String(a.binary ?? '').trim(), 'base64')
  if (acc.has(CV.zlib)) {
    try { bytes = inflateSync(bytes, { maxOutputLength: MAX_ARRAY_BYTES }) }
    catch (error) {
      if ((error as { code?: string }).code === 'ERR_BUFFER_TOO_LARGE') {
        throw fieldProblem(path, `inflates past ${MAX_ARRAY_BYTES} bytes, more than ${MAX_POINTS} points of 64-bit floats`, 413, 'payload-too-large')
      }
      throw fieldProblem(path, `is not zlib data: ${(error as Error).message}`)
    }
  }
  const size = acc.has(CV.float32) ? 4 : 8
  if (bytes.length % size) throw fieldProblem(path, `holds ${bytes.length} bytes, not a whole number of ${size * 8}-bit floats`)
  // A copy, so the view starts on a float's boundary whatever the decoder's buffer offset.
  const aligned = new Uint8Array(bytes).buffer
  return { acc, values: Array.from(size === 4 ? new Float32Array(aligned) : new Float64Array(aligned)) }
}

/**
 * mzML 1.1: the first spectrum's m/z and intensity arrays (base64, 32- or 64-bit floats,
 * optionally zlib). m/z here was computed by the instrument's own software, so Arcwise
 * takes it as is. The XML parser never resolves entities, external or internal.
 */
export async function parseMzmlUpload(stream: Readable, query: QueryMeta): Promise<Record<string, unknown>> {
  const text = await readAll(stream)
  if (/<!ENTITY/i.test(text)) throw fieldProblem('mzml', 'declares entities; Arcwise does not read XML with entity declarations')
  const xml = new XMLParser({ ignoreAttributes: false, attributeNamePrefix: '', processEntities: false, isArray: name => ['cvParam', 'binaryDataArray', 'spectrum', 'userParam'].includes(name) })
  let doc
  try { doc = xml.parse(text) }
  catch (error) { throw fieldProblem('mzml', `is not well-formed XML: ${(error as Error).message}`) }
  const root = doc.indexedmzML?.mzML ?? doc.mzML
  const spectrum = root?.run?.spectrumList?.spectrum?.[0]
  if (!spectrum) throw fieldProblem('mzml', 'holds no spectrum')
  const arrays = spectrum.binaryDataArrayList?.binaryDataArray ?? []
  if (!Array.isArray(arrays)) throw fieldProblem('mzml', 'holds no binary data arrays')
  const decoded = arrays.map((a: Parameters<typeof decodeArray>[0], i: number) => decodeArray(a, `mzml.spectrum.binaryDataArray.${i}`))
  const mz = decoded.find((d: { acc: Set<string> }) => d.acc.has(CV.mzArray))
  const intensity = decoded.find((d: { acc: Set<string> }) => d.acc.has(CV.intensityArray))
  if (!mz || !intensity) throw fieldProblem('mzml', 'needs an m/z array (MS:1000514) and an intensity array (MS:1000515)')
  const params: MetaEntry[] = []
  for (const p of [...(spectrum.userParam ?? []), ...(root?.run?.userParam ?? [])]) if (p.name) params.push({ key: String(p.name), value: String(p.value ?? '') })
  const byName = new Map(params.map(p => [p.key, p.value]))
  if (root?.run?.startTimeStamp && !byName.has('acquiredAt')) params.push({ key: 'acquiredAt', value: String(root.run.startTimeStamp) })
  return withMeta(query, params, { mzSpectrum: { unit: byName.get('intensityUnit') ?? 'cps', mz: mz.values, values: intensity.values }, detectors: [] })
}
