import { EngineError } from './errors'

// Peaks of magnetic-sector profile spectra: flat baselines, sparse and well-shaped peaks.
// One pass over runs above a noise threshold finds the peaks (linear in the point count);
// each peak is then described by a weighted least-squares Gaussian fit near its apex
// (centroid, height, width with their covariance) and its area is integrated over a window
// set by the fitted width, with the tail outside the window accounted for. (ml-gsd, tried
// first, was slow on 10^6-point sweeps and reported thousands of flank maxima: DEVELOPERS.md,
// Measured.)
// Over 300 lines on purpose: the baseline, the thresholds and the peak description share one
// noise model (NoiseModel, pointVariance, the scratch buffers) and read as one chain; split,
// each half would export its internals to the other.

/** How the baseline level and the noise were obtained. */
export type BaselineSource = 'estimated' | 'regions' | 'zero'

export interface Baseline {
  /** Baseline level in the detector's SI unit. */
  level: number
  /** Standard uncertainty of the level (the mean of the baseline points: GUM 4.2.3). */
  levelU: number
  /** Noise σ of one point at the baseline. */
  noise: number
  source: BaselineSource
  /** 'poisson' when the signal is counted (detector in cps, integer counts per dwell). */
  noiseModel: 'gaussian' | 'poisson'
  /** Dwell time per point in s for counted data (from the count quantum), else null. */
  dwellS: number | null
  /** Points the level was taken from. */
  points: number
}

/** What an acquisition may say about its baseline (m/z ranges, or readings with no beam). */
export interface BaselineInput {
  regions?: { mzFrom: number, mzTo: number }[]
  /** On-peak-zero readings of this detector (beam off or deflected), in its SI unit. */
  zero?: ArrayLike<number>
}

const FWHM_PER_SIGMA = 2 * Math.sqrt(2 * Math.LN2)
// Full width at 5 % of the height of a Gaussian, in σ: two equal Gaussians this far apart
// leave a valley of about 10 % of their height, the "10 % valley" definition of resolving
// power (IUPAC Recommendations 2013, Murray et al., Pure Appl. Chem. 85 (2013) 1515; the
// equivalence with the width at 5 % height is common practice, no source).
const WIDTH5_PER_SIGMA = 2 * Math.sqrt(2 * Math.log(20))
/** Half-width of the area window in fitted σ: 4σ leaves 6·10^-5 of a Gaussian outside (the choice of 4: common practice, no source). */
const AREA_WINDOW_SIGMAS = 4
/** Points at the floor a counted peak's region may bridge (a tail of 2 counts a point holds zeros; common practice, no source). */
const COUNTING_GAP = 3
/** Half-width of the fitting window in fitted σ (common practice, no source). */
const FIT_WINDOW_SIGMAS = 2.5

/**
 * The k-th smallest value (0-based) of `a`, which is reordered: Hoare's selection (Hoare,
 * Commun. ACM 4 (1961) 321), linear on average. A typed array's sort was a large share of a
 * small spectrum's whole baseline (DEVELOPERS.md, Measured).
 */
function select(a: Float64Array, k: number): number {
  let lo = 0
  let hi = a.length - 1
  while (hi > lo) {
    const pivot = a[(lo + hi) >> 1]!
    let i = lo
    let j = hi
    while (i <= j) {
      while (a[i]! < pivot) i++
      while (a[j]! > pivot) j--
      if (i <= j) { const t = a[i]!; a[i] = a[j]!; a[j] = t; i++; j-- }
    }
    if (k <= j) hi = j
    else if (k >= i) lo = i
    else break
  }
  return a[k]!
}

/** Median of `a` (reordered). */
function median(a: Float64Array): number {
  const n = a.length
  const mid = n >> 1
  if (n % 2) return select(a, mid)
  const upper = select(a, mid)
  let lower = -Infinity
  for (let i = 0; i < mid; i++) if (a[i]! > lower) lower = a[i]!
  return (lower + upper) / 2
}

// One scratch buffer for the estimates' samples: the engine is synchronous and not
// re-entered, and a fresh array per call was a tenth of a 1,000-point spectrum's cost (GC).
let scratch = new Float64Array(1024)
function scratchOf(n: number): Float64Array {
  if (scratch.length < n) scratch = new Float64Array(Math.max(n, 2 * scratch.length))
  return scratch.subarray(0, n)
}

