// The reference-material registry is written into the database at every start (idempotent),
// so working standards and methods can name its materials.
export default defineNitroPlugin(() => {
  seedReferenceMaterials().catch(error => logError('[isotopes] reference materials not seeded', error))
})
