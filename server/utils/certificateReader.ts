import type { H3Event } from 'h3'
import type { CertificateReader } from '../services/certificates'

/**
 * Who asks for a result's certificate over API v1: a lab key (`Bearer awk_…`, scope
 * results:read: the lab's own results) or a partner's access token (scope results:read: the
 * results of labs that grant it), with the audit context naming them.
 */
export async function requireCertificateReader(event: H3Event): Promise<{ reader: CertificateReader, audit: AuditContext }> {
  const ip = clientAddress(event)
  if ((getRequestHeader(event, 'authorization') ?? '').startsWith('Bearer awk_')) {
    const key = await requireLabKey(event, 'results:read')
    return { reader: { labId: key.labId }, audit: { actor: { id: null, label: `lab key ${key.name}` }, ip } }
  }
  const token = await requirePartnerToken(event, 'results:read')
  return { reader: { partnerId: token.partnerId }, audit: { actor: { id: null, label: `client:${token.clientId}` }, ip } }
}