/** A sample of every k-th point (at least 256, at most 2^16), so estimates cost a fixed share. */
function strideOf(n: number): number {
  const target = Math.min(n, Math.max(256, Math.min(65536, Math.ceil(n / 8))))
  return Math.max(1, Math.floor(n / target))
}

/**
 * Noise σ from second differences, DER_SNR: σ = 1.482602/√6 · median|2y_i − y_{i−2} − y_{i+2}|
 * (Stoehr et al., ASP Conf. Ser. 394 (2008) 505). Smooth peaks barely move it, so it holds
 * when a peak fills most of the sweep, where the spread of the values does not.
 */
export function noiseFromDifferences(y: Float64Array): number {
  const n = y.length
  if (n < 5) return 0
  const stride = strideOf(n - 4)
  const sample = scratchOf(Math.ceil((n - 4) / stride))
  let j = 0
  for (let i = 2; i < n - 2; i += stride) sample[j++] = Math.abs(2 * y[i]! - y[i - 2]! - y[i + 2]!)
  return 1.482602 / Math.sqrt(6) * median(sample.subarray(0, j))
}

/**
 * A first level below the peaks: the lower cluster of the values. Starting from the 2 %
 * quantile plus 2.05σ (where the 2 % quantile of pure normal noise lies), the median of the
 * values within 3σ above the level is taken until it settles, so peaks that fill most of
 * the sweep do not pull the level up. The 2 % start, the 3σ limit and the 8 passes are
 * common practice, no source.
 */
function lowerClusterLevel(y: Float64Array, noise: number): number {
  const stride = strideOf(y.length)
  const m = Math.ceil(y.length / stride)
  const buffer = scratchOf(2 * m)
  const sample = buffer.subarray(0, m)
  const kept = buffer.subarray(m, 2 * m)
  for (let i = 0, j = 0; i < y.length; i += stride, j++) { sample[j] = y[i]!; kept[j] = y[i]! }
  let level = select(kept, Math.floor(0.02 * (m - 1))) + 2.054 * noise
  for (let k = 0; k < 8; k++) {
    const limit = level + 3 * noise
    let count = 0
    for (let i = 0; i < m; i++) if (sample[i]! <= limit) kept[count++] = sample[i]!
    if (count < 1) break
    const next = median(kept.subarray(0, count))
    const settled = Math.abs(next - level) <= 0.01 * noise
    level = next
    if (settled) break
  }
  return level
}

/** Median of a strided sample of the values: the first level when peaks are a minority. */
function sampleMedian(y: Float64Array): number {
  const stride = strideOf(y.length)
  const sample = scratchOf(Math.ceil(y.length / stride))
  for (let i = 0, j = 0; i < y.length; i += stride, j++) sample[j] = y[i]!
  return median(sample)
}

/**
 * The count quantum of counted data: the smallest positive value, when every value is a
 * whole multiple of it (counts / dwell time). Returns 0 when the data are not counts (a
 * dead-time-corrected or averaged rate, or a current).
 */
export function countQuantum(y: Float64Array): number {
  let q = Infinity
  for (let i = 0; i < y.length; i++) { const v = y[i]!; if (v > 0 && v < q) q = v; if (v < 0) return 0 }
  if (!Number.isFinite(q)) return 0
  for (let i = 0; i < y.length; i++) {
    const k = y[i]! / q
    if (Math.abs(k - Math.round(k)) > 1e-6 * Math.max(1, k)) return 0
  }
  return q
}

/** Upper tail of the Poisson distribution: the smallest k with P(X ≥ k | λ) ≤ p. */
function poissonThreshold(lambda: number, p: number): number {
  let term = Math.exp(-lambda)
  let cdf = term
  let k = 0
  while (1 - cdf > p && k < 1e6) { k++; term *= lambda / k; cdf += term }
  return k + 1
}

interface NoiseModel {
  poisson: boolean
  /** Dwell time in s (counted data). */
  dwell: number
  /** σ of the baseline. */
  noise: number
  level: number
}

/**
 * σ² of one point whose expected value is `expected` (above zero); at least a thousandth of
 * a count per dwell, so an empty stretch never has zero variance (common practice, no source).
 */
function pointVariance(model: NoiseModel, expected: number): number {
  return model.poisson ? Math.max(expected, model.level, 1 / model.dwell / 1e3) / model.dwell : model.noise * model.noise
}

