import { ionMz, naturalIsotopes, type Species } from './species'

export interface Tolerance { ppm?: number, abs?: number }

export interface Candidate {
  species: string
  kind: Species['kind']
  z: number
  /** m/z of the candidate ion. */
  mz: number
  /** Neutral mass of the species. */
  neutralMass: number
  /** measured − candidate, in u/e and in ppm. */
  errorMz: number
  errorPpm: number
}

export interface Assignment {
  candidates: Candidate[]
  /** The best candidate, or null when none is within tolerance or the best is ambiguous. */
  best: Candidate | null
  /** Two or more candidates closer together than the instrument resolves at this peak. */
  ambiguous: boolean
  /** The closest candidate within the window, before rivals are weighed. */
  first?: Candidate | null
  /** Other lines closer to the first than the FWHM: rivals, unless their expected signal is below the noise. */
  rivals?: Candidate[]
}

interface Line { mz: number, species: Species, z: number }

/**
 * The element and mass number of a species that is one isotope ("36Ar", or a formula written
 * "[36Ar]"), else null (a molecule or fragment).
 */
export function isotopeOf(label: string): { element: string, massNumber: number } | null {
  const m = /^\[?(\d{1,3})([A-Z][a-z]?)\]?$/.exec(label)
  return m ? { element: m[2]!, massNumber: Number(m[1]) } : null
}

/** A sorted table of candidate ion lines at charges 1..maxCharge, for binary search. */
export class CandidateTable {
  private readonly lines: Line[]
  constructor(species: Species[], maxCharge = 3, measured?: string[]) {
    this.lines = []
    // An instrument that names the species it measures (labels, or element symbols for all
    // of an element's isotopes) keeps only those as candidates.
    const keep = measured?.length ? new Set(measured) : null
    const kept = keep ? species.filter(s => keep.has(s.label) || keep.has(isotopeOf(s.label)?.element ?? '')) : species
    for (const s of kept) for (let z = 1; z <= maxCharge; z++) this.lines.push({ mz: ionMz(s.mass, z), species: s, z })
    this.lines.sort((a, b) => a.mz - b.mz)
  }

  private lowerBound(mz: number): number {
    let lo = 0
    let hi = this.lines.length
    while (lo < hi) { const mid = (lo + hi) >> 1; if (this.lines[mid]!.mz < mz) lo = mid + 1; else hi = mid }
    return lo
  }

  /** Candidates within tolerance of `mz`, closest first. */
  near(mz: number, tol: Tolerance): Candidate[] {
    const window = Math.max(tol.abs ?? 0, mz * (tol.ppm ?? 0) * 1e-6)
    const out: Candidate[] = []
    for (let i = this.lowerBound(mz - window); i < this.lines.length && this.lines[i]!.mz <= mz + window; i++) {
      const line = this.lines[i]!
      const errorMz = mz - line.mz
      out.push({ species: line.species.label, kind: line.species.kind, z: line.z, mz: line.mz, neutralMass: line.species.mass, errorMz, errorPpm: errorMz / line.mz * 1e6 })
    }
    return out.sort((a, b) => Math.abs(a.errorMz) - Math.abs(b.errorMz))
  }
}

/**
 * Assigns a peak at `mz` whose FWHM is `fwhm`. The best candidate must lie within tolerance;
 * any other candidate line closer to it than the FWHM (inside or outside the tolerance)
 * could not be told apart by this instrument here, so the peak is flagged ambiguous and
 * left unassigned rather than guessed.
 */
