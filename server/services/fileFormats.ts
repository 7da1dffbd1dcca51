import type { H3Event } from 'h3'
import { createInterface } from 'node:readline'
import { Transform } from 'node:stream'
import { inflateSync } from 'node:zlib'
import { XMLParser } from 'fast-xml-parser'
import { convert } from 'jcampconverter'

// Acquisitions arrive as files too: CSV with a header row of units, JCAMP-DX (IUPAC) and
// mzML 1.1 (HUPO-PSI). Each parser turns a file into the same acquisition body the JSON
// route takes, which the acquisition schema then validates as usual.

export type FileKind = 'csv' | 'jcamp' | 'mzml'

export function fileKindOf(contentType: string): FileKind | 'json' | undefined {
  const type = contentType.split(';')[0]!.trim().toLowerCase()
  if (type === 'application/json' || type === '') return 'json'
  if (type === 'text/csv' || type === 'application/csv') return 'csv'
  if (type === 'chemical/x-jcamp-dx' || type === 'application/jcamp-dx' || type === 'application/x-jcamp-dx') return 'jcamp'
  if (type === 'application/mzml+xml' || type === 'application/xml' || type === 'text/xml') return 'mzml'
  return undefined
}

/** A metadata value from the query string, which wins over the file's own. */
function fromQuery(event: H3Event): Record<string, string> {
  const q = getQuery(event)
  const out: Record<string, string> = {}
  for (const k of ['instrument', 'runId', 'acquiredAt', 'sampleRef']) if (typeof q[k] === 'string') out[k] = q[k] as string
  return out
}

/** Reads the request body as a stream, refusing it with 413 once it passes `maxBytes`. */
export function limitedBody(event: H3Event, maxBytes: number) {
  let seen = 0
  const limiter = new Transform({
    transform(chunk: Buffer, _enc, done) {
      seen += chunk.length
      if (seen > maxBytes) done(problem(413, 'payload-too-large', `The upload passes ${maxBytes} bytes; at most ${maxBytes} are accepted.`))
      else done(null, chunk)
    },
  })
  event.node.req.on('error', e => limiter.destroy(e))
  return { stream: event.node.req.pipe(limiter), bytes: () => seen }
}

async function readAll(stream: NodeJS.ReadableStream): Promise<string> {
  const chunks: Buffer[] = []
  for await (const chunk of stream) chunks.push(chunk as Buffer)
  return Buffer.concat(chunks).toString('utf8').replace(/^\uFEFF/, '')
}

const UNIT_IN_HEADER = /^\s*(.+?)\s*[[(]\s*([^\])]+?)\s*[\])]\s*$/

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
export async function parseCsvUpload(event: H3Event, maxBytes: number): Promise<Record<string, unknown>> {
  const { stream } = limitedBody(event, maxBytes)
  const lines = createInterface({ input: stream, crlfDelay: Infinity })
  const meta: Record<string, string> = {}
  let header: { name: string, unit: string }[] | undefined
  let columns: Growing[] = []
  let lineNo = 0
  for await (const raw of lines) {
    lineNo++
    const line = (lineNo === 1 ? raw.replace(/^\uFEFF/, '') : raw).trim()
    if (!line) continue
    if (line.startsWith('#')) {
      const m = /^#\s*([A-Za-z][\w ]*?)\s*[:=]\s*(.*)$/.exec(line)
      if (m) meta[m[1]!.trim()] = m[2]!.trim()
      continue
    }
    const cells = line.split(/[,;\t]/).map(c => c.trim())
    if (!header) {
      header = cells.map((cell, i) => {
        const m = UNIT_IN_HEADER.exec(cell)
        if (!m) throw fieldProblem(`csv.header.${i}`, `column "${cell}" needs its unit in brackets, e.g. "field [T]"`)
        return { name: m[1]!, unit: m[2]! }
      })
      if (header.length < 2) throw fieldProblem('csv.header', 'needs a swept column and at least one detector column')
      columns = header.map(() => ({ data: new Float64Array(1024), length: 0 }))
      continue
    }
    if (cells.length !== header.length) throw fieldProblem(`csv.line.${lineNo}`, `has ${cells.length} cells, the header has ${header.length}`)
    for (let i = 0; i < cells.length; i++) {
      const v = Number(cells[i])
      if (cells[i] === '' || !Number.isFinite(v)) throw fieldProblem(`csv.line.${lineNo}`, `cell ${i + 1} ("${cells[i]}") is not a finite number`)
      push(columns[i]!, v)
    }
  }
  if (!header) throw fieldProblem('csv', 'has no header row with units')
  if (columns[0]!.length === 0) throw fieldProblem('csv', 'has a header but no data rows')
  const [swept, ...detectors] = header
  const sweepReading = /volt/i.test(swept!.name) ? 'acceleratingVoltage' : 'field'
  return withMeta(event, meta, {
    sweep: { reading: sweepReading, unit: swept!.unit, values: Array.from(columns[0]!.data.subarray(0, columns[0]!.length)) },
    detectors: detectors.map((d, i) => ({ collector: /^detector$/i.test(d.name) ? undefined : d.name, unit: d.unit, values: Array.from(columns[i + 1]!.data.subarray(0, columns[i + 1]!.length)) })),
  })
}

