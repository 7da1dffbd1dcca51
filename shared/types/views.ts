import type { z } from 'zod'
import type { CalibrationFit } from '../engine/calibrate'
import type { Geometry } from '../engine/geometry'
import type { acquisitionListView, acquisitionView } from '../schemas/responses'
import type { LabInput, PartnerInput } from '../schemas/orgs'

// What the console routes answer, as the browser sees it (dates arrive as ISO strings).
export type LabView = LabInput & { id: string, createdAt: string, updatedAt: string }
export type PartnerView = PartnerInput & { id: string, createdAt: string, updatedAt: string }

/** A webhook endpoint as the console routes answer it (never its secret). */
export interface EndpointView {
  id: string, partnerId: string, url: string, description: string, eventTypes: string[], labIds: string[], schemaVersion: number
  status: 'active' | 'paused' | 'disabled', disabledReason: string | null, failingSince: string | null, previousSecretUntil: string | null
  createdAt: string, updatedAt: string
}
export interface GrantedLabView { id: string, slug: string, name: string, eventTypes: string[] }

/** One row of the delivery log; `state` is `failing` for a pending delivery that has failed before. */
export interface DeliveryListItem {
  id: string, endpointId: string, url: string, eventType: string, eventId: string | null, lab: string | null, sequence: number | null
  status: 'pending' | 'succeeded' | 'dead', state: 'pending' | 'failing' | 'succeeded' | 'dead', attempts: number
  lastClass: string | null, lastStatusCode: number | null, nextAttemptAt: string | null, createdAt: string, finishedAt: string | null
}
export interface DeliveryPage { items: DeliveryListItem[], nextCursor: string | null }
export interface DeliveryAttemptView {
  id: number, number: number, at: string, durationMs: number, class: string, statusCode: number | null, error: string | null
  responseExcerpt: string | null, requestHeaders: Record<string, string>, requestBody: string, replay: boolean
}
export interface DeliveryDetail {
  id: string, endpointId: string, url: string, eventId: string | null, eventType: string, status: 'pending' | 'succeeded' | 'dead', attempts: DeliveryAttemptView[]
  nextAttemptAt: string, createdAt: string, finishedAt: string | null, lastClass: string | null, lastStatusCode: number | null, replayRequested: boolean
}
export interface TestSendView { deliveryId: string, ok: boolean, class: string, statusCode: number | null, durationMs: number, error: string | null, responseExcerpt: string | null }

/** A lab key as the console lists it: never its secret or hash. */
export interface KeyView {
  id: string, labId: string, name: string, prefix: string, scopes: string[], expiresAt: string | null, revokedAt: string | null, lastUsedAt: string | null, createdAt: string
}

/** An exchange schema version with who still uses it. */
export interface ExchangeSchemaView {
  id: string, name: string, version: number, status: 'current' | 'deprecated' | 'retired', deprecatedAt: string | null, sunsetAt: string | null
  usedBy: { lab: string, labName: string, uses: number, lastUsedAt: string }[]
}

/** A lab's grant to a partner. */
export interface GrantView { id: string, labId: string, partnerId: string, partnerName: string, eventTypes: string[], createdAt: string }

/** A partner's OAuth client as the console lists it: never its secret or hash. */
export interface PartnerClientView { id: string, partnerId: string, name: string, clientId: string, scopes: string[], revokedAt: string | null, lastUsedAt: string | null, createdAt: string }

/** An instrument as a lab's list shows it, with the geometry version in force now. */
export interface InstrumentListItem {
  id: string, labId: string, slug: string, name: string, createdAt: string
  geometry: { version: number, kind: Geometry['kind'], validFrom: string } | null
}
export interface GeometryVersionView { id: string, version: number, kind: Geometry['kind'], params: Geometry, validFrom: string, note: string | null, createdAt: string }
export interface CalibrationView {
  id: string, version: number, validFrom: string, createdAt: string
  fit: CalibrationFit, points: { measuredMz: number, referenceMz: number, label?: string }[]
  /** The geometry version it was fitted under; retired once another version is in force. */
  geometryVersion: number | null, retired: boolean
}
export interface InstrumentDetail {
  id: string, labId: string, slug: string, name: string, createdAt: string
  geometryVersions: GeometryVersionView[], calibrations: CalibrationView[]
}
/** A calibration fitted from a reference acquisition, for review before it is saved. */
export interface CalibrationProposal {
  acquisitionId: string, runId: string, geometryVersion: number
  points: { measuredMz: number, referenceMz: number, label: string }[], fit: CalibrationFit
}

export type AcquisitionListPage = z.infer<typeof acquisitionListView>
export type AcquisitionListItem = AcquisitionListPage['items'][number]
/** One acquisition in the console: the API's view plus where it came from and the start of its raw payload. */
export type AcquisitionDetailView = z.infer<typeof acquisitionView> & {
  instrumentId: string, instrumentName: string, geometryKind: Geometry['kind']
  payload: { head: string, chars: number, truncated: boolean }
}

/** The overview's acquisition figures: per lab per day, per hour for the last day, recent QC flags. */
export interface AcquisitionActivityView {
  days: string[]
  perLab: { labId: string, lab: string, counts: number[] }[]
  hourly: { hour: string, n: number }[]
  last24h: number
  recentQc: { id: string, labId: string, lab: string, runId: string, receivedAt: string, flags: { code: string, message: string }[] }[]
}