export function assignPeak(table: CandidateTable, mz: number, fwhm: number, tol: Tolerance, centroidU = 0): Assignment {
  // The window widens with the peak's own centroid uncertainty (3u in quadrature with the
  // tolerance), so a weak peak is not dropped by a fixed ppm window (common practice, no source).
  const window = Math.max(tol.abs ?? 0, mz * (tol.ppm ?? 0) * 1e-6)
  const within = table.near(mz, { abs: Math.hypot(window, 3 * centroidU) })
  const first = within[0]
  if (!first) return { candidates: within, best: null, ambiguous: false, first: null, rivals: [] }
  const rivals = table.near(first.mz, { abs: fwhm }).filter(c => !(c.species === first.species && c.z === first.z))
  const candidates = [...within, ...rivals.filter(r => !within.some(w => w.species === r.species && w.z === r.z))]
    .map(c => (c.mz === first.mz ? c : { ...c, errorMz: mz - c.mz, errorPpm: (mz - c.mz) / c.mz * 1e6 }))
    .sort((a, b) => Math.abs(a.errorMz) - Math.abs(b.errorMz))
  const ambiguous = rivals.length > 0
  return { candidates, best: ambiguous ? null : first, ambiguous, first, rivals }
}

/** Pairs of peaks that are the z=1 and z=2 lines of one species: [index of z=1, index of z=2]. */
export function linkChargeStates(assignments: (Assignment | null)[]): [number, number][] {
  // The last peak of each species at z = 1 and at z = 2, species in the order first seen at
  // z = 1 (keyed by species alone: keys built from strings were a measurable share of a
  // small spectrum's cost, DEVELOPERS.md, Measured).
  const single = new Map<string, number>()
  const double = new Map<string, number>()
  assignments.forEach((a, i) => {
    if (a?.best?.z === 1) single.set(a.best.species, i)
    else if (a?.best?.z === 2) double.set(a.best.species, i)
  })
  const links: [number, number][] = []
  for (const [species, i] of single) {
    const j = double.get(species)
    if (j !== undefined) links.push([i, j])
  }
  return links
}

/** A peak's first candidate and its height, as seen in the same spectrum. */
export interface ObservedLine { species: string, z: number, height: number }

let elementTable: Map<string, Species[]> | undefined
function isotopesOfElement(element: string): Species[] {
  if (!elementTable) {
    elementTable = new Map()
    for (const s of naturalIsotopes()) {
      const e = isotopeOf(s.label)?.element
      if (e) elementTable.set(e, [...(elementTable.get(e) ?? []), s])
    }
  }
  return elementTable.get(element) ?? []
}

/**
 * The signal a rival line would give, from what the spectrum shows: for an isotope, the
 * abundance ratio to a co-isotope observed at the same charge times that co-isotope's height
 * (IUPAC isotopic compositions through chemical-elements); when no co-isotope was seen and the
 * element's most abundant line lies in the sweep, at most the ratio times the detection limit.
 * Infinity when nothing bounds it (a molecule or fragment, or the major line is out of range).
 */
export function expectedSignal(rival: Candidate, observed: ObservedLine[], sweep: { mzMin: number, mzMax: number, detectionLimit: number }): number {
  const iso = isotopeOf(rival.species)
  if (!iso) return Infinity
  const family = isotopesOfElement(iso.element)
  const abundance = (massNumber: number) => family.find(s => isotopeOf(s.label)?.massNumber === massNumber)?.abundance ?? null
  const own = abundance(iso.massNumber)
  if (own === null) return Infinity
  let best = -Infinity
  for (const o of observed) {
    const other = isotopeOf(o.species)
    if (!other || other.element !== iso.element || other.massNumber === iso.massNumber || o.z !== rival.z) continue
    const theirs = abundance(other.massNumber)
    if (theirs) best = Math.max(best, own / theirs * o.height)
  }
  if (best > -Infinity) return best
  const major = family.reduce<Species | null>((m, s) => (!m || (s.abundance ?? 0) > (m.abundance ?? 0) ? s : m), null)
  if (!major || !major.abundance) return Infinity
  const majorMz = ionMz(major.mass, rival.z)
  return majorMz >= sweep.mzMin && majorMz <= sweep.mzMax ? own / major.abundance * sweep.detectionLimit : Infinity
}
