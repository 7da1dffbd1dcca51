import { eq } from 'drizzle-orm'
import type { ReleaseSettingsInput } from '#shared/schemas/review'
import { labs } from '../../database/schema'

// A lab's release settings: hold everything for review, or release automatically what raises
// no QC flag beyond those the lab accepts; and the four-eyes rule.

const columns = { releasePolicy: labs.releasePolicy, autoReleaseAllows: labs.autoReleaseAllows, fourEyes: labs.fourEyes }

export async function releaseSettings(labId: string) {
  const [row] = await useDb().select(columns).from(labs).where(eq(labs.id, labId))
  if (!row) throw problem(404, 'lab-not-found', 'No such lab.')
  return row
}

/** Changes the lab's release settings; the audit log keeps the old and the new. */
export async function updateReleaseSettings(audit: AuditContext, labId: string, input: ReleaseSettingsInput) {
  return useDb().transaction(async (tx) => {
    const [before] = await tx.select(columns).from(labs).where(eq(labs.id, labId)).for('update')
    if (!before) throw problem(404, 'lab-not-found', 'No such lab.')
    const [after] = await tx.update(labs).set({ ...input, updatedAt: new Date() }).where(eq(labs.id, labId)).returning(columns)
    await recordAudit(tx, { ...audit, action: 'lab.release-policy-changed', targetType: 'lab', targetId: labId, detail: { before, after } })
    return after!
  })
}
