import { calibrationFromReferenceInput, labInstrumentParams } from '#shared/schemas/instruments'

// A calibration fitted from a reference acquisition, for review; nothing is stored.
export default defineEventHandler(async (event) => {
  const { id, instrumentId } = getValidParams(event, labInstrumentParams)
  await requireLabAccess(event, id, 'write')
  await assertInstrument(id, instrumentId)
  return calibrationFromReference(id, instrumentId, await readValidBody(event, calibrationFromReferenceInput))
})
