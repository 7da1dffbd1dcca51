import { and, desc, eq, sql } from 'drizzle-orm'
import { CAUTION_SHORT } from '#shared/caution'
import { applyCalibrationColumn, collectorDetector, detectorParams, detectorSignal, geometry as geometrySchema, physicsFor, staticCollectorMz, staticColumn, sweepToMz } from '#shared/engine'
import type { AcquisitionInput } from '#shared/schemas/acquisitions'
import { payloadOf } from '../store'
import { acquisitions, calibrations, geometryVersions, instruments, labs, methods, results, sequenceItems, sequences } from '../../database/schema'

/**
 * What an export says about itself (issue 20, "every output says what it is"): the result
 * version it comes from, its review state, whether the m/z were calibrated, the versions it
 * was computed with, and the caution's short form.
 */
export interface ExportAbout {
  resultVersion: number
  reviewState: string
  releasedAt: Date | null
  calibrated: boolean
  geometryVersion: number
  calibrationVersion: number | null
  method: { name: string, version: number } | null
  engineVersion: string
  constants: string
  caution: string
}

export interface Spectrum { runId: string, lab: string, instrument: string, acquiredAt: Date, mz: Float64Array, signal: Float64Array, unit: 'A' | 'cps', about: ExportAbout }

/** The profile (or the collector readings) of an acquisition, recomputed from its raw payload with the versions its result used. */
export async function spectrumOf(labId: string, id: string): Promise<Spectrum> {
  const [row] = await useDb().select({
    acq: acquisitions, geo: geometryVersions, cal: calibrations, slug: instruments.slug, lab: labs.name,
    res: { version: results.version, reviewState: results.reviewState, releasedAt: results.releasedAt, engineVersion: results.engineVersion,
      constants: sql<string | null>`${results.summary}->>'constants'`, calibrated: sql<boolean>`coalesce((${results.summary}->>'calibrated')::boolean, false)` },
  })
    .from(acquisitions)
    .innerJoin(results, and(eq(results.acquisitionId, acquisitions.id), eq(results.acquisitionCreatedAt, acquisitions.createdAt)))
    .innerJoin(geometryVersions, eq(geometryVersions.id, results.geometryVersionId))
    .leftJoin(calibrations, eq(calibrations.id, results.calibrationId))
    .innerJoin(instruments, eq(instruments.id, acquisitions.instrumentId))
    .innerJoin(labs, eq(labs.id, acquisitions.labId))
    .where(and(eq(acquisitions.id, id), eq(acquisitions.labId, labId))).orderBy(desc(results.version)).limit(1)
  if (!row) throw problem(404, 'acquisition-not-found', 'No such acquisition in your lab.')
  // A result has a method only through the sequence its acquisition was measured in.
  const [method] = await useDb().select({ name: methods.name, version: methods.version }).from(sequenceItems)
    .innerJoin(sequences, eq(sequences.id, sequenceItems.sequenceId)).innerJoin(methods, eq(methods.id, sequences.methodId))
    .where(eq(sequenceItems.acquisitionId, id)).limit(1)
  const about: ExportAbout = {
    resultVersion: row.res.version, reviewState: row.res.reviewState, releasedAt: row.res.releasedAt, calibrated: row.res.calibrated,
    geometryVersion: row.geo.version, calibrationVersion: row.cal?.version ?? null, method: method ?? null,
    engineVersion: row.res.engineVersion, constants: row.res.constants ?? 'unrecorded (engine 1)', caution: CAUTION_SHORT,
  }
  // From the object store (or the JSON column of rows from before it); 410 once retention removed it.
  const input = await payloadOf<AcquisitionInput>(row.acq)
  const geo = geometrySchema.parse(row.geo.params)
  // Each column through the detector registered for its collector (volts through the
  // resistor, counts over the dwell, dead time), with the physics the result was computed with.
  const physics = physicsFor(input.processing?.engine)
  const params = (collector: string | undefined) => detectorParams(collectorDetector(geo, collector), 'geometry.detector')
  let mz: Float64Array
  let signal: Float64Array
  let unit: 'A' | 'cps'
  if (input.mzSpectrum) {
    // m/z as the instrument's software gave it: neither geometry nor calibration applies.
    mz = Float64Array.from(input.mzSpectrum.mz)
    const s = detectorSignal(params(undefined), { unit: input.mzSpectrum.unit, values: input.mzSpectrum.values }, 'mzSpectrum')
    signal = s.values
    unit = s.unit
  }
  else if (input.sweep) {
    mz = sweepToMz(geo, { settings: input.settings, sweep: input.sweep, detectors: input.detectors }, undefined, physics).mz
    const d = input.detectors[0]!
    const s = detectorSignal(params(d.collector), d, 'detectors[0]')
    signal = s.values
    unit = s.unit
  }
  else {
    const positions = staticCollectorMz(geo, { settings: input.settings, detectors: input.detectors }, physics)
    mz = Float64Array.from(input.detectors, (d, k) => (positions.find(p => p.collector === d.collector) ?? positions[k])!.mz)
    const columns = input.detectors.map((d, k) => staticColumn(params(d.collector), d, `detectors[${k}]`))
    signal = Float64Array.from(columns, c => c.mean)
    unit = columns[0]!.unit
  }
  // The calibration the result applied (a retired one is not recorded on the result, so not joined here).
  if (row.cal && !input.mzSpectrum) applyCalibrationColumn(row.cal.fit as { center: number, halfRange: number, coefficients: number[] }, mz)
  if (mz.length > 1 && mz[1]! < mz[0]!) { mz.reverse(); signal.reverse() }
  return { runId: row.acq.externalId, lab: row.lab, instrument: row.slug, acquiredAt: row.acq.acquiredAt, mz, signal, unit, about }
}

