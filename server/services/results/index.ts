// Results: a lab's acquisitions and their results as the API and the console show them,
// the stored payload, and the spectrum recomputed for plots and exports.
export { listAcquisitions, getAcquisition, getLabAcquisition, acquisitionDetail, acquisitionPayload, acquisitionReceivedBody, resultChoice, previousPublished, type ResultChoice } from './acquisitions'
export { spectrumOf, spectrumExport, spectrumBinary, attachmentName, type Spectrum, type SpectrumFormat } from './spectra'
export { acquisitionHead, resultView, reviewOf, type AcquisitionHead, type AcquisitionResultView } from './view'
