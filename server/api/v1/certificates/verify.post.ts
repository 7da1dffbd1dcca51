import { certificateVerifyInput } from '#shared/schemas/certificates'

// Public: anyone holding a certificate may check it. Counted per client address.
export default defineEventHandler(async (event) => {
  const perMinute = Number(useRuntimeConfig().rateLimit.verifyPerMinute)
  if (perMinute > 0) await consumePerMinute('certificate-verify', clientAddress(event), perMinute, s => `At most ${perMinute} certificate checks a minute from one address; retry in ${s} s.`)
  const input = await readValidBody(event, certificateVerifyInput)
  return verifyCertificate(input)
})