const SETTING_NAMES: Record<string, string> = {
  acceleratingvoltage: 'acceleratingVoltage', field: 'field', platevoltage: 'plateVoltage', filterfield: 'filterField',
}

/** "3 kV ± 0.0006" -> { value: 3, unit: 'kV', u: 0.0006 } */
function parseSetting(text: string, path: string) {
  const m = /^\s*([-+\d.eE]+)\s*([A-Za-zµ/]+)\s*(?:(?:±|\+-|\+\/-)\s*([\d.eE]+))?\s*$/.exec(text)
  if (!m || !Number.isFinite(Number(m[1]))) throw fieldProblem(path, `"${text}" is not a value with a unit, e.g. "3 kV ± 0.0006"`)
  return { value: Number(m[1]), unit: m[2]!, ...(m[3] ? { u: Number(m[3]) } : {}) }
}

/** Metadata lines (file first, query string over it) into the acquisition body's fields. */
function withMeta(event: H3Event, meta: Record<string, string>, body: Record<string, unknown>) {
  const settings: Record<string, unknown> = {}
  const processing: Record<string, unknown> = {}
  const fields: Record<string, string> = {}
  for (const [rawKey, value] of Object.entries(meta)) {
    const key = rawKey.replace(/[\s_-]/g, '').toLowerCase()
    if (SETTING_NAMES[key]) settings[SETTING_NAMES[key]] = parseSetting(value, `settings.${SETTING_NAMES[key]}`)
    else if (key === 'instrument') fields.instrument = value
    else if (key === 'runid') fields.runId = value
    else if (key === 'acquiredat' || key === 'longdate') fields.acquiredAt = value
    else if (key === 'sampleref' || key === 'sampledescription') fields.sampleRef = value
    else if (key === 'formulas') processing.formulas = value.split(/[,\s]+/).filter(Boolean)
    else if (key === 'tolerance' || key === 'toleranceppm') processing.tolerancePpm = Number.parseFloat(value)
    else if (key === 'ratio') {
      const [id, heavy, light] = value.split(/\s+/)
      processing.ratios = [...(processing.ratios as unknown[] ?? []), { id, ...(heavy ? { heavy } : {}), ...(light ? { light } : {}) }]
    }
  }
  return { ...fields, ...fromQuery(event), settings, ...body, ...(Object.keys(processing).length ? { processing } : {}) }
}

const JCAMP_X_READINGS: Record<string, { reading: 'field' | 'acceleratingVoltage', unit: string }> = {
  T: { reading: 'field', unit: 'T' }, TESLA: { reading: 'field', unit: 'T' }, MT: { reading: 'field', unit: 'mT' },
  G: { reading: 'field', unit: 'G' }, GAUSS: { reading: 'field', unit: 'G' }, KG: { reading: 'field', unit: 'kG' },
  V: { reading: 'acceleratingVoltage', unit: 'V' }, VOLTS: { reading: 'acceleratingVoltage', unit: 'V' }, KV: { reading: 'acceleratingVoltage', unit: 'kV' },
}
const JCAMP_Y_UNITS: Record<string, string> = { A: 'A', AMPERES: 'A', AMPERE: 'A', NA: 'nA', PA: 'pA', FA: 'fA', CPS: 'cps', 'COUNTS/S': 'cps' }

/**
 * JCAMP-DX (McDonald & Wilks 1988; IUPAC): the swept reading as X (a field or voltage unit),
 * the detector as Y. Settings and metadata in user labels: ##$ACCELERATING VOLTAGE=3 kV,
 * ##$INSTRUMENT=, ##$RUN ID=, ##LONGDATE=. A block cut short is refused.
 */
