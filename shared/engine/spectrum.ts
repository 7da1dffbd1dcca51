import { EngineError } from './errors'

// Peak finding for magnetic-sector profile spectra: flat baselines, sparse and well-shaped
// peaks. A single pass over runs above a noise threshold, with half-maximum crossings found
// by linear interpolation, is linear in the point count and needs no fitting. (ml-gsd,
// tried first, took about 1 s on a 10^6-point sweep and reported thousands of flank maxima
// without a noise model.)

export interface Baseline { level: number, noise: number }

const MAD_TO_SIGMA = 1.4826 // for normal noise, σ = 1.4826 · MAD (common practice, no source)

function median(sorted: Float64Array): number {
  const n = sorted.length
  const mid = n >> 1
  return n % 2 ? sorted[mid]! : (sorted[mid - 1]! + sorted[mid]!) / 2
}

/**
 * Baseline level and noise σ by iterated 3σ clipping around the median, on every eighth
 * point (at least 256, at most 2^16), so the cost stays a small, fixed share per point.
 * The sample is sorted once: clipping keeps it sorted, and the median absolute deviation
 * of a sorted sample is found by walking out from the median (bench:engine found the
 * repeated sorts to be most of the cost of a 1,000-point spectrum).
 */
export function estimateBaseline(y: Float64Array): Baseline {
  const target = Math.min(y.length, Math.max(256, Math.min(65536, Math.ceil(y.length / 8))))
  const stride = Math.max(1, Math.floor(y.length / target))
  let sample = new Float64Array(Math.ceil(y.length / stride))
  for (let i = 0, j = 0; i < y.length; i += stride, j++) sample[j] = y[i]!
  sample.sort()
  let level = 0
  let noise = 0
  for (let iteration = 0; iteration < 5; iteration++) {
    level = median(sample)
    noise = MAD_TO_SIGMA * medianAbsoluteDeviation(sample, level)
    const limit = level + 3 * Math.max(noise, Number.EPSILON * Math.abs(level))
    const kept = upperBound(sample, limit)
    if (kept === sample.length || kept < 16) break
    sample = sample.subarray(0, kept)
  }
  return { level, noise }
}

/** The number of values of a sorted array that are at most `limit`. */
function upperBound(sorted: Float64Array, limit: number): number {
  let lo = 0
  let hi = sorted.length
  while (lo < hi) {
    const mid = (lo + hi) >> 1
    if (sorted[mid]! <= limit) lo = mid + 1
    else hi = mid
  }
  return lo
}

/**
 * The median of |x − level| over a sorted sample: the deviations form two ascending runs
 * walking out from `level`, merged up to the middle.
 */
function medianAbsoluteDeviation(sorted: Float64Array, level: number): number {
  const n = sorted.length
  let hi = upperBound(sorted, level)
  let lo = hi - 1
  const k = n >> 1
  let previous = 0
  let current = 0
  for (let c = 0; c <= k; c++) {
    const below = lo >= 0 ? level - sorted[lo]! : Infinity
    const above = hi < n ? sorted[hi]! - level : Infinity
    previous = current
    if (below <= above) { current = below; lo-- }
    else { current = above; hi++ }
  }
  return n % 2 ? current : (previous + current) / 2
}

export interface Peak {
  /** Index of the highest point. */
  apexIndex: number
  /** Intensity-weighted mean m/z of the points above half maximum. */
  centroid: number
  /** Height above the baseline, in the detector's SI unit. */
  height: number
  /** Area above the baseline (signal · m/z), trapezoidal, over the whole peak. */
  area: number
  /** Standard uncertainty of the area from the baseline noise. */
  areaU: number
  /** Full width at half maximum in m/z, from interpolated crossings. */
  fwhm: number
  /** Height over the baseline noise σ. */
  snr: number
  /** m/Δm with Δm the FWHM. */
  resolvingPower: number
  /** True when the peak shares its run above threshold with another apex. */
  overlapping: boolean
  startIndex: number
  endIndex: number
}

export interface PeakOptions {
  /** Minimum height over noise σ (default 10). */
  minSnr?: number
  baseline?: Baseline
}

/** Finds the peaks of a profile spectrum; `mz` must increase strictly. */
export function findPeaks(mz: Float64Array, y: Float64Array, options: PeakOptions = {}): { peaks: Peak[], baseline: Baseline } {
  const n = mz.length
  if (y.length !== n) throw new EngineError('detector.values', 'length-mismatch', `has ${y.length} points, the sweep has ${n}`)
  const baseline = options.baseline ?? estimateBaseline(y)
  const noise = baseline.noise > 0 ? baseline.noise : Number.EPSILON * Math.max(1, Math.abs(baseline.level))
  const minSnr = options.minSnr ?? 10
  const threshold = baseline.level + minSnr * noise
  // Peaks extend outwards until the signal is back within 1σ of the baseline.
  const floor = baseline.level + noise
  const peaks: Peak[] = []
  let i = 0
  while (i < n) {
    if (y[i]! <= threshold) { i++; continue }
    // The peak region runs out to where the signal is back within 1σ of the baseline, so
    // noise crossing the threshold on a flank stays part of the same peak.
    const regionStart = extendDown(y, i, floor, -1)
    const regionEnd = extendDown(y, i, floor, 1)
    const apexes = apexesInRegion(y, regionStart, regionEnd, noise, baseline.level, threshold)
    for (let k = 0; k < apexes.length; k++) {
      const apex = apexes[k]!
      const lo = k === 0 ? regionStart : valley(y, apexes[k - 1]!, apex)
      const hi = k === apexes.length - 1 ? regionEnd : valley(y, apex, apexes[k + 1]!)
      peaks.push(describePeak(mz, y, apex, lo, hi, baseline.level, noise, apexes.length > 1))
    }
    i = regionEnd + 1
  }
  return { peaks, baseline }
}

