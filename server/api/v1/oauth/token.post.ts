import { tokenRequest } from '#shared/schemas/partners'

// OAuth 2.0 token endpoint (RFC 6749 §4.4): form-encoded body, client credentials in the
// body or in HTTP Basic (§2.3.1).
export default defineEventHandler(async (event) => {
  const form = tokenRequest.safeParse(await readFormOrJson(event))
  if (!form.success) throw problem(400, 'oauth-invalid_request', 'grant_type is required.', { errors: fieldErrors(form.error) })
  const basic = basicCredentials(getRequestHeader(event, 'authorization'))
  setResponseHeader(event, 'cache-control', 'no-store')
  return issueAccessToken(auditContext(event), { grantType: form.data.grant_type, clientId: basic?.id ?? form.data.client_id, clientSecret: basic?.secret ?? form.data.client_secret, scope: form.data.scope })
})

async function readFormOrJson(event: Parameters<typeof readRawBody>[0]): Promise<Record<string, string>> {
  const type = getRequestHeader(event, 'content-type') ?? ''
  const raw = (await readRawBody(event, 'utf8')) ?? ''
  if (type.includes('application/json')) {
    try { return JSON.parse(raw) }
    catch { throw problem(400, 'malformed-json', 'The request body is not valid JSON.') }
  }
  return Object.fromEntries(new URLSearchParams(raw))
}
