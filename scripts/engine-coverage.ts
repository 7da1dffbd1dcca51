// `npx tsx scripts/engine-coverage.ts [commit]`: bias and coverage of this checkout's engine
// beside the engine of another commit (default 91f7628, the last commit of engine 1.0.0) on
// the same simulated data: the data come from this checkout's forward models (simulate.ts,
// simulateStatic.ts, a Poisson counter), the other engine only reads them. 200 seeds a case
// (BENCH_SEEDS changes it). The other commit's shared/engine is unpacked into a temporary
// folder beside a link to node_modules. Cases: tests/support/peak-statistics.ts.
import { execFileSync } from 'node:child_process'
import { mkdtempSync, rmSync, symlinkSync } from 'node:fs'
import { tmpdir } from 'node:os'
import { join } from 'node:path'
import { pathToFileURL } from 'node:url'
import * as current from '../shared/engine'
import { areaCoverage, argonRatioCoverage, countingCoverage, staticRatioCoverage, type Coverage } from '../tests/support/peak-statistics'
import { root } from './lib/paths'

const commit = process.argv[2] ?? '91f7628'
const seeds = Number(process.env.BENCH_SEEDS ?? 200)

async function engineOf(rev: string): Promise<{ engine: typeof current, cleanup: () => void }> {
  const dir = mkdtempSync(join(tmpdir(), 'arcwise-engine-'))
  const tar = join(dir, 'engine.tar')
  execFileSync('git', ['archive', '--output', tar, rev, 'shared/engine'], { cwd: root })
  execFileSync('tar', ['-xf', tar, '-C', dir])
  symlinkSync(join(root, 'node_modules'), join(dir, 'node_modules'))
  const engine = await import(pathToFileURL(join(dir, 'shared/engine/index.ts')).href) as typeof current
  return { engine, cleanup: () => rmSync(dir, { recursive: true, force: true }) }
}

/** The engine's readers with this checkout's simulators, so both engines read the same data. */
const reading = (e: typeof current) => ({ processReadings: e.processReadings, processMzSpectrum: e.processMzSpectrum, simulateFieldSweep: current.simulateFieldSweep, geometry: current.geometry, isotope: current.isotope })

function cases(e: typeof current): [string, () => Coverage][] {
  const r = reading(e)
  return [
    ...[10, 20, 50, 100].map(snr => [`field-sweep 40Ar area, S/N ${snr}`, () => areaCoverage(r, snr, seeds)] as [string, () => Coverage]),
    ...[10, 20, 50, 100].map(snr => [`field-sweep air 40Ar/36Ar, 36Ar S/N ${snr}`, () => argonRatioCoverage(r, snr, seeds)] as [string, () => Coverage]),
    ['static 40Ar/36Ar, 2 % common fluctuation', () => staticRatioCoverage(r, current.simulateStatic, current.fieldForMz, seeds)],
    ['counting 36Ar area (dark 0.5 cps, dwell 0.1 s)', () => countingCoverage(r, seeds, { peakCps: 2000, darkCps: 0.5, dwellS: 0.1 })],
  ]
}

const fmt = (c: Coverage | { error: string }) => ('error' in c
  ? `refused: ${c.error}`
  : `${c.found}/${c.trials}, ${(c.relBias * 100).toPrecision(2)} %, ${(c.meanU / c.meanBias * c.relBias * 100).toPrecision(2)} %, ${c.meanU > 0 && Math.abs(c.meanBias / c.meanU) < 1e4 ? (c.meanBias / c.meanU).toFixed(2) : 'u ≈ 0'}, ${(c.within2u * 100).toFixed(1)} %${'meanPeaks' in c ? `, ${c.meanPeaks} peaks a sweep` : ''}`)

function run(e: typeof current) {
  return cases(e).map(([name, f]) => {
    try { return [name, f()] as const }
    catch (error) { return [name, { error: (error as Error).message }] as const }
  })
}

const other = await engineOf(commit)
try {
  const before = run(other.engine)
  const after = run(current)
  console.log(`| case (${seeds} seeds) | engine ${other.engine.ENGINE_VERSION} (${commit}): found, relative bias, mean u relative, mean bias / mean u, within 2u | engine ${current.ENGINE_VERSION}: same |`)
  console.log('| --- | --- | --- |')
  before.forEach(([name, c], i) => console.log(`| ${name} | ${fmt(c)} | ${fmt(after[i]![1])} |`))
}
finally { other.cleanup() }