/**
 * Runs of points above the threshold, extended out to where the signal falls to `floor` and
 * stays there for more than `gap` points (counted tails hold zeros long before they end).
 */
function regionsAbove(y: Float64Array, threshold: number, floor: number, gap = 0): [number, number][] {
  const out: [number, number][] = []
  let i = 0
  while (i < y.length) {
    if (y[i]! <= threshold) { i++; continue }
    let lo = i
    for (;;) {
      let k = 1
      while (k <= gap + 1 && lo - k >= 0 && !(y[lo - k]! > floor)) k++
      if (lo - k < 0 || k > gap + 1) break
      lo -= k
    }
    let hi = i
    for (;;) {
      let k = 1
      while (k <= gap + 1 && hi + k < y.length && !(y[hi + k]! > floor)) k++
      if (hi + k >= y.length || k > gap + 1) break
      hi += k
    }
    out.push([lo, hi])
    i = hi + 1
  }
  return out
}

/**
 * Mean and standard deviation of the points outside the peak regions, each region widened by
 * a quarter of its width on both sides (a Gaussian's wing a σ beyond where it sank into the
 * noise is under a hundredth of the noise; common practice, no source).
 */
function levelOutside(y: Float64Array, regions: [number, number][]): { mean: number, sd: number, count: number } {
  let sum = 0
  let sum2 = 0
  let count = 0
  let next = 0
  const shift = y[0]!
  for (let r = 0; r <= regions.length; r++) {
    const region = regions[r]
    const margin = region ? Math.ceil((region[1] - region[0] + 1) / 4) : 0
    const end = region ? Math.max(next, region[0] - margin) : y.length
    for (let i = next; i < end; i++) { const d = y[i]! - shift; sum += d; sum2 += d * d }
    count += end - next
    if (region) next = Math.max(next, Math.min(y.length, region[1] + margin + 1))
  }
  const mean = count ? sum / count : NaN
  return { mean: mean + shift, sd: count > 1 ? Math.sqrt(Math.max(0, (sum2 - count * mean * mean) / (count - 1))) : NaN, count }
}

export interface BaselineOptions {
  /** The detector counts (unit cps): look for the count quantum and use Poisson noise. */
  counting?: boolean
  /** The dwell time per point in s, when the acquisition states it. */
  dwellS?: number
  input?: BaselineInput
  minSnr?: number
}

/** A baseline from the mean and spread of `count` points (Poisson: the spread follows the mean). */
function baselineFrom(mean: number, sd: number, count: number, source: BaselineSource, dwell: number): Baseline {
  const poisson = dwell > 0
  const noise = poisson ? Math.sqrt(Math.max(mean, 0) / dwell) : sd
  const levelU = count > 0 ? (poisson ? Math.sqrt(Math.max(mean, 0) / dwell / count) : noise / Math.sqrt(count)) : noise
  return { level: mean, levelU, noise, source, noiseModel: poisson ? 'poisson' : 'gaussian', dwellS: poisson ? dwell : null, points: count }
}

/** The points outside the peak regions a level and noise reveal. */
function outsidePeaks(y: Float64Array, poisson: boolean, dwell: number, level: number, noise: number, minSnr: number) {
  const { threshold, floor } = thresholds({ poisson, dwell, level, noise }, y.length, minSnr)
  return levelOutside(y, regionsAbove(y, threshold, floor, poisson ? COUNTING_GAP : 0))
}

/**
 * Baseline level, its uncertainty and the noise. From explicit baseline m/z regions or
 * on-peak-zero readings when the acquisition gives them; otherwise estimated: the lower
 * cluster of the values first, then (twice) the mean of the points outside the peak regions
 * that level reveals.
 */
