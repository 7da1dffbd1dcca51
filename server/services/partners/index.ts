// Partners: labs' grants to them, their API clients and access tokens (JWKS), and what
// they read: the event feed, released results, peaks by m/z.
export { jwks, signingKey as hubSigningKey, createPartnerClient, listPartnerClients, revokePartnerClient, basicCredentials, issueAccessToken, verifyPartnerToken, type PartnerToken, type TokenRequest } from './clients'
export { listGrants, grantPartner, revokeGrant, labsGrantingPartner, grantablePartners, grantedLabIds } from './grants'
export { eventFeed, partnerResult, peaksInWindow } from './reads'
