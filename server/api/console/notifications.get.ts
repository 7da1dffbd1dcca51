// The bell: what needs the signed-in person, derived from the data within their scope.
export default defineEventHandler(async (event) => {
  const user = await requireUser(event)
  return notificationsFor(user)
})