/** The self-description of an export as (key, value) pairs, in the order files print them. */
export function aboutFields(s: Spectrum): [string, string][] {
  const a = s.about
  return [
    ['run', s.runId], ['lab', s.lab], ['instrument', s.instrument], ['acquiredAt', s.acquiredAt.toISOString()],
    ['resultVersion', String(a.resultVersion)], ['reviewState', a.reviewState], ['releasedAt', a.releasedAt?.toISOString() ?? 'not released'],
    ['calibrated', String(a.calibrated)], ['geometryVersion', String(a.geometryVersion)], ['calibrationVersion', a.calibrationVersion === null ? 'none' : String(a.calibrationVersion)],
    ['method', a.method ? `${a.method.name} v${a.method.version}` : 'none'], ['engineVersion', a.engineVersion], ['constants', a.constants], ['caution', a.caution],
  ]
}

/** A header value on one line: line breaks in names a lab typed would end the comment early. */
const oneLine = (v: string) => v.replace(/[\r\n]+/g, ' ')

/** CSV with `# key: value` comment lines first (the form Arcwise's own CSV intake reads), then m/z and signal. */
export function spectrumCsv(s: Spectrum): string {
  const lines = ['# Arcwise spectrum export', ...aboutFields(s).map(([k, v]) => `# ${k}: ${oneLine(v)}`), `mz,signal_${s.unit === 'A' ? 'A' : 'cps'}`]
  for (let i = 0; i < s.mz.length; i++) lines.push(`${s.mz[i]!.toPrecision(10)},${s.signal[i]!.toPrecision(8)}`)
  return `${lines.join('\n')}\n`
}

/**
 * JCAMP-DX 5.01 (McDonald & Wilks, Appl. Spectrosc. 42 (1988) 151): the profile resampled by
 * linear interpolation onto evenly spaced m/z, written as ##XYDATA=(X++(Y..Y)), the form
 * readers take for continuous spectra (m/z of a field sweep is not evenly spaced).
 */
