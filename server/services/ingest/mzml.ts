import type { Readable } from 'node:stream'
import { inflateSync } from 'node:zlib'
import { XMLParser } from 'fast-xml-parser'
import { MAX_POINTS } from '#shared/schemas/acquisitions'
import { readAll, withMeta, type MetaEntry, type QueryMeta } from './fileFormats'

// mzML 1.1 (HUPO-PSI) uploads: the first spectrum's binary arrays to an acquisition body.

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
