export default defineEventHandler(event => requireUser(event))
