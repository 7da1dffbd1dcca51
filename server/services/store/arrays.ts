// The parsed acquisition as one binary object (`arrays/<sha256>`): every array of numbers in
// the validated body as float64, little-endian, after a small JSON header that holds the rest
// of the body (units, settings, processing options) with each array replaced by its index.
// Readers (spectra, exports, reprocessing, sequences) rebuild the body from it without
// parsing tens of megabytes of JSON. Pure: no I/O, unit-tested in tests/unit/store-arrays.test.ts.
//
// Layout: "ARCWARR1" (8 bytes) · header length H (uint32 LE) · header (UTF-8 JSON, H bytes) ·
// zero padding to a multiple of 8 · the arrays' float64 values, one after another.

const MAGIC = Buffer.from('ARCWARR1', 'ascii')

interface Header { body: unknown, lengths: number[] }

const isNumberArray = (v: unknown): v is number[] => Array.isArray(v) && v.length > 0 && v.every(x => typeof x === 'number')

/** The body as one buffer: the same body always gives the same bytes, so the same hash. */
export function encodeArrays(body: object): Buffer {
  const arrays: number[][] = []
  const skeleton = JSON.parse(JSON.stringify(body, (_key, value: unknown) => {
    if (!isNumberArray(value)) return value
    arrays.push(value)
    return { $f64: arrays.length - 1 }
  })) as unknown
  const header = Buffer.from(JSON.stringify({ body: skeleton, lengths: arrays.map(a => a.length) } satisfies Header), 'utf8')
  const start = Math.ceil((12 + header.length) / 8) * 8
  const total = start + arrays.reduce((n, a) => n + a.length * 8, 0)
  const out = Buffer.alloc(total)
  MAGIC.copy(out, 0)
  out.writeUInt32LE(header.length, 8)
  header.copy(out, 12)
  let at = start
  for (const a of arrays) {
    for (let i = 0; i < a.length; i++, at += 8) out.writeDoubleLE(a[i]!, at)
  }
  return out
}

/** The body `encodeArrays` stored, with its arrays as plain number arrays again. */
export function decodeArrays<T = Record<string, unknown>>(data: Buffer): T {
  if (data.length < 12 || !data.subarray(0, 8).equals(MAGIC)) throw new Error('not an Arcwise arrays object')
  const headerLength = data.readUInt32LE(8)
  const header = JSON.parse(data.subarray(12, 12 + headerLength).toString('utf8')) as Header
  const offsets: number[] = []
  let at = Math.ceil((12 + headerLength) / 8) * 8
  for (const n of header.lengths) { offsets.push(at); at += n * 8 }
  if (at !== data.length) throw new Error(`arrays object is ${data.length} bytes, its header describes ${at}`)
  const read = (index: number) => {
    const n = header.lengths[index]!
    const out = new Array<number>(n)
    for (let i = 0, p = offsets[index]!; i < n; i++, p += 8) out[i] = data.readDoubleLE(p)
    return out
  }
  const walk = (v: unknown): unknown => {
    if (Array.isArray(v)) return v.map(walk)
    if (v && typeof v === 'object') {
      if (Object.keys(v).length === 1 && typeof (v as { $f64?: unknown }).$f64 === 'number') return read((v as { $f64: number }).$f64)
      const out: Record<string, unknown> = {}
      // defineProperty, not assignment: a key named __proto__ stays a key.
      for (const [k, x] of Object.entries(v)) Object.defineProperty(out, k, { value: walk(x), enumerable: true, writable: true, configurable: true })
      return out
    }
    return v
  }
  return walk(header.body) as T
}
