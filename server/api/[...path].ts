// Every /api path that no route claims: a problem document rather than the HTML 404 page.
export default defineEventHandler((event) => {
  throw problem(404, 'not-found', `No API route ${event.method} ${event.path.split('?')[0]}.`)
})
