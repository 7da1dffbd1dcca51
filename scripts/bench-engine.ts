// `npm run bench:engine`: the engine's speed on this machine, printed as one JSON object.
//  - m/z conversion of a 10^6-point field sweep beside a bare Float64Array loop doing only
//    the same formula (the exact relativistic relation with CODATA 2022, as the engine; goal:
//    at most 1.5 times its time), and beside the non-relativistic bare loop the goal was first
//    measured against (printed, labelled, not the goal's reference);
//  - the whole pipeline (convert, baseline, peaks, assignment) at 10^3..10^6 points, in ms
//    and points per second (goal: cost per point within a factor 2 over that range).
import { cpus } from 'node:os'
import { setFlagsFromString } from 'node:v8'
import { runInNewContext } from 'node:vm'
import { CODATA_2022, ENGINE_VERSION, formulaSpecies, kgPerCToUPerE, geometry, isotope, processReadings, simulateFieldSweep, sweepToMz } from '../shared/engine'

const geo = geometry.parse({ kind: 'potential-sector', analyzerRadius: { value: 0.27, unit: 'm', u: 0.0001 } })
const species = [
  { species: formulaSpecies('N2'), currentA: 2e-10 },
  { species: formulaSpecies('O2'), currentA: 5e-11 },
  { species: isotope('40Ar'), currentA: 3e-12 },
  { species: formulaSpecies('CO2'), currentA: 3e-9 },
  { species: formulaSpecies('[13C]O2'), currentA: 3.3e-11 },
]
const simulate = (points: number) => simulateFieldSweep({ geometry: geo, acceleratingVoltageV: 3000, mzFrom: 26, mzTo: 48, points, resolvingPower: 1200, species, baselineA: 1e-14, noiseA: 2e-15, seed: 11 })

// For the conversion, a full garbage collection before each timed sample (untimed). Without
// it, whether a sample's 8 MB output array reuses freed memory or takes fresh pages from the kernel (about
// 25 ms of page faults here) depended on when V8 last collected: the bare loop measured
// 2.8 ms in one process and 28 ms in another (`npm run bench`, which loads more modules).
setFlagsFromString('--expose-gc')
const collectGarbage = runInNewContext('gc') as () => void

/** Median wall time of `fn` in ms over `runs` runs after `warmup` runs (each after a full GC if `gc`). */
function time(fn: () => void, runs: number, warmup = 3, gc = false): number {
  for (let i = 0; i < warmup; i++) fn()
  const samples: number[] = []
  for (let i = 0; i < runs; i++) {
    if (gc) collectGarbage()
    const t0 = process.hrtime.bigint()
    fn()
    samples.push(Number(process.hrtime.bigint() - t0) / 1e6)
  }
  samples.sort((a, b) => a - b)
  return samples[samples.length >> 1]!
}

export function benchEngine() {
  const big = simulate(1_000_000)
  const field = big.sweep!.values as Float64Array
  const U = 3000
  const r = 0.27
  let sink = 0
  // The engine's physics (geometry.ts): m/z = ((rB)²/(2U) − U/(2c²)) · e/m_u, CODATA 2022.
  const K = kgPerCToUPerE(CODATA_2022)
  const cSquared = CODATA_2022.speedOfLightMps ** 2
  /** The same formula in the simplest loop, into a new typed array as the engine's is. */
  const bareRelativistic = () => {
    const c = r * r / (2 * U) * K
    const k = U / (2 * cSquared) * K
    const out = new Float64Array(field.length)
    for (let i = 0; i < field.length; i++) { const b = field[i]!; out[i] = c * b * b - k }
    return out
  }
  /** Engine 1's formula, m/z = (rB)²/(2U) · e/m_u: the loop the goal was first measured against. */
  const bareNonRelativistic = () => {
    const c = r * r / (2 * U) * K
    const out = new Float64Array(field.length)
    for (let i = 0; i < field.length; i++) { const b = field[i]!; out[i] = c * b * b }
    return out
  }
  // The bare loop must compute what the engine computes, bit for bit.
  const a = bareRelativistic()
  const e = sweepToMz(geo, big).mz
  const identical = a.length === e.length && a.every((x, i) => Object.is(x, e[i]))
  const bare = time(() => { sink += bareRelativistic()[field.length - 1]! }, 21, 3, true)
  const bareOld = time(() => { sink += bareNonRelativistic()[field.length - 1]! }, 21, 3, true)
  const engine = time(() => { sink += sweepToMz(geo, big).mz[0]! }, 21, 3, true)

  const sizes = [1_000, 10_000, 100_000, 1_000_000]
  const pipeline = sizes.map((points) => {
    const raw = simulate(points)
    // Each timed sample processes about 10^6 points (a thousand 10^3-point calls, or one
    // 10^6-point call), so timer resolution and a stray GC weigh alike on every size.
    const calls = Math.max(1, Math.round(1_000_000 / points))
    const sampleMs = time(() => {
      for (let c = 0; c < calls; c++) sink += processReadings(geo, raw, { formulas: ['N2', 'O2', 'CO2', '[13C]O2', 'CO'] }).peaks.length
    }, points >= 1_000_000 ? 7 : 15, 3)
    const ms = sampleMs / calls
    return { points, ms: round(ms, 3), pointsPerSecond: Math.round(points / ms * 1000), nsPerPoint: round(ms * 1e6 / points, 1) }
  })
  const perPoint = pipeline.map(p => p.nsPerPoint)
  if (sink === 42) console.log('') // keeps the work from being optimised away
  return {
    conversion: {
      points: 1_000_000, bareLoopMs: round(bare, 3), engineMs: round(engine, 3), ratio: round(engine / bare, 2), goal: '<= 1.5',
      bareLoop: 'relativistic, CODATA 2022 (the engine\'s formula)', identicalToEngine: identical,
      nonRelativisticBareLoop: { ms: round(bareOld, 3), ratio: round(engine / bareOld, 2), note: 'engine 1\'s formula, (rB)²/(2U)·e/m_u: not the goal\'s reference' },
    },
    pipeline,
    costPerPointSpread: { ratio: round(Math.max(...perPoint) / Math.min(...perPoint), 2), goal: '<= 2' },
  }
}

const round = (x: number, digits: number) => Number(x.toFixed(digits))

if (import.meta.url === `file://${process.argv[1]}`) {
  console.log(JSON.stringify({ benchmark: 'engine', engineVersion: ENGINE_VERSION, node: process.version, cores: cpus().length, ...benchEngine() }, null, 2))
}
