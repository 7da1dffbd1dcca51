import type { InternalApi } from 'nitropack/types'
import type { z } from 'zod'
import type { CalibrationFit, CalibrationPoint, Geometry } from '#shared/engine'
import type { acquisitionView } from '#shared/schemas/responses'

// Names for what console routes answer, for props and helpers. Nothing here restates a shape:
// each is the type Nitro infers from the route's handler (dates arrive as ISO strings), or a
// zod response schema's. A page that only reads an answer needs none of them:
// `useFetch('/api/console/…')` is typed already.

/** What a route answers to a method, as the browser receives it. */
export type Answer<Route extends keyof InternalApi, Method extends keyof InternalApi[Route] = 'get' & keyof InternalApi[Route]> = InternalApi[Route][Method]
type Item<T> = T extends { items: (infer I)[] } ? I : never

export type EndpointView = Item<Answer<'/api/console/partners/:id/endpoints'>>
export type DeliveryListItem = Item<Answer<'/api/console/partners/:id/deliveries'>>
export type ExchangeSchemaView = Item<Answer<'/api/console/schemas'>>
export type KeyView = Item<Answer<'/api/console/labs/:id/keys'>>
export type GrantView = Item<Answer<'/api/console/labs/:id/grants'>>
export type PartnerClientView = Item<Answer<'/api/console/partners/:id/clients'>>
export type CreatedPartnerClient = Answer<'/api/console/partners/:id/clients', 'post'>
export type InstrumentListItem = Item<Answer<'/api/console/labs/:id/instruments'>>
export type AcquisitionListItem = Item<Answer<'/api/console/labs/:id/acquisitions'>>
export type UserListItem = Item<Answer<'/api/console/users'>>
export type InvitationView = Item<Answer<'/api/console/invitations'>>
export type AuditEntry = Item<Answer<'/api/console/audit'>>
export type AcquisitionActivityView = NonNullable<Answer<'/api/console/overview'>['activity']>
export type CalibrationProposal = Answer<'/api/console/labs/:id/instruments/:instrumentId/calibrations/preview', 'post'>
// A lab's or partner's row as OrgForm saves it: its path is built from the kind.
export type SavedOrg = Answer<'/api/console/labs/:id', 'patch'> | Answer<'/api/console/partners/:id', 'patch'>
export type CreatedOrg = Answer<'/api/console/labs', 'post'> | Answer<'/api/console/partners', 'post'>
// Seven-segment paths as well: their $fetch is typed by name (reprocessing's cancel and release).
export type CancelledReprocessJob = Answer<'/api/console/labs/:id/reprocess-jobs/:jobId/cancel', 'post'>
export type ReleasedCorrection = Answer<'/api/console/labs/:id/results/:resultId/release-correction', 'post'>

/** The engine's result as the API defines it (shared/schemas/responses.ts). */
export type ResultView = z.infer<typeof acquisitionView>['result']

// Geometry parameters and calibration fits are jsonb columns, which the database schema types
// as records: the instrument's answer names what they hold by the engine's own types.
type InstrumentAnswer = Answer<'/api/console/labs/:id/instruments/:instrumentId'>
export type InstrumentDetail = Omit<InstrumentAnswer, 'geometryVersions' | 'calibrations'> & {
  geometryVersions: (Omit<InstrumentAnswer['geometryVersions'][number], 'params' | 'kind'> & { kind: Geometry['kind'], params: Geometry })[]
  calibrations: (Omit<InstrumentAnswer['calibrations'][number], 'fit' | 'points'> & { fit: CalibrationFit, points: CalibrationPoint[] })[]
}