export function estimateBaseline(mz: Float64Array, y: Float64Array, options: BaselineOptions = {}): Baseline {
  const quantum = options.counting ? (options.dwellS ? 1 / options.dwellS : countQuantum(y)) : 0
  const poisson = quantum > 0
  const dwell = poisson ? 1 / quantum : 0
  const zero = options.input?.zero
  if (zero && zero.length) {
    let sum = 0
    for (let i = 0; i < zero.length; i++) sum += zero[i] as number
    const mean = sum / zero.length
    let ss = 0
    for (let i = 0; i < zero.length; i++) ss += ((zero[i] as number) - mean) ** 2
    // The detector's noise σ comes from the sweep's many points (a pooled estimate, GUM 4.2.4)
    // rather than from a handful of zero readings; their own spread serves a sweep too short.
    const fromSweep = noiseFromDifferences(y)
    const sd = fromSweep > 0 ? fromSweep : zero.length > 1 ? Math.sqrt(ss / (zero.length - 1)) : 0
    return baselineFrom(mean, sd, zero.length, 'zero', dwell)
  }
  const regions = options.input?.regions
  if (regions?.length) {
    let sum = 0
    let sum2 = 0
    let count = 0
    const shift = y[0]!
    for (let i = 0; i < mz.length; i++) {
      const x = mz[i]!
      if (regions.some(r => x >= r.mzFrom && x <= r.mzTo)) { const d = y[i]! - shift; sum += d; sum2 += d * d; count++ }
    }
    if (count < 2) throw new EngineError('baseline.regions', 'too-few-points', `the baseline regions hold ${count} point(s) of this sweep; at least 2 are needed`)
    const mean = sum / count
    return baselineFrom(mean + shift, Math.sqrt(Math.max(0, (sum2 - count * mean * mean) / (count - 1))), count, 'regions', dwell)
  }
  // Estimated: a first level and noise, then the points outside the peaks they reveal. The
  // median of the values serves as the first level while the points outside the peaks are
  // the majority; when they are not (a peak-centre scan), the lower cluster replaces it.
  let noise = poisson ? 0 : noiseFromDifferences(y)
  let level = poisson ? 0 : sampleMedian(y)
  const minSnr = options.minSnr ?? 10
  let outside = outsidePeaks(y, poisson, dwell, level, noise, minSnr)
  if (!poisson && outside.count < y.length / 2) {
    level = lowerClusterLevel(y, noise)
    outside = outsidePeaks(y, poisson, dwell, level, noise, minSnr)
  }
  let estimate = baselineFrom(level, noise, 0, 'estimated', dwell)
  for (let iteration = 0; iteration < 2; iteration++) {
    if (iteration > 0) outside = outsidePeaks(y, poisson, dwell, estimate.level, estimate.noise, minSnr)
    if (outside.count < 2) break
    const moved = Math.abs(outside.mean - level)
    level = outside.mean
    noise = poisson ? 0 : Math.max(outside.sd, 0)
    const previousNoise = estimate.noise
    estimate = baselineFrom(level, noise, outside.count, 'estimated', dwell)
    // A second pass only when the first moved the level or the noise by more than 5 %σ
    // (common practice, no source).
    if (moved <= 0.05 * estimate.noise && Math.abs(estimate.noise - previousNoise) <= 0.05 * estimate.noise) break
  }
  return estimate
}

/** Detection threshold and region floor for a noise model. */
function thresholds(model: NoiseModel, n: number, minSnr: number): { threshold: number, floor: number } {
  if (model.poisson) {
    // Counted data: a point is a peak candidate when its count is improbable under the
    // baseline rate, P(X ≥ k) ≤ 10^-3 / n over the sweep (a family-wise 10^-3 false alarm),
    // and above minSnr·√λ as for normal noise. λ is at least one count in 10^4 points. The
    // 10^-3 family-wise rate and the 10^-4 floor are common practice, no source.
    const lambda = Math.max(model.level * model.dwell, 1e-4)
    const k = Math.max(poissonThreshold(lambda, 1e-3 / Math.max(1, n)), lambda + minSnr * Math.sqrt(lambda))
    return { threshold: (k - 0.5) / model.dwell, floor: (lambda + Math.sqrt(lambda)) / model.dwell }
  }
  const noise = model.noise > 0 ? model.noise : Number.EPSILON * Math.max(1, Math.abs(model.level))
  return { threshold: model.level + minSnr * noise, floor: model.level + noise }
}

/** A number with its standard uncertainty; u is null when it could not be estimated. */
export interface Estimate { value: number, u: number | null }

