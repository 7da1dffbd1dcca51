// Every request that can carry a body gets its route's byte cap before any handler runs
// (server/utils/requestBody.ts): a declared length over it is 413 here, and whatever reads
// the body, h3's readers included, reads through the counter.
const payloadMethods = new Set(['POST', 'PUT', 'PATCH', 'DELETE'])

export default defineEventHandler((event) => {
  if (!payloadMethods.has(event.method)) return
  guardRequestBody(event, bodyCapOf(event.method, event.path))
})