function extendDown(y: Float64Array, from: number, floor: number, step: 1 | -1): number {
  let j = from
  while (j + step >= 0 && j + step < y.length && y[j + step]! > floor) j += step
  return j
}

function valley(y: Float64Array, a: number, b: number): number {
  let best = a
  for (let j = a; j <= b; j++) if (y[j]! < y[best]!) best = j
  return best
}

/**
 * Apexes in one peak region: local maxima above the threshold that stand out of the valley
 * to each neighbour by at least 20 % of their height and 10σ (a partly resolved doublet
 * counts twice, a noise wiggle on a flank does not).
 */
function apexesInRegion(y: Float64Array, start: number, end: number, noise: number, level: number, threshold: number): number[] {
  const candidates: number[] = []
  let highest = start
  for (let j = start; j <= end; j++) {
    if (y[j]! > y[highest]!) highest = j
    if (y[j]! <= threshold) continue
    const left = j > start ? y[j - 1]! : -Infinity
    const right = j < end ? y[j + 1]! : -Infinity
    if (y[j]! >= left && y[j]! > right) candidates.push(j)
  }
  if (candidates.length <= 1) return candidates.length ? candidates : [highest]
  const kept: number[] = []
  for (const c of candidates) {
    const last = kept[kept.length - 1]
    if (last === undefined) { kept.push(c); continue }
    const v = y[valley(y, last, c)]!
    const dip = Math.min(y[last]!, y[c]!) - v
    const lower = Math.min(y[last]!, y[c]!) - level
    if (dip >= Math.max(10 * noise, 0.2 * lower)) kept.push(c)
    else if (y[c]! > y[last]!) kept[kept.length - 1] = c // same peak: keep the higher point
  }
  return kept
}

function describePeak(mz: Float64Array, y: Float64Array, apex: number, lo: number, hi: number, level: number, noise: number, overlapping: boolean): Peak {
  const height = y[apex]! - level
  const half = level + height / 2
  // Half-maximum crossings, linearly interpolated between the points that straddle them.
  let l = apex
  while (l > lo && y[l - 1]! > half) l--
  const left = l > lo ? lerp(mz[l - 1]!, mz[l]!, y[l - 1]!, y[l]!, half) : mz[lo]!
  let r = apex
  while (r < hi && y[r + 1]! > half) r++
  const right = r < hi ? lerp(mz[r]!, mz[r + 1]!, y[r]!, y[r + 1]!, half) : mz[hi]!
  let weighted = 0
  let weight = 0
  for (let j = l; j <= r; j++) { const w = y[j]! - level; weighted += w * mz[j]!; weight += w }
  let area = 0
  let areaVar = 0
  for (let j = lo; j < hi; j++) {
    const dx = mz[j + 1]! - mz[j]!
    area += 0.5 * (y[j]! + y[j + 1]! - 2 * level) * dx
    areaVar += (0.5 * dx * noise) ** 2 * 2
  }
  const centroid = weight > 0 ? weighted / weight : mz[apex]!
  const fwhm = Math.max(right - left, Number.EPSILON * centroid)
  return {
    apexIndex: apex, centroid, height, area, areaU: Math.sqrt(areaVar), fwhm,
    snr: noise > 0 ? height / noise : Number.MAX_VALUE,
    resolvingPower: centroid / fwhm, overlapping, startIndex: lo, endIndex: hi,
  }
}

function lerp(x0: number, x1: number, y0: number, y1: number, target: number): number {
  return y1 === y0 ? (x0 + x1) / 2 : x0 + (target - y0) * (x1 - x0) / (y1 - y0)
}

/** Checks that a sweep's m/z rises (or falls) strictly; returns +1 or -1. */
export function sweepDirection(mz: Float64Array, field = 'sweep.values'): 1 | -1 {
  if (mz.length < 2) throw new EngineError(field, 'too-short', 'a sweep needs at least 2 points')
  const dir = mz[1]! > mz[0]! ? 1 : -1
  for (let i = 1; i < mz.length; i++) {
    const d = mz[i]! - mz[i - 1]!
    if (d === 0 || Math.sign(d) !== dir) {
      throw new EngineError(`${field}[${i}]`, 'not-monotonic', 'the sweep must go one way only (it turns back or repeats a point here)')
    }
  }
  return dir
}
