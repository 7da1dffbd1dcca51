import { detectorParams } from '../detectors'
import { EngineError } from '../errors'
import type { Geometry } from '../geometry'
import { collectorDetector } from '../pipeline'
import { staticColumn, type StaticColumnInput } from '../static'
import type { SequenceItem } from './types'

// A static (multi-collector) acquisition's cycles as the ratio engine's time-zero step needs them
// (SequenceItem.cycles): for each cycle, the seconds since the gas was let in and each beam's
// signal, keyed by nominal m/z. Each collector's column goes through the same detector conversion
// and baseline subtraction as the engine's static reduction (static.ts: resistor, gain, dead time;
// on-peak-zero per cycle or a block mean), so the beams here are the signals the engine measured,
// cycle by cycle, not yet averaged. The collector → m/z mapping comes from the engine result's
// static peaks (one peak per collector, at the collector's calibrated m/z).
//
// Ion counters give rates (s⁻¹); they are turned into the current of singly charged ions, I = e·rate
// (e = 1.602176634e-19 C, exact in the 2019 SI; CODATA 2022), so that a ratio of a counter and a
// Faraday cup is a ratio of like quantities. Their cross-calibration, if any, is the registered gain.

const ELEMENTARY_CHARGE_C = 1.602176634e-19

/** Collector id → nominal m/z ("40") from the static peaks of an engine result; refuses two collectors on one m/z. */
export function nominalMzByCollector(peaks: readonly { collector: string, centroid: number }[]): Record<string, string> {
  const out: Record<string, string> = {}
  const taken = new Map<string, string>()
  peaks.forEach((p, i) => {
    if (!(p.centroid > 0) || !Number.isFinite(p.centroid)) throw new EngineError(`peaks[${i}].centroid`, 'not-positive', 'a collector\'s m/z must be a positive number')
    const nominal = String(Math.round(p.centroid))
    const other = taken.get(nominal)
    if (other !== undefined && other !== p.collector) {
      throw new EngineError(`peaks[${i}].collector`, 'duplicate-mz', `collectors "${other}" and "${p.collector}" both sit at m/z ${nominal}: the cycles cannot tell their beams apart`)
    }
    taken.set(nominal, p.collector)
    out[p.collector] = nominal
  })
  return out
}

export interface StaticCycleInput {
  geometry: Geometry
  /** The acquisition's detector columns, one value per cycle, as posted. */
  detectors: readonly (StaticColumnInput & { collector?: string })[]
  /** Seconds since the inlet, one per cycle (the acquisition's `cycleSeconds`). */
  cycleSeconds: readonly number[]
  /** Collector id → nominal m/z, e.g. from nominalMzByCollector(result.peaks). */
  collectorMz: Readonly<Record<string, string>>
}

/** Builds SequenceItem.cycles from static readings; throws EngineError naming the field at fault. */
export function cyclesFromStaticReadings(input: StaticCycleInput): NonNullable<SequenceItem['cycles']> {
  const { geometry, detectors, cycleSeconds, collectorMz } = input
  if (detectors.length === 0) throw new EngineError('detectors', 'missing', 'at least one detector column is required')
  if (cycleSeconds.length < 2) throw new EngineError('cycleSeconds', 'too-short', 'needs one time per cycle, at least two cycles')
  cycleSeconds.forEach((t, i) => {
    if (!Number.isFinite(t) || t < 0) throw new EngineError(`cycleSeconds[${i}]`, 'not-finite', 'must be a finite, non-negative number of seconds since the inlet')
    if (i > 0 && !(t > cycleSeconds[i - 1]!)) throw new EngineError(`cycleSeconds[${i}]`, 'not-increasing', 'must be later than the previous cycle')
  })
  const seen = new Set<string>()
  const columns = detectors.map((d, k) => {
    const field = `detectors[${k}]`
    // An unnamed column is the geometry's k-th collector, as the engine's static reduction reads it.
    const collector = d.collector ?? (geometry.kind === 'multi-collector' ? geometry.collectors[k]?.id : 'main')
    const mz = collector !== undefined && Object.hasOwn(collectorMz, collector) ? collectorMz[collector] : undefined
    if (collector === undefined || mz === undefined) throw new EngineError(`${field}.collector`, 'unknown-collector', `no m/z is known for collector "${collector ?? k}"`)
    if (seen.has(mz)) throw new EngineError(`${field}.collector`, 'duplicate-mz', `a second column at m/z ${mz}`)
    seen.add(mz)
    if (d.values.length !== cycleSeconds.length) {
      throw new EngineError('cycleSeconds', 'length-mismatch', `has ${cycleSeconds.length} times, ${field} has ${d.values.length} cycles`)
    }
    const p = detectorParams(collectorDetector(geometry, collector === 'main' ? undefined : collector), 'geometry.detector')
    const col = staticColumn(p, d, field)
    const toAmperes = col.unit === 'cps' ? ELEMENTARY_CHARGE_C : 1
    return { mz, signal: col.signal, toAmperes }
  })
  return cycleSeconds.map((t, i) => ({ t, beams: Object.fromEntries(columns.map(c => [c.mz, c.signal[i]! * c.toAmperes])) }))
}
