import type { LabInput, PartnerInput } from '../schemas/orgs'

// What the console routes answer, as the browser sees it (dates arrive as ISO strings).
export type LabView = LabInput & { id: string, createdAt: string, updatedAt: string }
export type PartnerView = PartnerInput & { id: string, createdAt: string, updatedAt: string }