export interface Peak {
  /** Index of the highest point. */
  apexIndex: number
  /** Centre of the fitted Gaussian (m/z); intensity-weighted mean when the fit failed. */
  centroid: number
  /** Standard uncertainty of the centroid from the fit (noise only; null: not estimated). */
  centroidU: number | null
  /** Fitted height above the baseline, in the detector's SI unit. */
  height: number
  heightU: number | null
  /** Area above the baseline (signal · m/z) over ±4 fitted σ, divided by the Gaussian share of that window. */
  area: number
  areaU: number
  /** ∂area/∂(baseline level): the area's share of the baseline's uncertainty, for correlations. */
  areaPerBaseline: number
  /** Full width at half maximum in m/z, from the fitted σ. */
  fwhm: number
  fwhmU: number | null
  /** Height over the noise σ (at the baseline; for counted data, at the apex). */
  snr: number
  /** m/Δm with Δm the FWHM. */
  resolvingPower: number
  resolvingPowerU: number | null
  /** m/Δm with Δm the full width at 5 % height (the 10 % valley definition). */
  resolvingPower10Valley: number
  resolvingPower10ValleyU: number | null
  /** The Gaussian fit converged; otherwise centroid and width are read from the points. */
  fitted: boolean
  /** True when the peak shares its run above threshold with another apex. */
  overlapping: boolean
  /** Share of the fitted Gaussian inside the area window (below 0.99: the window was cut). */
  windowFraction: number
  startIndex: number
  endIndex: number
}

export interface PeakOptions extends BaselineOptions {
  /** Minimum height over noise σ (default 10). */
  minSnr?: number
  baseline?: Baseline
}

/** Finds the peaks of a profile spectrum; `mz` must increase strictly. */
export function findPeaks(mz: Float64Array, y: Float64Array, options: PeakOptions = {}): { peaks: Peak[], baseline: Baseline } {
  const n = mz.length
  if (y.length !== n) throw new EngineError('detector.values', 'length-mismatch', `has ${y.length} points, the sweep has ${n}`)
  const baseline = options.baseline ?? estimateBaseline(mz, y, options)
  const minSnr = options.minSnr ?? 10
  const model: NoiseModel = {
    poisson: baseline.noiseModel === 'poisson', dwell: baseline.dwellS ?? 0, level: baseline.level,
    noise: baseline.noise > 0 ? baseline.noise : Number.EPSILON * Math.max(1, Math.abs(baseline.level)),
  }
  const { threshold, floor } = thresholds(model, n, minSnr)
  const regions = regionsAbove(y, threshold, floor, model.poisson ? COUNTING_GAP : 0)
  const found: { apex: number, lo: number, hi: number, overlapping: boolean }[] = []
  for (const [start, end] of regions) {
    const apexes = apexesInRegion(y, start, end, model, threshold)
    for (let k = 0; k < apexes.length; k++) {
      const apex = apexes[k]!
      const lo = k === 0 ? start : valley(y, apexes[k - 1]!, apex)
      const hi = k === apexes.length - 1 ? end : valley(y, apex, apexes[k + 1]!)
      found.push({ apex, lo, hi, overlapping: apexes.length > 1 })
    }
  }
  const peaks = found.map((f, k) => {
    // The area window may reach beyond the region, but not into a neighbour's.
    const limitLo = k === 0 ? 0 : (found[k - 1]!.overlapping && f.overlapping && found[k - 1]!.hi === f.lo ? f.lo : found[k - 1]!.hi + 1)
    const limitHi = k === found.length - 1 ? n - 1 : (found[k + 1]!.overlapping && f.overlapping && found[k + 1]!.lo === f.hi ? f.hi : found[k + 1]!.lo - 1)
    return describePeak(mz, y, f.apex, f.lo, f.hi, Math.max(0, limitLo), Math.min(n - 1, limitHi), baseline, model, f.overlapping)
  })
  return { peaks: withoutTails(peaks, mz, y, model, minSnr), baseline }
}

/**
 * Drops a run above threshold that a taller neighbour's fitted Gaussian explains: in counted
 * data a tail of a few counts a point can break into runs of its own. What is left at its
 * apex once the neighbour's shape is taken away must itself clear the threshold.
 */
function withoutTails(peaks: Peak[], mz: Float64Array, y: Float64Array, model: NoiseModel, minSnr: number): Peak[] {
  if (peaks.length < 2) return peaks
  return peaks.filter((p) => {
    for (const q of peaks) {
      if (q === p || !q.fitted || q.height <= p.height || p.overlapping) continue
      const sigma = q.fwhm / FWHM_PER_SIGMA
      const x = mz[p.apexIndex]!
      if (Math.abs(x - q.centroid) > AREA_WINDOW_SIGMAS * sigma) continue
      const explained = q.height * Math.exp(-0.5 * ((x - q.centroid) / sigma) ** 2)
      const left = y[p.apexIndex]! - model.level - explained
      if (left < minSnr * Math.sqrt(pointVariance(model, model.level + explained))) return false
    }
    return true
  })
}

