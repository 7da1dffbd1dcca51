// Instruments: registration, geometry versions and calibrations, and what ingest needs of
// them at an acquisition's time.
export { listInstruments, assertInstrument, getInstrument, createInstrument, updateInstrument, addGeometryVersion, addCalibration, calibrationFromReference, instrumentContextAt, firstGeometryFrom, type InstrumentContext } from './instruments'
