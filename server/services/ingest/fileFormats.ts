import type { Readable } from 'node:stream'
import { createInterface } from 'node:readline'

// Acquisitions arrive as files too: CSV with a header row of units, JCAMP-DX (IUPAC) and
// mzML 1.1 (HUPO-PSI). Each parser turns a file into the same acquisition body the JSON
// route takes, which the acquisition schema then validates as usual. Each reads a stream
// that is already capped (the request's counter, or busboy's per-part limit), and every
// text it splits is split by hand or by patterns without nested or overlapping quantifiers:
// a line costs time in proportion to its length whatever it holds (eslint-plugin-regexp's
// backtracking rules hold this in lint). CSV and what the formats share are here; JCAMP-DX
// in jcamp.ts, mzML in mzml.ts.

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

export async function readAll(stream: Readable): Promise<string> {
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

// A CSV column grows in blocks of 65,536 values and is copied once, at the end. Doubling one
// typed array copied it whole at each doubling, inside one turn of the event loop: a 64 MB
// CSV (the upload cap) doubled both columns from 8 to 16 million values on the same row,
// 228 ms each on this machine, and `npm run chaos` saw a 536 ms stall (2026-12-04).
const BLOCK = 65_536
interface Column { full: Float64Array[], block: Float64Array, used: number }
const newColumn = (): Column => ({ full: [], block: new Float64Array(BLOCK), used: 0 })
const columnLength = (col: Column) => col.full.length * BLOCK + col.used
function push(col: Column, v: number) {
  if (col.used === BLOCK) { col.full.push(col.block); col.block = new Float64Array(BLOCK); col.used = 0 }
  col.block[col.used++] = v
}
function columnValues(col: Column): number[] {
  const out = new Array<number>(columnLength(col))
  let at = 0
  for (const b of [...col.full, col.block.subarray(0, col.used)]) for (let i = 0; i < b.length; i++) out[at++] = b[i]!
  return out
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
  let columns: Column[] = []
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
      columns = header.map(newColumn)
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
  if (columnLength(columns[0]!) === 0) throw fieldProblem('csv', 'has a header but no data rows')
  const [swept, ...detectors] = header
  const sweepReading = /volt/i.test(swept!.name) ? 'acceleratingVoltage' : 'field'
  return withMeta(query, meta, {
    sweep: { reading: sweepReading, unit: swept!.unit, values: columnValues(columns[0]!) },
    detectors: detectors.map((d, i) => ({ collector: d.name.toLowerCase() === 'detector' ? undefined : d.name, unit: d.unit, values: columnValues(columns[i + 1]!) })),
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
export function withMeta(query: QueryMeta, entries: MetaEntry[], body: Record<string, unknown>, rules: MetaRules = {}) {
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