export async function parseJcampUpload(event: H3Event, maxBytes: number): Promise<Record<string, unknown>> {
  const text = await readAll(limitedBody(event, maxBytes).stream)
  if (!/##END=/.test(text)) throw fieldProblem('jcamp', 'is cut short: the block has no ##END=')
  const meta: Record<string, string> = {}
  for (const m of text.matchAll(/^##\$?([^=\n]+)=(.*)$/gm)) meta[m[1]!.trim()] = m[2]!.trim()
  let parsed
  try { parsed = convert(text, { keepRecordsRegExp: /.*/ }).flatten[0] }
  catch (error) { throw fieldProblem('jcamp', `cannot be read: ${(error as Error).message}`) }
  const spectrum = parsed?.spectra?.[0]
  if (!spectrum?.data?.x?.length) throw fieldProblem('jcamp', 'holds no XYDATA or PEAK TABLE')
  const xUnit = String(spectrum.xUnits ?? meta.XUNITS ?? '').toUpperCase().trim()
  const yUnit = String(spectrum.yUnits ?? meta.YUNITS ?? '').toUpperCase().trim()
  const x = JCAMP_X_READINGS[xUnit]
  if (!x) throw fieldProblem('jcamp.XUNITS', `"${xUnit}" is not a field or voltage unit; Arcwise takes the instrument's raw swept reading`)
  const y = JCAMP_Y_UNITS[yUnit]
  if (!y) throw fieldProblem('jcamp.YUNITS', `"${yUnit}" is not a detector current or count rate`)
  if (spectrum.data.x.length !== (spectrum.data.y?.length ?? 0) || spectrum.data.x.length !== Number(meta.NPOINTS ?? spectrum.data.x.length)) {
    throw fieldProblem('jcamp', `is cut short: ${spectrum.data.x.length} points where ##NPOINTS says ${meta.NPOINTS}`)
  }
  return withMeta(event, meta, {
    sweep: { reading: x.reading, unit: x.unit, values: Array.from(spectrum.data.x as ArrayLike<number>) },
    detectors: [{ unit: y, values: Array.from((spectrum.data.y ?? []) as ArrayLike<number>) }],
  })
}

// mzML 1.1 controlled-vocabulary accessions (PSI-MS CV): what each binary array holds.
const CV = { mzArray: 'MS:1000514', intensityArray: 'MS:1000515', float64: 'MS:1000523', float32: 'MS:1000521', zlib: 'MS:1000574' }

/**
 * mzML 1.1: the first spectrum's m/z and intensity arrays (base64, 32- or 64-bit floats,
 * optionally zlib). m/z here was computed by the instrument's own software, so Arcwise
 * takes it as is. The XML parser never resolves entities, external or internal.
 */
export async function parseMzmlUpload(event: H3Event, maxBytes: number): Promise<Record<string, unknown>> {
  const text = await readAll(limitedBody(event, maxBytes).stream)
  if (/<!ENTITY/i.test(text)) throw fieldProblem('mzml', 'declares entities; Arcwise does not read XML with entity declarations')
  const xml = new XMLParser({ ignoreAttributes: false, attributeNamePrefix: '', processEntities: false, isArray: name => ['cvParam', 'binaryDataArray', 'spectrum', 'userParam'].includes(name) })
  let doc
  try { doc = xml.parse(text) }
  catch (error) { throw fieldProblem('mzml', `is not well-formed XML: ${(error as Error).message}`) }
  const root = doc.indexedmzML?.mzML ?? doc.mzML
  const spectrum = root?.run?.spectrumList?.spectrum?.[0]
  if (!spectrum) throw fieldProblem('mzml', 'holds no spectrum')
  const arrays = spectrum.binaryDataArrayList?.binaryDataArray ?? []
  const decode = (a: { cvParam?: { accession: string }[], binary?: string }) => {
    const acc = new Set((a.cvParam ?? []).map(p => p.accession))
    let bytes: Buffer = Buffer.from(String(a.binary ?? '').trim(), 'base64')
    if (acc.has(CV.zlib)) bytes = inflateSync(bytes)
    const view = acc.has(CV.float32) ? new Float32Array(bytes.buffer, bytes.byteOffset, bytes.length / 4) : new Float64Array(bytes.buffer, bytes.byteOffset, bytes.length / 8)
    return { acc, values: Array.from(view) }
  }
  const decoded = arrays.map(decode)
  const mz = decoded.find((d: { acc: Set<string> }) => d.acc.has(CV.mzArray))
  const intensity = decoded.find((d: { acc: Set<string> }) => d.acc.has(CV.intensityArray))
  if (!mz || !intensity) throw fieldProblem('mzml', 'needs an m/z array (MS:1000514) and an intensity array (MS:1000515)')
  const meta: Record<string, string> = {}
  for (const p of [...(spectrum.userParam ?? []), ...(root?.run?.userParam ?? [])]) if (p.name) meta[p.name] = String(p.value ?? '')
  if (root?.run?.startTimeStamp && !meta.acquiredAt) meta.acquiredAt = root.run.startTimeStamp
  return withMeta(event, meta, { mzSpectrum: { unit: meta.intensityUnit ?? 'cps', mz: mz.values, values: intensity.values }, detectors: [] })
}
