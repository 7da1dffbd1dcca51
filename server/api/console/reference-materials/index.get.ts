import type { ReferenceMaterialView } from '#shared/schemas/isotopeViews'
import { listReferenceMaterials } from '../../../services/sequences'

// The registry is the same for every lab and holds no lab's data: any signed-in user may read it.
export default defineEventHandler(async (event) => {
  await requireUser(event)
  const rows = await listReferenceMaterials()
  const items: ReferenceMaterialView[] = rows.map(r => ({ id: r.id, name: r.name, values: r.values, source: r.source, fromMemory: r.fromMemory }))
  return { items }
})