function valley(y: Float64Array, a: number, b: number): number {
  let best = a
  for (let j = a; j <= b; j++) if (y[j]! < y[best]!) best = j
  return best
}

/**
 * Apexes in one peak region: local maxima above the threshold that stand out of the valley
 * to each neighbour by at least 20 % of their height and 10σ of the noise there (a partly
 * resolved doublet counts twice, a noise wiggle on a flank does not).
 */
function apexesInRegion(y: Float64Array, start: number, end: number, model: NoiseModel, threshold: number): number[] {
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
    const lowerApex = Math.min(y[last]!, y[c]!)
    const dip = lowerApex - v
    const lower = lowerApex - model.level
    const sigmaHere = Math.sqrt(pointVariance(model, lowerApex))
    if (dip >= Math.max(10 * sigmaHere, 0.2 * lower)) kept.push(c)
    else if (y[c]! > y[last]!) kept[kept.length - 1] = c // same peak: keep the higher point
  }
  return kept
}

/** Standard normal cumulative distribution, by erf of Abramowitz & Stegun 7.1.26 (|ε| < 1.5·10^-7). */
export function normalCdf(z: number): number {
  const x = Math.abs(z) / Math.SQRT2
  const t = 1 / (1 + 0.3275911 * x)
  const erf = 1 - (((((1.061405429 * t - 1.453152027) * t) + 1.421413741) * t - 0.284496736) * t + 0.254829592) * t * Math.exp(-x * x)
  return z >= 0 ? 0.5 * (1 + erf) : 0.5 * (1 - erf)
}

/** The fitted parameters and the variances of (JᵀWJ)⁻¹'s diagonal. */
interface GaussianFit { height: number, centre: number, sigma: number, heightVar: number, centreVar: number, sigmaVar: number }

/**
 * Weighted least-squares fit of H·exp(−(x−μ)²/2s²) to the points within 2.5 s of μ
 * (Gauss–Newton; weights 1/σ²_i of the noise model, Poisson variances from the model's own
 * values so the weights do not follow the noise). Started from a parabola through the
 * logarithms of the apex and its neighbours (Caruana's interpolation; Guo, IEEE Signal
 * Processing Magazine 28 (2011) 134). Covariance (JᵀWJ)⁻¹ (GUM JCGM 100:2008, with the
 * least-squares covariance of its annex H.3).
 */
