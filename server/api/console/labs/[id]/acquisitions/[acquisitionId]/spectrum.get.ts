import { labAcquisitionParams } from '#shared/schemas/instruments'

// For the console's plot: float64 m/z then float64 signal (spectrumBinary); the unit in a header.
export default defineEventHandler(async (event) => {
  const { id, acquisitionId } = getValidParams(event, labAcquisitionParams)
  await requireLabAccess(event, id, 'read')
  const spectrum = await spectrumOf(id, acquisitionId)
  setResponseHeaders(event, { 'content-type': 'application/octet-stream', 'x-signal-unit': spectrum.unit, 'x-points': String(spectrum.mz.length) })
  return spectrumBinary(spectrum)
})
