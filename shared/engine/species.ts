import { isotopesObject } from 'chemical-elements'
import { MF } from 'mf-parser'
import { ELECTRON_MASS_U } from './constants'
import { EngineError } from './errors'

// Candidate species for assignment: every isotope in the table of chemical-elements
// (AME2020 masses, IUPAC abundances) and the molecular and fragment ions a lab registers
// as formulas (mf-parser notation, isotopes in brackets: "[13C]O2", "N2", "[36Ar]").

export interface Species {
  /** Label as people write it: "40Ar", "CO2", "[13C]O2". */
  label: string
  /** Neutral monoisotopic mass in u. */
  mass: number
  /** Natural abundance (mole fraction) of an isotope; null for registered formulas. */
  abundance: number | null
  kind: 'isotope' | 'formula'
}

const isotopeTable = isotopesObject as Record<string, { mass: number, abundance?: number }>

/** Isotopes with a natural abundance (stable or primordial), from chemical-elements. */
export function naturalIsotopes(): Species[] {
  const out: Species[] = []
  for (const [label, iso] of Object.entries(isotopeTable)) {
    if (iso.abundance && iso.abundance > 0) out.push({ label, mass: iso.mass, abundance: iso.abundance, kind: 'isotope' })
  }
  return out.sort((a, b) => a.mass - b.mass)
}

export function isotope(label: string): Species {
  const iso = isotopeTable[label]
  if (!iso) throw new EngineError('species', 'unknown-isotope', `unknown isotope "${label}"`)
  return { label, mass: iso.mass, abundance: iso.abundance ?? null, kind: 'isotope' }
}

/** A registered molecular or fragment ion, by formula; neutral monoisotopic mass. */
export function formulaSpecies(formula: string, field = 'formula'): Species {
  let mass: number
  try { mass = new MF(formula).getInfo().monoisotopicMass }
  catch (error) { throw new EngineError(field, 'bad-formula', `cannot read formula "${formula}": ${(error as Error).message}`) }
  if (!Number.isFinite(mass) || mass <= 0) throw new EngineError(field, 'bad-formula', `formula "${formula}" has no mass`)
  return { label: formula, mass, abundance: null, kind: 'formula' }
}

/** m/z of the ion that lost z electrons: (M − z·m_e) / z. */
export function ionMz(neutralMass: number, z: number): number {
  return (neutralMass - z * ELECTRON_MASS_U) / z
}

/** The neutral mass a measured m/z implies for charge z: z·(m/z) + z·m_e. */
export function neutralMassFromMz(mz: number, z: number): number {
  return z * mz + z * ELECTRON_MASS_U
}
