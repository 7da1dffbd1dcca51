import { gasRatios, measuredItems, molecularDelta } from './deltaSteps'
import type { DeltaRun } from './processDeltaSequence'
import type { SequenceItem } from './types'

// Errors common to many acquisitions, propagated once. The blank mean is subtracted from every
// acquisition; a reference-gas acquisition brackets its neighbours (anchors and samples alike)
// and, for H2, sets the H3+ factor. Added to each acquisition's u they are averaged down in the
// anchors' means and counted again at the samples, and the normalisation cannot see that they
// cancel between anchor and sample. Instead each input is moved by its standard uncertainty
// and the whole sequence reprocessed; every result's change is that input's contribution
// c·u(x), squared into u² (GUM JCGM 100:2008 5.1.3 and 5.2: sensitivities by finite difference,
// the correlation through the anchors kept because anchors and samples move together).
// The drift slope is carried the same way, inside the normalisation (deltaNormalise.ts).

export const SHARED_TERMS_SOURCE = 'GUM JCGM 100:2008 5.2 (correlated inputs): each shared input moved by its u and the sequence reprocessed'

export function addSharedTerms(base: DeltaRun, items: SequenceItem[], rerun: (items: SequenceItem[], blankShift?: Record<string, number>) => DeltaRun): { term: string, u: number }[] {
  const extra = new Map<number, Record<string, number>>()
  const terms: { term: string, u: number }[] = []
  const byPosition = new Map(base.work.map(w => [w.item.position, w]))
  const collect = (term: string, u: number, run: DeltaRun) => {
    terms.push({ term, u })
    run.work.filter(measuredItems).forEach((w) => {
      const b = byPosition.get(w.item.position)!
      const acc = extra.get(w.item.position) ?? {}
      for (const q of base.quantities) {
        if (b.values[q] && w.values[q]) acc[q] = (acc[q] ?? 0) + (w.values[q]!.value - b.values[q]!.value) ** 2
      }
      extra.set(w.item.position, acc)
    })
  }
  const blank = base.steps.find(s => s.step === 'blank')?.parameters.mean as Record<string, { value: number, u: number }> | undefined
  for (const [mz, m] of Object.entries(blank ?? {})) if (m.u > 0) collect(`blank m/z ${mz}`, m.u, rerun(items, { [mz]: m.u }))
  if (base.steps.some(s => s.step === 'reference-gas')) {
    const keys = [...gasRatios[base.gas].required, ...gasRatios[base.gas].optional]
    items.forEach((item, i) => {
      if (item.role !== 'reference-gas') return
      for (const key of keys) {
        const r = ratioOf(item, key)
        if (!r || !(r.u > 0)) continue
        const changed = items.map((x, j) => j === i ? { ...x, ratios: { ...x.ratios, [key]: { value: r.value + r.u, u: r.u } } } : x)
        collect(`reference gas ${item.position} ${molecularDelta(key)}`, r.u, rerun(changed))
      }
    })
  }
  for (const w of base.work.filter(measuredItems)) {
    const acc = extra.get(w.item.position)
    for (const q of base.quantities) {
      const v = w.values[q]
      if (v && acc?.[q]) w.values[q] = { value: v.value, u: Math.sqrt(v.u ** 2 + acc[q]) }
    }
  }
  return terms
}

function ratioOf(item: SequenceItem, key: string): { value: number, u: number } | undefined {
  if (Object.hasOwn(item.ratios, key)) return item.ratios[key]
  const [h, l] = key.split('/')
  const hb = Object.hasOwn(item.beams, h!) ? item.beams[h!] : undefined
  const lb = Object.hasOwn(item.beams, l!) ? item.beams[l!] : undefined
  if (!hb || !lb || !(lb.value > 0)) return undefined
  const value = hb.value / lb.value
  return { value, u: Math.abs(value) * Math.hypot(hb.u / hb.value, lb.u / lb.value) }
}