function fitGaussian(mz: Float64Array, y: Float64Array, apex: number, lo: number, hi: number, level: number, model: NoiseModel, fwhmGuess: number): GaussianFit | null {
  let height = y[apex]! - level
  let centre = mz[apex]!
  let sigma = fwhmGuess / FWHM_PER_SIGMA
  if (apex > lo && apex < hi) {
    const a = y[apex - 1]! - level
    const b = y[apex]! - level
    const c = y[apex + 1]! - level
    if (a > 0 && b > 0 && c > 0) {
      const x0 = mz[apex - 1]!, x1 = mz[apex]!, x2 = mz[apex + 1]!
      const l0 = Math.log(a), l1 = Math.log(b), l2 = Math.log(c)
      // Parabola through three (x, ln y): its curvature and vertex.
      const d01 = (l1 - l0) / (x1 - x0)
      const d12 = (l2 - l1) / (x2 - x1)
      const curv = (d12 - d01) / (x2 - x0)
      if (curv < 0) {
        // ln y = const − (x − μ)²/2s²: the x² coefficient is −1/2s², the vertex is μ.
        const s2 = -1 / (2 * curv)
        const mu = 0.5 * (x0 + x1) - d01 / (2 * curv)
        if (Number.isFinite(mu) && mu > x0 && mu < x2 && s2 > 0) {
          centre = mu
          sigma = Math.sqrt(s2)
          height = b * Math.exp((x1 - mu) ** 2 / (2 * s2))
        }
      }
    }
  }
  if (!(sigma > 0) || !(height > 0)) return null
  // JᵀWJ (symmetric: six sums), JᵀWr and the inverse's entries are local numbers: arrays
  // for them, allocated per iteration, were a tenth of a 1,000-point spectrum's cost
  // (allocation and GC; DEVELOPERS.md, Measured). The arithmetic is the same, term by term.
  let converged = false
  let heightVar = 0
  let centreVar = 0
  let sigmaVar = 0
  for (let iteration = 0; iteration < 12; iteration++) {
    const half = FIT_WINDOW_SIGMAS * sigma
    let from = lowerBoundFrom(mz, centre - half, lo, hi)
    let to = lowerBoundFrom(mz, centre + half, lo, hi)
    if (to > hi) to = hi
    if (to < mz.length && mz[to]! > centre + half) to--
    // At least two points on each side of the apex, so a coarse grid still fits.
    from = Math.max(lo, Math.min(from, apex - 2))
    to = Math.min(hi, Math.max(to, apex + 2))
    if (to - from + 1 < 4) return null
    let a = 0, b = 0, c = 0, e = 0, f2 = 0, i2 = 0
    let r0 = 0, r1 = 0, r2 = 0
    const inv2s2 = 1 / (2 * sigma * sigma)
    for (let i = from; i <= to; i++) {
      const dx = mz[i]! - centre
      const g = Math.exp(-dx * dx * inv2s2)
      const f = height * g
      const w = 1 / pointVariance(model, level + f)
      const r = y[i]! - level - f
      const j0 = g
      const j1 = f * dx / (sigma * sigma)
      const j2 = f * dx * dx / (sigma * sigma * sigma)
      a += w * j0 * j0; b += w * j0 * j1; c += w * j0 * j2
      e += w * j1 * j1; f2 += w * j1 * j2; i2 += w * j2 * j2
      r0 += w * j0 * r; r1 += w * j1 * r; r2 += w * j2 * r
    }
    // (JᵀWJ)⁻¹ by cofactors: [[a b c] [b e f] [c f i]].
    const A = e * i2 - f2 * f2
    const B = c * f2 - b * i2
    const C = b * f2 - c * e
    const det = a * A + b * B + c * C
    if (!(Math.abs(det) > 0) || !Number.isFinite(det)) return null
    const D = a * i2 - c * c
    const E = b * c - a * f2
    const F = a * e - b * b
    const c00 = A / det, c01 = B / det, c02 = C / det
    const c11 = D / det, c12 = E / det, c22 = F / det
    heightVar = c00
    centreVar = c11
    sigmaVar = c22
    converged = true
    const dH = c00 * r0 + c01 * r1 + c02 * r2
    const dMu = c01 * r0 + c11 * r1 + c12 * r2
    const dS = c02 * r0 + c12 * r1 + c22 * r2
    // Damped steps keep the fit inside the peak's own region.
    const scale = Math.min(1, 0.5 * sigma / Math.max(Math.abs(dMu), Math.abs(dS), 1e-300))
    height += dH * Math.min(1, scale * 2)
    centre += dMu * scale
    sigma += dS * scale
    if (!(height > 0) || !(sigma > 0) || centre < mz[lo]! || centre > mz[hi]!) return null
    if (Math.abs(dMu) < 1e-9 * sigma && Math.abs(dS) < 1e-7 * sigma && Math.abs(dH) < 1e-7 * height) break
  }
  return converged ? { height, centre, sigma, heightVar, centreVar, sigmaVar } : null
}

function lowerBoundFrom(a: Float64Array, x: number, lo: number, hi: number): number {
  let l = lo
  let h = hi + 1
  while (l < h) { const mid = (l + h) >> 1; if (a[mid]! < x) l = mid + 1; else h = mid }
  return l
}

