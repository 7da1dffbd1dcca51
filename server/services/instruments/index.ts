// Instruments: registration, geometry versions and calibrations, and what ingest needs of
// them at an acquisition's time.
export { listInstruments, assertInstrument, getInstrument, createInstrument, renameInstrument, addGeometryVersion, addCalibration, calibrationFromReference, instrumentContextAt, firstGeometryFrom, type InstrumentContext } from './instruments'
