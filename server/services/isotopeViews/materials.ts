import { and, asc, eq, inArray } from 'drizzle-orm'
import type { Measured } from '#shared/engine/isotopes/types'
import { referenceMaterials, workingStandards } from '../../database/schema'

export interface SequenceMaterialInfo { name: string, values: Record<string, Measured>, source: string }

/**
 * What a sequence's materials are: reference materials by id, else the lab's working standard
 * of that code in force at `at` (the version whose validity holds it).
 */
export async function sequenceMaterialsAt(labId: string, codes: string[], at: Date): Promise<Map<string, SequenceMaterialInfo>> {
  const found = new Map<string, SequenceMaterialInfo>()
  if (!codes.length) return found
  const refs = await useDb().select().from(referenceMaterials).where(inArray(referenceMaterials.id, codes))
  for (const r of refs) found.set(r.id, { name: r.name, values: r.values, source: `${r.source}${r.fromMemory ? ' (typed from memory)' : ''}` })
  const rest = codes.filter(c => !found.has(c))
  if (!rest.length) return found
  const standards = await useDb().select().from(workingStandards)
    .where(and(eq(workingStandards.labId, labId), inArray(workingStandards.code, rest))).orderBy(asc(workingStandards.version))
  for (const s of standards) {
    const inForce = s.validFrom <= at && (!s.validTo || s.validTo > at)
    if (inForce || !found.has(s.code)) {
      found.set(s.code, { name: s.name, values: s.values, source: `working standard v${s.version}, calibrated against ${s.calibratedAgainst.join(', ') || 'the lab\'s own references'}${s.note ? ` (${s.note})` : ''}` })
    }
  }
  return found
}
