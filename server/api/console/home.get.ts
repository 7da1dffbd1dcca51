// What needs the signed-in person now: their lab's instruments and review queue, their
// partner's endpoints and dead deliveries, or the hub's trouble spots; each within their scope.
export default defineEventHandler(async (event) => {
  const user = await requireUser(event)
  return homeFor(user)
})