function describePeak(mz: Float64Array, y: Float64Array, apex: number, lo: number, hi: number, limitLo: number, limitHi: number, baseline: Baseline, model: NoiseModel, overlapping: boolean): Peak {
  const level = baseline.level
  const rawHeight = y[apex]! - level
  const half = level + rawHeight / 2
  // Half-maximum crossings, linearly interpolated: the fit's starting width and its fallback.
  let l = apex
  while (l > lo && y[l - 1]! > half) l--
  const left = l > lo ? lerp(mz[l - 1]!, mz[l]!, y[l - 1]!, y[l]!, half) : mz[lo]!
  let r = apex
  while (r < hi && y[r + 1]! > half) r++
  const right = r < hi ? lerp(mz[r]!, mz[r + 1]!, y[r]!, y[r + 1]!, half) : mz[hi]!
  const crossingFwhm = Math.max(right - left, Number.EPSILON * mz[apex]!, mz[Math.min(apex + 1, mz.length - 1)]! - mz[Math.max(apex - 1, 0)]!)

  const fit = fitGaussian(mz, y, apex, overlapping ? lo : limitLo, overlapping ? hi : limitHi, level, model, crossingFwhm)
  let centroid: number
  let centroidU: number | null
  let height: number
  let heightU: number | null
  let sigma: number
  let sigmaU: number | null
  if (fit) {
    centroid = fit.centre
    centroidU = Math.sqrt(Math.max(0, fit.centreVar))
    height = fit.height
    // The height is measured from the baseline, so the level's uncertainty adds to it.
    heightU = Math.sqrt(Math.max(0, fit.heightVar) + baseline.levelU ** 2)
    sigma = fit.sigma
    sigmaU = Math.sqrt(Math.max(0, fit.sigmaVar))
  }
  else {
    let weighted = 0
    let weight = 0
    for (let j = l; j <= r; j++) { const w = y[j]! - level; weighted += w * mz[j]!; weight += w }
    centroid = weight > 0 ? weighted / weight : mz[apex]!
    centroidU = null
    height = rawHeight
    heightU = Math.sqrt(pointVariance(model, y[apex]!) + baseline.levelU ** 2)
    sigma = crossingFwhm / FWHM_PER_SIGMA
    sigmaU = null
  }

  // Area over ±4σ of the fitted centre (cut at a neighbour or the sweep's end), trapezoids
  // with each point's weight shared by its two intervals: var = Σ w_i² σ_i² counts the
  // covariance of neighbouring trapezoids, and the level's uncertainty enters through Σ w_i.
  const from = Math.max(limitLo, Math.min(apex, lowerBoundFrom(mz, centroid - AREA_WINDOW_SIGMAS * sigma, limitLo, limitHi) - 1))
  let to = Math.min(limitHi, Math.max(apex, lowerBoundFrom(mz, centroid + AREA_WINDOW_SIGMAS * sigma, limitLo, limitHi)))
  if (to <= from) to = Math.min(mz.length - 1, from + 1)
  let sum = 0
  let variance = 0
  for (let j = from; j <= to; j++) {
    const w = 0.5 * ((j < to ? mz[j + 1]! : mz[j]!) - (j > from ? mz[j - 1]! : mz[j]!))
    const v = y[j]! - level
    sum += w * v
    const expected = fit ? height * Math.exp(-0.5 * ((mz[j]! - centroid) / sigma) ** 2) : Math.max(v, 0)
    variance += w * w * pointVariance(model, level + expected)
  }
  const span = mz[to]! - mz[from]!
  const fraction = fit ? Math.max(1e-6, normalCdf((mz[to]! - centroid) / sigma) - normalCdf((mz[from]! - centroid) / sigma)) : 1
  const area = sum / fraction
  const areaPerBaseline = -span / fraction
  const areaU = Math.sqrt(variance + (span * baseline.levelU) ** 2) / fraction

  const fwhm = FWHM_PER_SIGMA * sigma
  const width5 = WIDTH5_PER_SIGMA * sigma
  const relWidthU = sigmaU === null ? null : sigmaU / sigma
  const relCentroidU = centroidU === null ? 0 : centroidU / centroid
  const apexNoise = model.poisson ? Math.sqrt(pointVariance(model, level + height)) : model.noise
  return {
    apexIndex: apex, centroid, centroidU, height, heightU, area, areaU, areaPerBaseline,
    fwhm, fwhmU: relWidthU === null ? null : fwhm * relWidthU,
    snr: apexNoise > 0 ? height / apexNoise : Number.MAX_VALUE,
    resolvingPower: centroid / fwhm,
    resolvingPowerU: relWidthU === null ? null : centroid / fwhm * Math.hypot(relWidthU, relCentroidU),
    resolvingPower10Valley: centroid / width5,
    resolvingPower10ValleyU: relWidthU === null ? null : centroid / width5 * Math.hypot(relWidthU, relCentroidU),
    fitted: !!fit, overlapping, windowFraction: fraction, startIndex: from, endIndex: to,
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
