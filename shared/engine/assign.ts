import { ionMz, type Species } from './species'

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
}

interface Line { mz: number, species: Species, z: number }

/** A sorted table of candidate ion lines at charges 1..maxCharge, for binary search. */
export class CandidateTable {
  private readonly lines: Line[]
  constructor(species: Species[], maxCharge = 3) {
    this.lines = []
    for (const s of species) for (let z = 1; z <= maxCharge; z++) this.lines.push({ mz: ionMz(s.mass, z), species: s, z })
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
export function assignPeak(table: CandidateTable, mz: number, fwhm: number, tol: Tolerance): Assignment {
  const within = table.near(mz, tol)
  const first = within[0]
  if (!first) return { candidates: within, best: null, ambiguous: false }
  const rivals = table.near(first.mz, { abs: fwhm }).filter(c => !(c.species === first.species && c.z === first.z))
  const candidates = [...within, ...rivals.filter(r => !within.some(w => w.species === r.species && w.z === r.z))]
    .map(c => (c.mz === first.mz ? c : { ...c, errorMz: mz - c.mz, errorPpm: (mz - c.mz) / c.mz * 1e6 }))
    .sort((a, b) => Math.abs(a.errorMz) - Math.abs(b.errorMz))
  const ambiguous = rivals.length > 0
  return { candidates, best: ambiguous ? null : first, ambiguous }
}

/** Pairs of peaks that are the z=1 and z=2 lines of one species: [index of z=1, index of z=2]. */
export function linkChargeStates(assignments: (Assignment | null)[]): [number, number][] {
  const byKey = new Map<string, number>()
  assignments.forEach((a, i) => { if (a?.best) byKey.set(`${a.best.species}|${a.best.z}`, i) })
  const links: [number, number][] = []
  for (const [key, i] of byKey) {
    const [species, z] = key.split('|')
    if (z !== '1') continue
    const j = byKey.get(`${species}|2`)
    if (j !== undefined) links.push([i, j])
  }
  return links
}