export function spectrumJcamp(s: Spectrum): string {
  const n = s.mz.length
  const first = s.mz[0]!
  const last = s.mz[n - 1]!
  const delta = n > 1 ? (last - first) / (n - 1) : 0
  const y = new Float64Array(n)
  for (let i = 0, j = 0; i < n; i++) {
    const x = first + i * delta
    while (j < n - 2 && s.mz[j + 1]! < x) j++
    const x0 = s.mz[j]!
    const x1 = s.mz[Math.min(j + 1, n - 1)]!
    const t = x1 === x0 ? 0 : Math.min(1, Math.max(0, (x - x0) / (x1 - x0)))
    y[i] = s.signal[j]! + t * (s.signal[Math.min(j + 1, n - 1)]! - s.signal[j]!)
  }
  // Y as integers times YFACTOR (readers handle these best): 7 significant digits at the top.
  let top = 0
  for (let i = 0; i < n; i++) top = Math.max(top, Math.abs(y[i]!))
  const yFactor = top > 0 ? top / 1e7 : 1
  const head = [
    `##TITLE=${s.runId}`,
    '##JCAMP-DX=5.01',
    '##DATA TYPE=MASS SPECTRUM',
    '##DATA CLASS=XYDATA',
    `##ORIGIN=${s.lab} (Arcwise)`,
    `##OWNER=${s.lab}`,
    `##SPECTROMETER/DATA SYSTEM=${s.instrument}`,
    `##LONGDATE=${s.acquiredAt.toISOString()}`,
    // User-defined labels: JCAMP-DX reserves "##$" for them (McDonald & Wilks 1988, from memory).
    ...aboutFields(s).filter(([k]) => k !== 'run' && k !== 'lab' && k !== 'instrument' && k !== 'acquiredAt')
      .map(([k, v]) => `##$ARCWISE ${k.replace(/[A-Z]/g, c => ` ${c}`).toUpperCase()}=${oneLine(v)}`),
    '##XUNITS=M/Z',
    `##YUNITS=${s.unit === 'A' ? 'AMPERES' : 'COUNTS/S'}`,
    '##XFACTOR=1',
    `##YFACTOR=${yFactor.toExponential(6)}`,
    `##FIRSTX=${first}`,
    `##LASTX=${last}`,
    `##DELTAX=${delta}`,
    `##NPOINTS=${n}`,
    `##FIRSTY=${Math.round(y[0]! / yFactor) * yFactor}`,
    '##XYDATA=(X++(Y..Y))',
  ]
  const body: string[] = []
  for (let i = 0; i < n; i += 8) {
    const ys: string[] = []
    for (let k = i; k < Math.min(n, i + 8); k++) ys.push(String(Math.round(y[k]! / yFactor)))
    body.push(`${(first + i * delta).toPrecision(10)} ${ys.join(' ')}`)
  }
  return `${[...head, ...body, '##END='].join('\n')}\n`
}

/**
 * The spectrum for the console's plot as raw little-endian float64: n m/z values, then n
 * signal values. A 10^6-point profile is 16 MB this way against some 40 MB as JSON, and
 * the browser reads it straight into typed arrays.
 */
export function spectrumBinary(s: Spectrum): Buffer {
  const out = Buffer.allocUnsafe(s.mz.length * 16)
  Buffer.from(s.mz.buffer, s.mz.byteOffset, s.mz.byteLength).copy(out, 0)
  Buffer.from(s.signal.buffer, s.signal.byteOffset, s.signal.byteLength).copy(out, s.mz.byteLength)
  return out
}

const exportFormats = {
  csv: { contentType: 'text/csv; charset=utf-8', write: spectrumCsv },
  jdx: { contentType: 'chemical/x-jcamp-dx; charset=utf-8', write: spectrumJcamp },
}
export type SpectrumFormat = keyof typeof exportFormats

/** An acquisition's spectrum as a file to download: CSV or JCAMP-DX, with its type and attachment name. */
export async function spectrumExport(labId: string, id: string, format: SpectrumFormat) {
  const spectrum = await spectrumOf(labId, id)
  const { contentType, write } = exportFormats[format]
  return { contentType, disposition: attachmentName(spectrum.runId, format), body: write(spectrum) }
}

/** A file name for an export: the run id with anything a Content-Disposition header cannot carry replaced. */
export function attachmentName(runId: string, extension: string): string {
  return `attachment; filename="${runId.replace(/[^\w.-]+/g, '_').slice(0, 100) || 'acquisition'}.${extension}"`
}
