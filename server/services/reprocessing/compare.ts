import type { EngineResult } from '../../../shared/engine'

// What a partner would see of a result, and how two versions differ. Reprocessing writes a
// new version only when one of these changed: the peaks' m/z and areas (with their
// uncertainties and assignments), the ratios and δ (with theirs), and the QC flags.

type Summary = Pick<EngineResult, 'peaks' | 'ratios' | 'qc' | 'calibrated'>

/**
 * Two stored numbers are the same when they agree to 12 significant digits: a result read
 * back from jsonb holds the digits JSON.stringify wrote, so an unchanged computation agrees
 * exactly, and anything the engine changed moves far more than this (common practice, no source).
 */
const REL_EQUAL = 1e-12

function same(a: unknown, b: unknown): boolean {
  if (typeof a === 'number' && typeof b === 'number') return a === b || Math.abs(a - b) <= REL_EQUAL * Math.max(Math.abs(a), Math.abs(b))
  return a === b || (a == null && b == null)
}

/** The figures of a result a partner reads, flattened for comparison and for the diff view. */
export function partnerFigures(summary: Summary) {
  return {
    peaks: summary.peaks.map(p => ({
      mz: p.centroid, mzU: p.centroidU, area: p.area, areaU: p.areaU,
      species: p.assignment?.species ?? null, charge: p.assignment?.z ?? null,
    })),
    ratios: summary.ratios.map(r => ({ id: r.id, deltaName: r.deltaName, ratio: r.ratio, ratioU: r.ratioU, deltaPermil: r.deltaPermil, deltaU: r.deltaU })),
    flags: summary.qc.map(q => q.code).sort(),
    calibrated: summary.calibrated,
  }
}
type Figures = ReturnType<typeof partnerFigures>

function sameRecord(a: Record<string, unknown>, b: Record<string, unknown>) {
  return Object.keys(a).every(k => same(a[k], b[k]))
}

/** Whether anything a partner would see differs between two results. */
export function figuresChanged(before: Summary, after: Summary): boolean {
  const a = partnerFigures(before)
  const b = partnerFigures(after)
  if (a.calibrated !== b.calibrated) return true
  if (a.peaks.length !== b.peaks.length || a.ratios.length !== b.ratios.length || a.flags.join() !== b.flags.join()) return true
  return a.peaks.some((p, i) => !sameRecord(p, b.peaks[i]!)) || a.ratios.some((r, i) => !sameRecord(r, b.ratios[i]!))
}

// Peaks of two versions are paired by nearest m/z: a new calibration moves a centroid by ppm,
// far less than the distance between two peaks (common practice, no source).
const PAIR_WITHIN_MZ = 0.5

/**
 * Two versions side by side: peaks paired by m/z (a peak only one version found stands
 * alone), with the shift in ppm and the relative change of area; ratios and δ by ratio id;
 * QC flags added and removed.
 */
export function figuresDiff(before: Summary, after: Summary) {
  const a = partnerFigures(before)
  const b = partnerFigures(after)
  const used = new Set<number>()
  const peaks: { old: Figures['peaks'][number] | null, new: Figures['peaks'][number] | null, mzShiftPpm: number | null, areaChangePercent: number | null }[] = []
  for (const p of a.peaks) {
    let best = -1
    for (let j = 0; j < b.peaks.length; j++) {
      if (used.has(j) || Math.abs(b.peaks[j]!.mz - p.mz) > PAIR_WITHIN_MZ) continue
      if (best < 0 || Math.abs(b.peaks[j]!.mz - p.mz) < Math.abs(b.peaks[best]!.mz - p.mz)) best = j
    }
    if (best < 0) { peaks.push({ old: p, new: null, mzShiftPpm: null, areaChangePercent: null }); continue }
    used.add(best)
    const q = b.peaks[best]!
    peaks.push({ old: p, new: q, mzShiftPpm: (q.mz - p.mz) / p.mz * 1e6, areaChangePercent: p.area ? (q.area - p.area) / p.area * 100 : null })
  }
  b.peaks.forEach((q, j) => { if (!used.has(j)) peaks.push({ old: null, new: q, mzShiftPpm: null, areaChangePercent: null }) })
  peaks.sort((x, y) => (x.new?.mz ?? x.old!.mz) - (y.new?.mz ?? y.old!.mz))
  const ids = [...new Set([...a.ratios.map(r => r.id), ...b.ratios.map(r => r.id)])]
  const ratios = ids.map((id) => {
    const o = a.ratios.find(r => r.id === id) ?? null
    const n = b.ratios.find(r => r.id === id) ?? null
    return { id, old: o, new: n, deltaChangePermil: o && n ? n.deltaPermil - o.deltaPermil : null }
  })
  return {
    peaks,
    ratios,
    flags: { old: a.flags, new: b.flags, added: b.flags.filter(f => !a.flags.includes(f)), removed: a.flags.filter(f => !b.flags.includes(f)) },
    calibrated: { old: a.calibrated, new: b.calibrated },
    changed: figuresChanged(before, after),
  }
}
